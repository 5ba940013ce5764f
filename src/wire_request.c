/* Messages <-> structs: decoding untrusted bytes with nanopb into fixed
 * structs, checking every value, and writing canonical messages back.
 * SPDX-License-Identifier: MIT */
#include <stddef.h>
#include <stdio.h>
#include <string.h>
#include "wire_internal.h"

#define NONE_ID veer__limit(VEER_LIMIT_NONE, -1)

static veer_status bad(veer_diag *diag, veer_status st, const char *fmt, const char *field, double v) {
    return veer__fail(diag, st, -1, -1, -1, -1.0, NONE_ID, fmt, field, v);
}

veer_status veer__wire_decode(const pb_msgdesc_t *fields, void *msg, const uint8_t *buf, size_t size,
                              const char *what, veer_diag *diag) {
    if (!buf && size > 0)
        return veer__fail_plain(diag, VEER_ERR_NULL, "%s: bytes pointer is NULL", what);
    static const uint8_t empty[1] = {0};
    pb_istream_t in = pb_istream_from_buffer(buf ? buf : empty, buf ? size : 0);
    if (pb_decode(&in, fields, msg)) return VEER_OK;
    const char *err = PB_GET_ERROR(&in);
    int over = strstr(err, "array overflow") || strstr(err, "bytes overflow") || strstr(err, "string overflow");
    if (over)
        return veer__fail_plain(diag, VEER_ERR_CAPACITY,
                                "%s: a list or string is longer than its capacity (%s)", what, err);
    return veer__fail_plain(diag, VEER_ERR_DECODE,
                            "%s: the %zu bytes do not decode (%s at byte %zu)", what, size, err,
                            size - (size_t)in.bytes_left);
}

veer_status veer__wire_encode(const pb_msgdesc_t *fields, const void *msg, uint8_t *out, size_t capacity,
                              size_t *size, veer_diag *diag) {
    size_t need = 0;
    if (!pb_get_encoded_size(&need, fields, msg))
        return veer__fail_plain(diag, VEER_ERR_CAPACITY, "the message cannot be encoded");
    *size = need;
    if (!out || capacity < need)
        return veer__fail_plain(diag, VEER_ERR_BUFFER,
                                "the output needs %zu bytes, capacity is %zu", need, out ? capacity : 0);
    pb_ostream_t os = pb_ostream_from_buffer(out, need);
    if (!pb_encode(&os, fields, msg) || os.bytes_written != need) /* cannot happen after sizing succeeded */
        return veer__fail_plain(diag, VEER_ERR_STATE, "encoding changed size (%s)",
                                PB_GET_ERROR(&os));
    return VEER_OK;
}

int veer__wire_status_to_pb(veer_status st) { return (int)st + 1; }

int veer__wire_utf8_ok(const char *s) {
    const unsigned char *p = (const unsigned char *)s;
    while (*p) {
        unsigned c = *p++;
        int more;
        unsigned min;
        if (c < 0x80) continue;
        if ((c & 0xE0) == 0xC0) more = 1, min = 0x80, c &= 0x1F;
        else if ((c & 0xF0) == 0xE0) more = 2, min = 0x800, c &= 0x0F;
        else if ((c & 0xF8) == 0xF0) more = 3, min = 0x10000, c &= 0x07;
        else return 0;
        for (int i = 0; i < more; i++) {
            if ((*p & 0xC0) != 0x80) return 0;
            c = (c << 6) | (*p++ & 0x3Fu);
        }
        if (c < min || c > 0x10FFFF || (c >= 0xD800 && c <= 0xDFFF)) return 0;
    }
    return 1;
}

/* A finite double, or a diagnostic naming the field. */
static veer_status finite(double v, const char *field, veer_diag *diag) {
    if (isfinite(v)) return VEER_OK;
    return bad(diag, VEER_ERR_VALUE, "%s is not finite (%g)", field, v);
}

/* ---- drive ------------------------------------------------------------- */

static const char *drive_kind_name(int kind) {
    switch (kind) {
    case VEER_DRIVE_STEERED: return "steered";
    case VEER_DRIVE_MECANUM: return "mecanum";
    case VEER_DRIVE_OMNI: return "omni";
    case VEER_DRIVE_DIFFERENTIAL: return "differential";
    }
    return "unknown";
}

