/* The cart's configuration: a CartConfig message (proto/veer/v1/link.proto)
 * into a player definition. A file of its own so that a cart that sets its
 * definition in code links none of it.
 * SPDX-License-Identifier: MIT */
#include <math.h>
#include <string.h>
#include "link_internal.h"
#include "wire_internal.h"

veer_status veer_player_def_from_pb(const uint8_t *config, size_t size, veer_player_def *out, veer_diag *diag) {
    if (!out) return veer__fail_plain(diag, VEER_ERR_NULL, "out is NULL");
    veer_v1_CartConfig m;
    veer_status st = veer__wire_decode(veer_v1_CartConfig_fields, &m, config, size, "cart config", diag);
    if (st != VEER_OK) return st;
    veer_player_def d = veer_default_player_def();
    d.link.cart = m.cart;
    if (!veer__wire_utf8_ok(m.cart_name))
        return veer__fail_plain(diag, VEER_ERR_VALUE, "cart config: cart_name is not valid UTF-8");
    memcpy(d.cart_name, m.cart_name, sizeof d.cart_name);
    d.cart_name[sizeof d.cart_name - 1] = 0;
    if (!m.has_drive) return veer__fail_plain(diag, VEER_ERR_VALUE, "cart config: the drive is missing");
    if ((st = veer__wire_drive_from_pb(&m.drive, &d.drive, diag))) return st;
    int n = veer_drive_module_count(&d.drive);
    if (n <= 0) return veer__fail_plain(diag, VEER_ERR_VALUE, "cart config: the drive has no modules");
    if (m.has_limits && (st = veer__wire_limits_from_pb(&m.limits, n, &d.limits, diag))) return st;
    if (m.has_link_timeout) {
        if (!isfinite(m.link_timeout))
            return veer__fail_plain(diag, VEER_ERR_VALUE, "cart config: link_timeout is not finite");
        d.link_timeout = m.link_timeout;
    }
    if (m.has_frame_size) {
        if (m.frame_size > VEER_LINK_FRAME_MAX)
            return veer__fail_plain(diag, VEER_ERR_VALUE, "cart config: frame_size %u is over %d bytes",
                                    (unsigned)m.frame_size, VEER_LINK_FRAME_MAX);
        d.link.frame_size = (int)m.frame_size;
    }
    d.link.max_plan_bytes = m.max_plan_bytes;
    d.max_knots = m.max_knots;
    d.max_waypoints = m.max_waypoints;
    d.max_legs = m.max_legs;
    *out = d;
    veer__diag_ok(diag);
    return VEER_OK;
}