/* An optional geometry field: applies to the listed kind only. */
static veer_status geometry(bool has, double v, int applies, const char *field, const char *kinds, double *dst,
                            veer_diag *diag) {
    if (!has) return VEER_OK;
    if (!applies)
        return veer__fail_plain(diag, VEER_ERR_VALUE, "drive.%s applies to %s drives only",
                                field, kinds);
    if (!isfinite(v)) return veer__fail_plain(diag, VEER_ERR_VALUE, "drive.%s is not finite (%g)", field, v);
    *dst = v;
    return VEER_OK;
}

veer_status veer__wire_drive_from_pb(const veer_v1_DriveDef *m, veer_drive_def *out, veer_diag *diag) {
    int kind = (int)m->kind;
    if (kind < VEER_DRIVE_STEERED || kind > VEER_DRIVE_DIFFERENTIAL)
        return veer__fail_plain(diag, VEER_ERR_VALUE,
                                kind == 0 ? "drive.kind is not set (steered, mecanum, omni or differential)"
                                    : "drive.kind has the unknown value %d",
                                kind);
    veer_drive_def d = veer_default_drive_def((veer_drive_kind)kind);
    int listed = kind == VEER_DRIVE_STEERED || kind == VEER_DRIVE_OMNI;
    if (m->modules_count > 0) {
        if (!listed)
            return veer__fail_plain(diag, VEER_ERR_VALUE,
                                    "drive.modules must be empty for a %s drive (its wheel order is fixed)",
                                    drive_kind_name(kind));
        if (m->modules_count > VEER_MAX_MODULES) /* nanopb enforces this already */
            return veer__fail_plain(diag, VEER_ERR_CAPACITY, "drive.modules has %d entries, at most %d",
                                    (int)m->modules_count, VEER_MAX_MODULES);
        d.module_count = (int)m->modules_count;
        for (int i = 0; i < d.module_count; i++) {
            const veer_v1_ModuleDef *md = &m->modules[i];
            const double v[3] = {md->x, md->y, md->drive_angle};
            static const char *const names[3] = {"x", "y", "drive_angle"};
            for (int c = 0; c < 3; c++) /* the field is named only when it fails */
                if (!isfinite(v[c]))
                    return veer__fail_plain(diag, VEER_ERR_VALUE, "drive.modules[%d].%s is not finite (%g)", i,
                                            names[c], v[c]);
            if (kind == VEER_DRIVE_STEERED && md->drive_angle != 0.0)
                return veer__fail_plain(diag, VEER_ERR_VALUE,
                                        "drive.modules[%d].drive_angle applies to omni drives only", i);
            d.modules[i].x = md->x;
            d.modules[i].y = md->y;
            d.modules[i].drive_angle = md->drive_angle;
        }
        for (int i = d.module_count; i < VEER_MAX_MODULES; i++) memset(&d.modules[i], 0, sizeof d.modules[i]);
    }
    for (int i = 0; i < (int)m->modules_out_count; i++) {
        int n = veer_drive_module_count(&d);
        if (m->modules_out[i] >= (uint32_t)n)
            return veer__fail_plain(diag, VEER_ERR_VALUE,
                                    "drive.modules_out[%d] is %u; the drive has modules 0..%d", i,
                                    (unsigned)m->modules_out[i], n - 1);
        d.modules[m->modules_out[i]].out = 1;
    }
    int mec = kind == VEER_DRIVE_MECANUM, dif = kind == VEER_DRIVE_DIFFERENTIAL;
    veer_status st;
    if ((st = geometry(m->has_wheel_radius, m->wheel_radius, 1, "wheel_radius", "all", &d.wheel_radius, diag)) ||
        (st = geometry(m->has_half_wheelbase, m->half_wheelbase, mec, "half_wheelbase", "mecanum", &d.half_wheelbase,
                       diag)) ||
        (st = geometry(m->has_half_track, m->half_track, mec, "half_track", "mecanum", &d.half_track, diag)) ||
        (st = geometry(m->has_roller_angle, m->roller_angle, mec, "roller_angle", "mecanum", &d.roller_angle, diag)) ||
        (st = geometry(m->has_track_width, m->track_width, dif, "track_width", "differential", &d.track_width,
                       diag)) ||
        (st = geometry(m->has_skid_factor, m->skid_factor, dif, "skid_factor", "differential", &d.skid_factor, diag)))
        return st;
    *out = d;
    return VEER_OK;
}

void veer__wire_drive_to_pb(const veer_drive_def *d, veer_v1_DriveDef *m) {
    memset(m, 0, sizeof *m);
    m->kind = (veer_v1_DriveKind)d->kind;
    if (d->kind == VEER_DRIVE_STEERED || d->kind == VEER_DRIVE_OMNI) {
        int n = d->module_count < 0 ? 0 : d->module_count > VEER_MAX_MODULES ? VEER_MAX_MODULES : d->module_count;
        m->modules_count = (pb_size_t)n;
        for (int i = 0; i < n; i++) {
            m->modules[i].x = d->modules[i].x;
            m->modules[i].y = d->modules[i].y;
            m->modules[i].drive_angle = d->kind == VEER_DRIVE_OMNI ? d->modules[i].drive_angle : 0.0;
        }
    }
    for (int i = 0; i < VEER_MAX_MODULES && i < veer_drive_module_count(d); i++)
        if (d->modules[i].out) m->modules_out[m->modules_out_count++] = (uint32_t)i;
    m->has_wheel_radius = true;
    m->wheel_radius = d->wheel_radius;
    if (d->kind == VEER_DRIVE_MECANUM) {
        m->has_half_wheelbase = m->has_half_track = m->has_roller_angle = true;
        m->half_wheelbase = d->half_wheelbase;
        m->half_track = d->half_track;
        m->roller_angle = d->roller_angle;
    }
    if (d->kind == VEER_DRIVE_DIFFERENTIAL) {
        m->has_track_width = m->has_skid_factor = true;
        m->track_width = d->track_width;
        m->skid_factor = d->skid_factor;
    }
}

/* ---- limits ------------------------------------------------------------ */

/* The optional limits of a message, one table row each: the field's name,
 * where the message keeps its presence flag and value, where the struct
 * keeps the value, and the value when unset. One loop reads them all and
 * one writes them back. */
typedef struct {
    const char *name;
    size_t has, value, out;
    double unset;
} limit_field;

#define MODULE_LIMIT_(f, unset) \
    {#f, offsetof(veer_v1_ModuleLimits, has_##f), offsetof(veer_v1_ModuleLimits, f), offsetof(veer_module_limits, f), \
     unset}
#define BODY_LIMIT_(f) \
    {#f, offsetof(veer_v1_Limits, has_##f), offsetof(veer_v1_Limits, f), offsetof(veer_limits, f), VEER_UNLIMITED}
static const limit_field module_limit_fields[] = {
    MODULE_LIMIT_(wheel_rate, VEER_UNLIMITED),  MODULE_LIMIT_(wheel_accel, VEER_UNLIMITED),
    MODULE_LIMIT_(steer_rate, VEER_UNLIMITED),  MODULE_LIMIT_(steer_min, -VEER_UNLIMITED),
    MODULE_LIMIT_(steer_max, VEER_UNLIMITED),   MODULE_LIMIT_(traction_mu, VEER_UNLIMITED),
    MODULE_LIMIT_(motor_stall_accel, VEER_UNLIMITED), MODULE_LIMIT_(motor_free_rate, VEER_UNLIMITED),
    MODULE_LIMIT_(wheel_jerk, VEER_UNLIMITED)};
static const limit_field body_limit_fields[] = {BODY_LIMIT_(body_speed), BODY_LIMIT_(body_accel), BODY_LIMIT_(yaw_rate),
                                                BODY_LIMIT_(yaw_accel), BODY_LIMIT_(body_jerk)};
#define COUNT_(a) ((int)(sizeof(a) / sizeof((a)[0])))

/* Reads n optional limits from msg into out: unset or +inf is unlimited;
 * NaN and -inf are refused (steer_min takes -inf as unlimited). module is
 * the index in limits.modules, or -1 for the body limits. */
static veer_status limits_in(const void *msg, const limit_field *f, int n, int module, void *out, veer_diag *diag) {
    for (int k = 0; k < n; k++, f++) {
        bool has;
        double v;
        memcpy(&has, (const char *)msg + f->has, sizeof has);
        memcpy(&v, (const char *)msg + f->value, sizeof v);
        if (!has) {
            v = f->unset;
        } else if (isnan(v) || (isinf(v) && v != f->unset)) {
            if (module < 0) return veer__fail_plain(diag, VEER_ERR_VALUE, "limits.%s is %g", f->name, v);
            return veer__fail_plain(diag, VEER_ERR_VALUE, "limits.modules[%d].%s is %g", module, f->name, v);
        }
        memcpy((char *)out + f->out, &v, sizeof v);
    }
    return VEER_OK;
}

/* Writes n limits from in into msg: present when finite. */
static void limits_out(const void *in, const limit_field *f, int n, void *msg) {
    for (int k = 0; k < n; k++, f++) {
        double v;
        memcpy(&v, (const char *)in + f->out, sizeof v);
        bool has = isfinite(v);
        memcpy((char *)msg + f->has, &has, sizeof has);
        if (has) memcpy((char *)msg + f->value, &v, sizeof v);
    }
}

veer_status veer__wire_limits_from_pb(const veer_v1_Limits *m, int module_count, veer_limits *out, veer_diag *diag) {
    veer_limits l;
    veer__limits_init(&l);
    int n = (int)m->modules_count;
    if (n != 0 && n != 1 && n != module_count)
        return veer__fail_plain(
            diag, VEER_ERR_VALUE,
            "limits.modules has %d entries: give none, one for every module, or one per module (%d)", n,
            module_count);
    veer_status st;
    for (int i = 0; i < n; i++) {
        veer_module_limits *ml = &l.modules[i];
        if ((st = limits_in(&m->modules[i], module_limit_fields, COUNT_(module_limit_fields), i, ml, diag)))
            return st;
        if (ml->steer_min > ml->steer_max)
            return veer__fail_plain(diag, VEER_ERR_VALUE, "limits.modules[%d]: steer_min %g is above steer_max %g", i,
                                    ml->steer_min, ml->steer_max);
    }
    if (n == 1)
        for (int i = 1; i < module_count; i++) l.modules[i] = l.modules[0];
    if ((st = limits_in(m, body_limit_fields, COUNT_(body_limit_fields), -1, &l, diag))) return st;
    *out = l;
    return VEER_OK;
}

void veer__wire_module_limits_to_pb(const veer_module_limits *l, veer_v1_ModuleLimits *m) {
    memset(m, 0, sizeof *m);
    limits_out(l, module_limit_fields, COUNT_(module_limit_fields), m);
}

static int same_module_limits(const veer_module_limits *a, const veer_module_limits *b) {
    return memcmp(a, b, sizeof *a) == 0;
}

void veer__wire_limits_to_pb(const veer_limits *l, int module_count, veer_v1_Limits *m) {
    memset(m, 0, sizeof *m);
    int n = module_count < 0 ? 0 : module_count > VEER_MAX_MODULES ? VEER_MAX_MODULES : module_count;
    int all_same = 1, any = 0;
    veer_module_limits unset = veer__default_module_limits();
    for (int i = 0; i < n; i++) {
        if (!same_module_limits(&l->modules[i], &l->modules[0])) all_same = 0;
        if (!same_module_limits(&l->modules[i], &unset)) any = 1;
    }
    if (any) {
        m->modules_count = (pb_size_t)(all_same ? 1 : n);
        for (int i = 0; i < (int)m->modules_count; i++) veer__wire_module_limits_to_pb(&l->modules[i], &m->modules[i]);
    }
    limits_out(l, body_limit_fields, COUNT_(body_limit_fields), m);
}

/* ---- route ------------------------------------------------------------- */

static veer_status route_value(double v, const char *fmt, int index, veer_diag *diag) {
    if (isfinite(v)) return VEER_OK;
    const char *name = fmt;
#ifdef VEER_TERSE_DIAG
    (void)index; /* the message is the status text: nothing to format */
#else
    char f[64];
    snprintf(f, sizeof f, fmt, index);
    name = f;
#endif
    return bad(diag, VEER_ERR_VALUE, "%s is not finite (%g)", name, v);
}

/* The next element of a decoded Route (a cart's firmware, which reads the
 * bytes, does not link this). */
static int msg_next(veer__route_cursor *c, void *out) {
    const veer_v1_Route *m = c->route->msg;
    int legs = c->tag == veer_v1_Route_legs_tag;
    if (c->index >= (legs ? (int)m->legs_count : (int)m->waypoints_count)) return 0;
    if (legs) memcpy(out, &m->legs[c->index], sizeof(veer_v1_Leg));
    else memcpy(out, &m->waypoints[c->index], sizeof(veer_v1_Waypoint));
    c->index++;
    return 1;
}

void veer__route_in_from_msg(const veer_v1_Route *m, veer__route_in *out) {
    memset(out, 0, sizeof *out);
    out->start_x = m->start_x, out->start_y = m->start_y, out->start_yaw = m->start_yaw;
    out->start_steer_count = m->start_steer_count;
    memcpy(out->start_steer, m->start_steer, sizeof out->start_steer);
    out->has_start_twist = m->has_start_twist;
    out->start_twist = m->start_twist;
    out->legs_count = m->legs_count, out->waypoints_count = m->waypoints_count;
    out->msg = m;
    out->msg_next = msg_next;
}

veer_status veer__wire_route_from_pb(const veer_v1_Route *m, int module_count, veer_route *out, veer_diag *diag) {
    veer__route_in in;
    veer__route_in_from_msg(m, &in);
    veer__route_buf b;
    b.legs = out->legs, b.waypoints = out->waypoints;
    b.leg_cap = VEER_MAX_LEGS, b.waypoint_cap = VEER_MAX_WAYPOINTS;
    veer_status st = veer__wire_route_from_in(&in, module_count, &b, diag);
    if (st == VEER_OK) veer__route_set_head(out, &b.view);
    return st;
}

veer_status veer__wire_route_from_in(const veer__route_in *m, int module_count, veer__route_buf *out,
                                     veer_diag *diag) {
    veer_status st;
    if ((st = finite(m->start_x, "route.start_x", diag)) || (st = finite(m->start_y, "route.start_y", diag)) ||
        (st = finite(m->start_yaw, "route.start_yaw", diag)))
        return st;
    veer__route_view *r = &out->view; /* written in place: no copy on a cart's stack */
    memset(r, 0, sizeof *r);
    r->start_x = m->start_x, r->start_y = m->start_y, r->start_yaw = m->start_yaw;
    r->legs = out->legs, r->waypoints = out->waypoints;
    if (m->start_steer_count > 0) {
        if ((int)m->start_steer_count != module_count)
            return veer__fail_plain(diag, VEER_ERR_VALUE,
                                    "route.start_steer has %d angles; give none or one per module (%d)",
                                    (int)m->start_steer_count, module_count);
        r->has_start_steer = 1;
        for (int i = 0; i < module_count; i++) {
            if ((st = route_value(m->start_steer[i], "route.start_steer[%d]", i, diag))) return st;
            r->start_steer[i] = m->start_steer[i];
        }
    }
    if (m->has_start_twist) {
        if ((st = finite(m->start_twist.vx, "route.start_twist.vx", diag)) ||
            (st = finite(m->start_twist.vy, "route.start_twist.vy", diag)) ||
            (st = finite(m->start_twist.wz, "route.start_twist.wz", diag)))
            return st;
        r->has_start_twist = 1;
        r->start_twist[0] = m->start_twist.vx;
        r->start_twist[1] = m->start_twist.vy;
        r->start_twist[2] = m->start_twist.wz;
    }
    if ((int)m->legs_count > out->leg_cap || (int)m->waypoints_count > out->waypoint_cap)
        return veer__fail_plain(diag, VEER_ERR_CAPACITY, "route: %d legs and %d waypoints, room for at most %d and %d",
                                (int)m->legs_count, (int)m->waypoints_count, out->leg_cap, out->waypoint_cap);
    if (m->legs_count == 0)
        return veer__fail_plain(diag, VEER_ERR_VALUE, "route.legs is empty");
    r->leg_count = (int)m->legs_count;
    long used = 0;
    veer__route_cursor cur;
    veer__route_cursor_init(&cur, m, veer_v1_Route_legs_tag);
    for (int i = 0; i < r->leg_count; i++) {
        veer_v1_Leg leg;
        if (!veer__route_next(&cur, &leg))
            return veer__fail_plain(diag, VEER_ERR_DECODE, "route.legs: fewer than counted");
        const veer_v1_Leg *ml = &leg;
        int kind = (int)ml->kind;
        if (kind < VEER_LEG_TRAVEL || kind > VEER_LEG_PIVOT)
            return veer__fail(diag, VEER_ERR_VALUE, i, -1, -1, -1.0, NONE_ID,
                              kind == 0 ? "route.legs[%d].kind is not set (travel, spin or pivot)"
                                        : "route.legs[%d].kind has the unknown value %d",
                              i, kind);
        veer_leg l = veer_default_leg((veer_leg_kind)kind);
        int heading = (int)ml->heading;
        if (heading < 0 || heading > VEER_HEADING_BLEND)
            return veer__fail(diag, VEER_ERR_VALUE, i, -1, -1, -1.0, NONE_ID,
                              "route.legs[%d].heading has the unknown value %d", i, heading);
        int turn = (int)ml->turn;
        if (turn < 0 || turn > veer_v1_Turn_TURN_CLOCKWISE)
            return veer__fail(diag, VEER_ERR_VALUE, i, -1, -1, -1.0, NONE_ID,
                              "route.legs[%d].turn has the unknown value %d", i, turn);
        const double vals[] = {ml->toward_x, ml->toward_y, ml->yaw, ml->pivot_x, ml->pivot_y, ml->angle, ml->dwell,
                               ml->has_corner_tolerance ? ml->corner_tolerance : 0.0};
        static const char *const names[] = {"toward_x", "toward_y", "yaw",   "pivot_x",
                                            "pivot_y",  "angle",    "dwell", "corner_tolerance"};
        for (int v = 0; v < 8; v++)
            if (!isfinite(vals[v]))
                return veer__fail(diag, VEER_ERR_VALUE, i, -1, -1, -1.0, NONE_ID, "route.legs[%d].%s is not finite",
                                  i, names[v]);
        if (kind == VEER_LEG_TRAVEL) {
            if (ml->waypoint_count < 1)
                return veer__fail(diag, VEER_ERR_VALUE, i, -1, -1, -1.0, NONE_ID,
                                  "route.legs[%d] is a travel leg with no waypoints (waypoint_count 0)", i);
        } else if (ml->waypoint_count != 0) {
            return veer__fail(diag, VEER_ERR_VALUE, i, -1, -1, -1.0, NONE_ID,
                              "route.legs[%d] is a %s leg and takes no waypoints (waypoint_count %u)", i,
                              kind == VEER_LEG_SPIN ? "spin" : "pivot", (unsigned)ml->waypoint_count);
        }
        used += (long)ml->waypoint_count;
        if (used > (long)m->waypoints_count)
            return veer__fail(diag, VEER_ERR_VALUE, i, -1, -1, -1.0, NONE_ID,
                              "route.legs[%d] takes waypoints up to number %ld, but route.waypoints has %d", i, used,
                              (int)m->waypoints_count);
        l.waypoint_count = (int)ml->waypoint_count;
        l.heading = heading == 0 ? VEER_HEADING_HOLD : (veer_heading_kind)heading;
        l.reversed = ml->reversed ? 1 : 0;
        l.toward_x = ml->toward_x;
        l.toward_y = ml->toward_y;
        if (ml->has_corner_tolerance) l.corner_tolerance = ml->corner_tolerance;
        l.yaw = ml->yaw;
        l.direction = turn == veer_v1_Turn_TURN_COUNTER_CLOCKWISE ? 1 : turn == veer_v1_Turn_TURN_CLOCKWISE ? -1 : 0;
        l.pivot_x = ml->pivot_x;
        l.pivot_y = ml->pivot_y;
        l.angle = ml->angle;
        l.hold_yaw = ml->hold_yaw ? 1 : 0;
        l.dwell = ml->dwell;
        out->legs[i] = l;
    }
    if (used != (long)m->waypoints_count)
        return veer__fail(diag, VEER_ERR_VALUE, -1, (int)used, -1, -1.0, NONE_ID,
                          "route.waypoints has %d entries but the travel legs take %ld", (int)m->waypoints_count,
                          used);
    r->waypoint_count = (int)m->waypoints_count;
    veer__route_cursor_init(&cur, m, veer_v1_Route_waypoints_tag);
    for (int w = 0; w < r->waypoint_count; w++) {
        veer_v1_Waypoint way;
        if (!veer__route_next(&cur, &way))
            return veer__fail_plain(diag, VEER_ERR_DECODE, "route.waypoints: fewer than counted");
        const veer_v1_Waypoint *mw = &way;
        if ((st = route_value(mw->x, "route.waypoints[%d].x", w, diag)) ||
            (st = route_value(mw->y, "route.waypoints[%d].y", w, diag)) ||
            (st = route_value(mw->has_yaw ? mw->yaw : 0.0, "route.waypoints[%d].yaw", w, diag)) ||
            (st = route_value(mw->dwell, "route.waypoints[%d].dwell", w, diag)) ||
            (st = route_value(mw->has_arrival ? mw->arrival : 0.0, "route.waypoints[%d].arrival", w, diag))) {
            if (diag) diag->waypoint = w;
            return st;
        }
        veer_waypoint wp = veer_default_waypoint(mw->x, mw->y);
        wp.has_yaw = mw->has_yaw ? 1 : 0;
        wp.yaw = mw->has_yaw ? mw->yaw : 0.0;
        wp.stop = mw->stop ? 1 : 0;
        wp.dwell = mw->dwell;
        wp.timed = mw->has_arrival ? 1 : 0;
        wp.arrival = mw->has_arrival ? mw->arrival : 0.0;
        out->waypoints[w] = wp;
    }
    return VEER_OK;
}

void veer__wire_route_to_pb(const veer_route *r, int module_count, veer_v1_Route *m) {
    memset(m, 0, sizeof *m);
    m->start_x = r->start_x;
    m->start_y = r->start_y;
    m->start_yaw = r->start_yaw;
    int M = module_count < 0 ? 0 : module_count > VEER_MAX_MODULES ? VEER_MAX_MODULES : module_count;
    if (r->has_start_steer) {
        m->start_steer_count = (pb_size_t)M;
        for (int i = 0; i < M; i++) m->start_steer[i] = r->start_steer[i];
    }
    if (r->has_start_twist) {
        m->has_start_twist = true;
        m->start_twist.vx = r->start_twist[0];
        m->start_twist.vy = r->start_twist[1];
        m->start_twist.wz = r->start_twist[2];
    }
    int nl = r->leg_count < 0 ? 0 : r->leg_count > VEER_MAX_LEGS ? VEER_MAX_LEGS : r->leg_count;
    m->legs_count = (pb_size_t)nl;
    for (int i = 0; i < nl; i++) {
        const veer_leg *l = &r->legs[i];
        veer_v1_Leg *ml = &m->legs[i];
        ml->kind = (veer_v1_LegKind)l->kind;
        ml->dwell = l->dwell;
        if (l->kind == VEER_LEG_TRAVEL) {
            ml->waypoint_count = (uint32_t)l->waypoint_count;
            ml->heading = (veer_v1_Heading)l->heading;
            ml->reversed = l->heading == VEER_HEADING_TANGENT && l->reversed;
            if (l->heading == VEER_HEADING_TOWARD) {
                ml->toward_x = l->toward_x;
                ml->toward_y = l->toward_y;
            }
            ml->has_corner_tolerance = true;
            ml->corner_tolerance = l->corner_tolerance;
        } else if (l->kind == VEER_LEG_SPIN) {
            ml->yaw = l->yaw;
            ml->turn = l->direction > 0   ? veer_v1_Turn_TURN_COUNTER_CLOCKWISE
                       : l->direction < 0 ? veer_v1_Turn_TURN_CLOCKWISE
                                          : veer_v1_Turn_TURN_SHORTER;
        } else if (l->kind == VEER_LEG_PIVOT) {
            ml->pivot_x = l->pivot_x;
            ml->pivot_y = l->pivot_y;
            ml->angle = l->angle;
            ml->hold_yaw = l->hold_yaw != 0;
        }
    }
    int nw = r->waypoint_count < 0 ? 0 : r->waypoint_count > VEER_MAX_WAYPOINTS ? VEER_MAX_WAYPOINTS : r->waypoint_count;
    m->waypoints_count = (pb_size_t)nw;
    for (int w = 0; w < nw; w++) {
        const veer_waypoint *wp = &r->waypoints[w];
        veer_v1_Waypoint *mw = &m->waypoints[w];
        mw->x = wp->x;
        mw->y = wp->y;
        mw->has_yaw = wp->has_yaw != 0;
        mw->yaw = wp->has_yaw ? wp->yaw : 0.0;
        mw->stop = wp->stop != 0;
        mw->dwell = wp->dwell;
        if ((mw->has_arrival = wp->timed != 0)) mw->arrival = wp->arrival;
    }
}

/* ---- options and diagnostics ------------------------------------------- */

veer_status veer__wire_options_from_pb(const veer_v1_PlanOptions *m, veer_plan_options *out, veer_diag *diag) {
    veer_plan_options o = veer_default_plan_options();
    if (m->has_grid_points) {
        if (m->grid_points > 10000000u)
            return bad(diag, VEER_ERR_VALUE, "%s is out of range (%.0f)", "options.grid_points", (double)m->grid_points);
        o.grid_points = (int)m->grid_points;
    }
    if (m->has_accel_polygon_sides) {
        if (m->accel_polygon_sides > 10000000u)
            return bad(diag, VEER_ERR_VALUE, "%s is out of range (%.0f)", "options.accel_polygon_sides",
                       (double)m->accel_polygon_sides);
        o.accel_polygon_sides = (int)m->accel_polygon_sides;
    }
    if (m->has_traction_polygon_sides) {
        if (m->traction_polygon_sides > 10000000u)
            return bad(diag, VEER_ERR_VALUE, "%s is out of range (%.0f)", "options.traction_polygon_sides",
                       (double)m->traction_polygon_sides);
        o.traction_polygon_sides = (int)m->traction_polygon_sides;
    }
    if (m->has_duration_target) {
        if (!isfinite(m->duration_target) || m->duration_target < 0.0)
            return bad(diag, VEER_ERR_VALUE, "%s must be finite and >= 0 (%g)", "options.duration_target",
                       m->duration_target);
        o.duration_target = m->duration_target;
    }
    veer_status st = veer__plan_options_check(&o, diag); /* the planner's own ranges: a decoded plan obeys them too */
    if (st != VEER_OK) return st;
    *out = o;
    return VEER_OK;
}

void veer__wire_options_to_pb(const veer_plan_options *o, veer_v1_PlanOptions *m) {
    memset(m, 0, sizeof *m);
    m->has_grid_points = m->has_accel_polygon_sides = true;
    m->grid_points = o->grid_points > 0 ? (uint32_t)o->grid_points : 0u;
    m->accel_polygon_sides = o->accel_polygon_sides > 0 ? (uint32_t)o->accel_polygon_sides : 0u;
    m->has_traction_polygon_sides = true;
    m->traction_polygon_sides = o->traction_polygon_sides > 0 ? (uint32_t)o->traction_polygon_sides : 0u;
    if (o->duration_target > 0.0) {
        m->has_duration_target = true;
        m->duration_target = o->duration_target;
    }
}

void veer__wire_diag_to_pb(const veer_diag *d, veer_v1_Diagnostic *m) {
    memset(m, 0, sizeof *m);
    m->status = (veer_v1_Status)veer__wire_status_to_pb(d->status);
    const char *nul = memchr(d->message, '\0', sizeof d->message);
    size_t n = nul ? (size_t)(nul - d->message) : sizeof d->message - 1;
    if (n > sizeof m->message - 1) n = sizeof m->message - 1;
    memcpy(m->message, d->message, n);
    m->message[n] = '\0';
    /* Our messages are ASCII; anything else becomes '?' so the reply stays valid proto3. */
    for (size_t i = 0; i < n; i++)
        if ((unsigned char)m->message[i] >= 0x80) m->message[i] = '?';
    m->leg = d->leg;
    m->waypoint = d->waypoint;
    m->grid_index = d->grid_index;
    m->s = isfinite(d->s) ? d->s : -1.0;
    m->limit_kind = (veer_v1_LimitKind)d->limit.kind;
    m->limit_module = d->limit.module;
    if (d->limit.kind != VEER_LIMIT_NONE) veer_limit_name(d->limit, m->limit_name, sizeof m->limit_name);
    m->value = isfinite(d->value) ? d->value : 0.0;
}
