/* The cart's reader of Plan bytes: the fields of a Plan message into a
 * veer__plan_in without a decoded veer_v1_Plan (27 KB, most of it the
 * profile's 16 KB knots field). The player keeps the plan's bytes, so the
 * profile's knots and jerk windows are read where they lie, and so are the
 * route's legs and waypoints (checked here one at a time, decoded again one
 * at a time when the route is rebuilt: veer__route_next; a veer_v1_Route is
 * 7.5 KB); the drive, limits and options are decoded with nanopb into
 * veer__plan_msgs, which the caller may place where the plan's grid arrays
 * go later.
 *
 * It reads what veer_v1_Plan's nanopb decoder reads, in the same order and
 * with the same outcome: unknown fields skipped, a repeated scalar field's
 * last value kept, a repeated submessage merged into the earlier one (the
 * submessages through nanopb itself), a known field with the wrong wire
 * type, a zero tag or a truncation VEER_ERR_DECODE, a bytes, string or list
 * field over the generated struct's capacity VEER_ERR_CAPACITY. Two cases
 * are refused that the decoder takes: a route in more than
 * VEER__ROUTE_PIECES Route fields, and jerk_window in pieces (several packed
 * fields, or several unpacked values); every encoder writes each as one
 * field.
 *
 * The content hash is SHA-256 over the contents' canonical encoding with
 * content_hash empty (veer__wire_plan_hash re-encodes the decoded message).
 * Here the same bytes are written into the hash from what was read: the
 * submessages by nanopb's encoder, the scalars, the profile and cart_id as
 * nanopb's encoder writes them (proto3: zero values left out, fields in
 * number order, the jerk windows packed). So a plan whose bytes are not
 * canonical but decode to the same contents (fields in another order,
 * unknown fields, repeats) gets the same hash as on the decoded-message
 * path, and the same verdict.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "wire_internal.h"

/* Capacities of the generated struct's fields (plan.options). */
#define KNOTS_MAX (sizeof(((veer_v1_Profile *)0)->knots.bytes))
#define JERK_MAX (sizeof(((veer_v1_Profile *)0)->jerk_window) / sizeof(double))
#define CART_ID_MAX (sizeof(((veer_v1_Plan *)0)->cart_id) - 1) /* the struct keeps a NUL */
#define HASH_MAX (sizeof(((veer_v1_Plan *)0)->content_hash.bytes))

typedef struct {
    size_t size;       /* of the whole message */
    veer_diag *diag;
} reader;

/* The byte offset s has reached in the message, for the diagnostics: s
 * reads a buffer that ends at the message's end or at the end of a
 * submessage that ends `after` bytes before it. */
static size_t at(const reader *r, const pb_istream_t *s, size_t after) { return r->size - after - s->bytes_left; }

/* A malformed message, as veer__wire_decode words it. */
static veer_status malformed(const reader *r, const char *err, size_t pos) {
    return veer__fail_plain(r->diag, VEER_ERR_DECODE, "plan: the %zu bytes do not decode (%s at byte %zu)", r->size,
                            err ? err : "malformed", pos);
}

/* A field over its capacity. */
static veer_status over(const reader *r, const char *what, size_t n, size_t cap) {
    return veer__fail_plain(r->diag, VEER_ERR_CAPACITY,
                            "plan: a list or string is longer than its capacity (%s: %zu, at most %zu)", what, n, cap);
}

/* A nanopb call that failed on s: its error, mapped as veer__wire_decode maps it. */
static veer_status pb_failed(const reader *r, const pb_istream_t *s, size_t after) {
    const char *err = PB_GET_ERROR(s);
    if (strstr(err, "array overflow") || strstr(err, "bytes overflow") || strstr(err, "string overflow"))
        return veer__fail_plain(r->diag, VEER_ERR_CAPACITY, "plan: a list or string is longer than its capacity (%s)",
                                err);
    return malformed(r, err, at(r, s, after));
}

/* A uint32 field (nanopb refuses a larger varint rather than cutting it). */
static veer_status get_u32(const reader *r, pb_istream_t *s, size_t after, uint32_t *v) {
    uint64_t u;
    if (!pb_decode_varint(s, &u)) return pb_failed(r, s, after);
    if (u > UINT32_MAX) return malformed(r, "integer too large", at(r, s, after));
    *v = (uint32_t)u;
    return VEER_OK;
}

static veer_status get_f64(const reader *r, pb_istream_t *s, size_t after, double *v) {
    if (!pb_decode_fixed64(s, v)) return pb_failed(r, s, after);
    return VEER_OK;
}

/* The length of a bytes or string field of at most cap bytes (string: cap
 * + 1 with the struct's NUL), then the bytes where they lie (*p). */
static veer_status get_slice(const reader *r, pb_istream_t *s, size_t after, const char *what, size_t cap,
                             int string, const uint8_t **p, size_t *n) {
    uint32_t len;
    if (!pb_decode_varint32(s, &len)) return pb_failed(r, s, after);
    if (string && len == UINT32_MAX) return malformed(r, "size too large", at(r, s, after));
    if (len > cap) return over(r, what, len, cap);
    if (len > s->bytes_left) return malformed(r, "end-of-stream", at(r, s, after));
    *p = (const uint8_t *)s->state; /* a buffer stream reads from here on */
    *n = len;
    if (!pb_read(s, NULL, len)) return pb_failed(r, s, after);
    return VEER_OK;
}

static veer_status wrong_type(const reader *r, const pb_istream_t *s, size_t after) {
    return malformed(r, "wrong wire type", at(r, s, after));
}

/* The next field's tag: 1, or 0 at the end of s (*st VEER_OK) or on a bad
 * tag (*st says why), as nanopb's decoder reads tags. */
static int next_field(const reader *r, pb_istream_t *s, size_t after, pb_wire_type_t *wt, uint32_t *tag,
                      veer_status *st) {
    bool eof;
    *st = VEER_OK;
    if (!s->bytes_left) return 0;
    if (!pb_decode_tag(s, wt, tag, &eof)) {
        if (!eof) *st = pb_failed(r, s, after);
        return 0;
    }
    if (*tag == 0) {
        *st = malformed(r, "zero tag", at(r, s, after));
        return 0;
    }
    return 1;
}

/* One jerk_window field: packed (a slice of doubles) or one unpacked value. */
static veer_status get_jerk(const reader *r, pb_istream_t *s, size_t after, pb_wire_type_t wt, veer__profile_in *pr) {
    const uint8_t *p;
    size_t count;
    if (wt == PB_WT_STRING) {
        pb_istream_t sub;
        if (!pb_make_string_substream(s, &sub)) return pb_failed(r, s, after);
        size_t len = sub.bytes_left;
        if (len % 8 != 0 || len / 8 > JERK_MAX)
            return over(r, "plan.profile.jerk_window (a packed field of whole doubles)", len / 8 + (len % 8 != 0),
                        JERK_MAX);
        p = (const uint8_t *)sub.state;
        count = len / 8;
        if (!pb_read(&sub, NULL, len) || !pb_close_string_substream(s, &sub)) return pb_failed(r, s, after);
    } else if (wt == PB_WT_64BIT) {
        if (s->bytes_left < 8) return malformed(r, "end-of-stream", at(r, s, after));
        p = (const uint8_t *)s->state;
        count = 1;
        if (!pb_read(s, NULL, 8)) return pb_failed(r, s, after);
    } else {
        return wrong_type(r, s, after);
    }
    if (count == 0) return VEER_OK;
    if (pr->jerk_count > 0)
        return veer__fail_plain(r->diag, VEER_ERR_DECODE,
                                "plan.profile.jerk_window comes in pieces (this reader takes it in one field, packed "
                                "as encoders write it)");
    pr->jerk_packed = p, pr->jerk_count = count;
    return VEER_OK;
}

/* The Profile submessage's fields into pr (merging into what an earlier
 * Profile field gave, as the decoder does). */
static veer_status get_profile(const reader *r, pb_istream_t *s, size_t after, veer__profile_in *pr) {
    veer_status st = VEER_OK;
    pb_wire_type_t wt;
    uint32_t tag;
    while (st == VEER_OK && next_field(r, s, after, &wt, &tag, &st)) {
        int f64 = tag == veer_v1_Profile_s_step_tag || tag == veer_v1_Profile_sdot_step_tag ||
                  tag == veer_v1_Profile_sddot_step_tag || tag == veer_v1_Profile_sddot_split_tag ||
                  tag == veer_v1_Profile_start_sdot_tag;
        int u32 = tag == veer_v1_Profile_knot_count_tag || tag == veer_v1_Profile_grid_points_tag;
        if ((f64 && wt != PB_WT_64BIT) || (u32 && wt != PB_WT_VARINT) ||
            (tag == veer_v1_Profile_knots_tag && wt != PB_WT_STRING))
            return wrong_type(r, s, after);
        switch (tag) {
        case veer_v1_Profile_s_step_tag: st = get_f64(r, s, after, &pr->s_step); break;
        case veer_v1_Profile_sdot_step_tag: st = get_f64(r, s, after, &pr->sdot_step); break;
        case veer_v1_Profile_sddot_step_tag: st = get_f64(r, s, after, &pr->sddot_step); break;
        case veer_v1_Profile_sddot_split_tag: st = get_f64(r, s, after, &pr->sddot_split); break;
        case veer_v1_Profile_start_sdot_tag: st = get_f64(r, s, after, &pr->start_sdot); break;
        case veer_v1_Profile_knot_count_tag: st = get_u32(r, s, after, &pr->knot_count); break;
        case veer_v1_Profile_grid_points_tag: st = get_u32(r, s, after, &pr->grid_points); break;
        case veer_v1_Profile_knots_tag:
            st = get_slice(r, s, after, "plan.profile.knots", KNOTS_MAX, 0, &pr->knots, &pr->knots_size);
            break;
        case veer_v1_Profile_jerk_window_tag: st = get_jerk(r, s, after, wt, pr); break;
        default:
            if (!pb_skip_field(s, wt)) return pb_failed(r, s, after);
        }
    }
    return st;
}

/* A submessage field decoded by nanopb into msg, merged into what an
 * earlier one gave (msg starts zeroed: proto3 defaults). */
static veer_status get_msg(const reader *r, pb_istream_t *s, const pb_msgdesc_t *fields, void *msg) {
    pb_istream_t sub;
    if (!pb_make_string_substream(s, &sub)) return pb_failed(r, s, 0);
    size_t after = s->bytes_left;
    if (!pb_decode_ex(&sub, fields, msg, PB_DECODE_NOINIT)) return pb_failed(r, &sub, after);
    if (!pb_close_string_substream(s, &sub)) return pb_failed(r, s, 0);
    return VEER_OK;
}

/* ---- the route: its head decoded, its legs and waypoints left in the bytes -- */

#define ROUTE_STEER_MAX (sizeof(((veer_v1_Route *)0)->start_steer) / sizeof(double))
#define ROUTE_LEGS_MAX (sizeof(((veer_v1_Route *)0)->legs) / sizeof(veer_v1_Leg))
#define ROUTE_WAYPOINTS_MAX (sizeof(((veer_v1_Route *)0)->waypoints) / sizeof(veer_v1_Waypoint))

/* One element of a repeated field, decoded (as a fresh message: proto3's
 * defaults are zero) to check it and then dropped; *count counts it against
 * cap, checked first as nanopb checks its array. */
static veer_status get_element(const reader *r, pb_istream_t *s, const pb_msgdesc_t *fields, void *scratch,
                               size_t size, pb_size_t *count, size_t cap) {
    if ((size_t)*count >= cap)
        return veer__fail_plain(r->diag, VEER_ERR_CAPACITY, "plan: a list or string is longer than its capacity (%s)",
                                "array overflow");
    memset(scratch, 0, size);
    (*count)++;
    return get_msg(r, s, fields, scratch);
}

/* One Route field's contents (s: its substream), continuing what an earlier
 * one gave, as nanopb merges them. */
static veer_status get_route(const reader *r, pb_istream_t *s, size_t after, veer__route_in *ro) {
    if (ro->pieces == VEER__ROUTE_PIECES)
        return veer__fail_plain(r->diag, VEER_ERR_DECODE, "plan.route comes in more than %d pieces",
                                VEER__ROUTE_PIECES);
    ro->piece[ro->pieces] = (const uint8_t *)s->state; /* a buffer stream reads from here on */
    ro->piece_size[ro->pieces++] = s->bytes_left;
    veer_status st = VEER_OK;
    pb_wire_type_t wt;
    uint32_t tag;
    while (st == VEER_OK && next_field(r, s, after, &wt, &tag, &st)) {
        int f64 = tag == veer_v1_Route_start_x_tag || tag == veer_v1_Route_start_y_tag ||
                  tag == veer_v1_Route_start_yaw_tag;
        if ((f64 && wt != PB_WT_64BIT) ||
            (tag == veer_v1_Route_start_steer_tag && wt != PB_WT_64BIT && wt != PB_WT_STRING) ||
            ((tag == veer_v1_Route_legs_tag || tag == veer_v1_Route_waypoints_tag ||
              tag == veer_v1_Route_start_twist_tag) &&
             wt != PB_WT_STRING))
            return wrong_type(r, s, after);
        switch (tag) {
        case veer_v1_Route_start_x_tag: st = get_f64(r, s, after, &ro->start_x); break;
        case veer_v1_Route_start_y_tag: st = get_f64(r, s, after, &ro->start_y); break;
        case veer_v1_Route_start_yaw_tag: st = get_f64(r, s, after, &ro->start_yaw); break;
        case veer_v1_Route_start_steer_tag: {
            /* packed: whole doubles that fit, or nanopb's "array overflow"; else one */
            size_t n = 1;
            pb_istream_t sub, *q = s;
            if (wt == PB_WT_STRING) {
                if (!pb_make_string_substream(s, &sub)) return pb_failed(r, s, after);
                q = &sub, n = sub.bytes_left / 8;
                if (sub.bytes_left % 8 != 0) n = ROUTE_STEER_MAX + 1;
            }
            if (ro->start_steer_count + n > ROUTE_STEER_MAX)
                return over(r, "plan.route.start_steer", ro->start_steer_count + n, ROUTE_STEER_MAX);
            for (size_t i = 0; i < n && st == VEER_OK; i++)
                st = get_f64(r, q, after, &ro->start_steer[ro->start_steer_count++]);
            if (st == VEER_OK && q == &sub && !pb_close_string_substream(s, &sub)) return pb_failed(r, s, after);
            break;
        }
        case veer_v1_Route_legs_tag: {
            veer_v1_Leg leg;
            st = get_element(r, s, veer_v1_Leg_fields, &leg, sizeof leg, &ro->legs_count, ROUTE_LEGS_MAX);
            break;
        }
        case veer_v1_Route_waypoints_tag: {
            veer_v1_Waypoint w;
            st = get_element(r, s, veer_v1_Waypoint_fields, &w, sizeof w, &ro->waypoints_count, ROUTE_WAYPOINTS_MAX);
            break;
        }
        case veer_v1_Route_start_twist_tag:
            st = get_msg(r, s, veer_v1_Twist_fields, &ro->start_twist);
            ro->has_start_twist = true;
            break;
        default:
            if (!pb_skip_field(s, wt)) return pb_failed(r, s, after);
        }
    }
    return st;
}

void veer__route_cursor_init(veer__route_cursor *c, const veer__route_in *route, uint32_t tag) {
    memset(c, 0, sizeof *c);
    c->route = route;
    c->tag = tag;
    c->piece = -1;
}

int veer__route_next(veer__route_cursor *c, void *out) {
    const veer__route_in *ro = c->route;
    if (ro->msg_next) return ro->msg_next(c, out); /* a decoded message (veer__route_in_from_msg) */
    int legs = c->tag == veer_v1_Route_legs_tag;
    for (;;) { /* the bytes, which veer__wire_plan_read has read once */
        if (c->piece < 0 || c->s.bytes_left == 0) {
            if (++c->piece >= ro->pieces) return 0;
            c->s = pb_istream_from_buffer(ro->piece[c->piece], ro->piece_size[c->piece]);
        }
        pb_wire_type_t wt;
        uint32_t tag;
        bool eof;
        if (!pb_decode_tag(&c->s, &wt, &tag, &eof)) return 0;
        if (tag != c->tag) {
            if (!pb_skip_field(&c->s, wt)) return 0;
            continue;
        }
        pb_istream_t sub;
        if (!pb_make_string_substream(&c->s, &sub)) return 0;
        bool ok = pb_decode(&sub, legs ? veer_v1_Leg_fields : veer_v1_Waypoint_fields, out);
        if (!pb_close_string_substream(&c->s, &sub) || !ok) return 0;
        c->index++;
        return 1;
    }
}

/* ---- the content hash ---------------------------------------------------- */

/* Each writes a field as nanopb's encoder writes a proto3 field: not at
 * all when it holds its zero value (for doubles: all bits zero). */
static bool put_u32(pb_ostream_t *o, uint32_t tag, uint32_t v) {
    return v == 0 || (pb_encode_tag(o, PB_WT_VARINT, tag) && pb_encode_varint(o, v));
}

static bool put_f64(pb_ostream_t *o, uint32_t tag, double v) {
    uint64_t u;
    memcpy(&u, &v, sizeof u);
    return u == 0 || (pb_encode_tag(o, PB_WT_64BIT, tag) && pb_encode_fixed64(o, &v));
}

static bool put_bytes(pb_ostream_t *o, uint32_t tag, const uint8_t *p, size_t n) {
    return n == 0 || (pb_encode_tag(o, PB_WT_STRING, tag) && pb_encode_string(o, p, n));
}

static bool put_msg(pb_ostream_t *o, uint32_t tag, const pb_msgdesc_t *fields, const void *msg) {
    return !msg || (pb_encode_tag(o, PB_WT_STRING, tag) && pb_encode_submessage(o, fields, msg));
}

static bool put_profile_fields(pb_ostream_t *o, const void *arg) {
    const veer__profile_in *p = arg;
    bool ok = put_f64(o, veer_v1_Profile_s_step_tag, p->s_step) &&
              put_f64(o, veer_v1_Profile_sdot_step_tag, p->sdot_step) &&
              put_u32(o, veer_v1_Profile_knot_count_tag, p->knot_count) &&
              put_bytes(o, veer_v1_Profile_knots_tag, p->knots, p->knots_size) &&
              put_u32(o, veer_v1_Profile_grid_points_tag, p->grid_points) &&
              put_f64(o, veer_v1_Profile_sddot_step_tag, p->sddot_step) &&
              put_f64(o, veer_v1_Profile_sddot_split_tag, p->sddot_split) &&
              put_f64(o, veer_v1_Profile_start_sdot_tag, p->start_sdot);
    /* packed, the wire's little-endian doubles as they came */
    return ok && put_bytes(o, veer_v1_Profile_jerk_window_tag, p->jerk_packed, 8 * p->jerk_count);
}

/* The route as nanopb encodes the message it decodes to: fields in number
 * order, the start steer packed, each leg and waypoint re-encoded. */
static bool put_route_fields(pb_ostream_t *o, const void *arg) {
    const veer__route_in *ro = arg;
    if (!put_f64(o, veer_v1_Route_start_x_tag, ro->start_x) || !put_f64(o, veer_v1_Route_start_y_tag, ro->start_y) ||
        !put_f64(o, veer_v1_Route_start_yaw_tag, ro->start_yaw))
        return false;
    if (ro->start_steer_count > 0) {
        if (!pb_encode_tag(o, PB_WT_STRING, veer_v1_Route_start_steer_tag) ||
            !pb_encode_varint(o, 8u * ro->start_steer_count))
            return false;
        for (pb_size_t i = 0; i < ro->start_steer_count; i++)
            if (!pb_encode_fixed64(o, &ro->start_steer[i])) return false;
    }
    union {
        veer_v1_Leg leg;
        veer_v1_Waypoint waypoint;
    } e;
    static const uint32_t tags[2] = {veer_v1_Route_legs_tag, veer_v1_Route_waypoints_tag};
    for (int k = 0; k < 2; k++) {
        veer__route_cursor c;
        veer__route_cursor_init(&c, ro, tags[k]);
        while (veer__route_next(&c, &e))
            if (!put_msg(o, tags[k], k == 0 ? veer_v1_Leg_fields : veer_v1_Waypoint_fields, &e)) return false;
    }
    return !ro->has_start_twist || put_msg(o, veer_v1_Route_start_twist_tag, veer_v1_Twist_fields, &ro->start_twist);
}

/* A submessage field written by fn: its length from a sizing pass first. */
static bool put_fields(pb_ostream_t *o, uint32_t tag, bool (*fn)(pb_ostream_t *, const void *), const void *arg) {
    pb_ostream_t sz = PB_OSTREAM_SIZING;
    return fn(&sz, arg) && pb_encode_tag(o, PB_WT_STRING, tag) && pb_encode_varint(o, sz.bytes_written) && fn(o, arg);
}

/* The contents' canonical encoding with content_hash empty, into the hash. */
static bool put_plan(pb_ostream_t *o, const veer__plan_in *in, const uint8_t *cart_id, size_t cart_id_size) {
    if (!put_u32(o, veer_v1_Plan_schema_version_tag, in->schema_version) ||
        !put_u32(o, veer_v1_Plan_library_version_tag, in->library_version) ||
        !put_u32(o, veer_v1_Plan_path_model_tag, in->path_model) ||
        !put_msg(o, veer_v1_Plan_drive_tag, veer_v1_DriveDef_fields, in->drive) ||
        !put_msg(o, veer_v1_Plan_limits_tag, veer_v1_Limits_fields, in->limits))
        return false;
    if ((in->has_route && !put_fields(o, veer_v1_Plan_route_tag, put_route_fields, &in->route)) ||
        !put_msg(o, veer_v1_Plan_options_tag, veer_v1_PlanOptions_fields, in->options) ||
        (in->has_profile && !put_fields(o, veer_v1_Plan_profile_tag, put_profile_fields, &in->profile)))
        return false;
    /* the struct's string ends at its first NUL */
    const uint8_t *nul = cart_id_size ? memchr(cart_id, 0, cart_id_size) : NULL;
    size_t n = nul ? (size_t)(nul - cart_id) : cart_id_size;
    return put_f64(o, veer_v1_Plan_duration_tag, in->duration) && put_f64(o, veer_v1_Plan_length_tag, in->length) &&
           put_bytes(o, veer_v1_Plan_cart_id_tag, cart_id, n);
}

/* ---- the message --------------------------------------------------------- */

veer_status veer__wire_plan_read(const uint8_t *bytes, size_t size, veer__plan_msgs *msgs, veer__plan_in *in,
                                 veer_diag *diag) {
    memset(in, 0, sizeof *in);
    memset(msgs, 0, sizeof *msgs);
    if (!bytes && size > 0) return veer__fail_plain(diag, VEER_ERR_NULL, "plan: bytes pointer is NULL");
    static const uint8_t empty[1] = {0};
    pb_istream_t s = pb_istream_from_buffer(bytes ? bytes : empty, bytes ? size : 0);
    reader r = {size, diag};
    const uint8_t *cart_id = NULL;
    size_t cart_id_size = 0;
    uint32_t has = 0; /* bit tag: the field came */
    veer_status st = VEER_OK;
    pb_wire_type_t wt;
    uint32_t tag;
    while (st == VEER_OK && next_field(&r, &s, 0, &wt, &tag, &st)) {
        pb_wire_type_t want = tag <= veer_v1_Plan_path_model_tag                                   ? PB_WT_VARINT
                              : tag == veer_v1_Plan_duration_tag || tag == veer_v1_Plan_length_tag ? PB_WT_64BIT
                                                                                                   : PB_WT_STRING;
        if (tag <= veer_v1_Plan_content_hash_tag && wt != want) return wrong_type(&r, &s, 0);
        if (tag <= veer_v1_Plan_content_hash_tag) has |= 1u << tag;
        switch (tag) {
        case veer_v1_Plan_schema_version_tag: st = get_u32(&r, &s, 0, &in->schema_version); break;
        case veer_v1_Plan_library_version_tag: st = get_u32(&r, &s, 0, &in->library_version); break;
        case veer_v1_Plan_path_model_tag: st = get_u32(&r, &s, 0, &in->path_model); break;
        case veer_v1_Plan_drive_tag: st = get_msg(&r, &s, veer_v1_DriveDef_fields, &msgs->drive); break;
        case veer_v1_Plan_limits_tag: st = get_msg(&r, &s, veer_v1_Limits_fields, &msgs->limits); break;
        case veer_v1_Plan_route_tag: {
            pb_istream_t sub;
            if (!pb_make_string_substream(&s, &sub)) return pb_failed(&r, &s, 0);
            st = get_route(&r, &sub, s.bytes_left, &in->route);
            if (st == VEER_OK && !pb_close_string_substream(&s, &sub)) return pb_failed(&r, &s, 0);
            break;
        }
        case veer_v1_Plan_options_tag: st = get_msg(&r, &s, veer_v1_PlanOptions_fields, &msgs->options); break;
        case veer_v1_Plan_profile_tag: {
            pb_istream_t sub;
            if (!pb_make_string_substream(&s, &sub)) return pb_failed(&r, &s, 0);
            st = get_profile(&r, &sub, s.bytes_left, &in->profile);
            if (st == VEER_OK && !pb_close_string_substream(&s, &sub)) return pb_failed(&r, &s, 0);
            break;
        }
        case veer_v1_Plan_duration_tag: st = get_f64(&r, &s, 0, &in->duration); break;
        case veer_v1_Plan_length_tag: st = get_f64(&r, &s, 0, &in->length); break;
        case veer_v1_Plan_cart_id_tag:
            st = get_slice(&r, &s, 0, "plan.cart_id", CART_ID_MAX, 1, &cart_id, &cart_id_size);
            break;
        case veer_v1_Plan_content_hash_tag:
            st = get_slice(&r, &s, 0, "plan.content_hash", HASH_MAX, 0, &in->content_hash, &in->content_hash_size);
            break;
        default:
            if (!pb_skip_field(&s, wt)) return pb_failed(&r, &s, 0);
        }
    }
    if (st != VEER_OK) return st;
#define HAS_(tag) (has >> (tag) & 1u)
    in->drive = HAS_(veer_v1_Plan_drive_tag) ? &msgs->drive : NULL;
    in->limits = HAS_(veer_v1_Plan_limits_tag) ? &msgs->limits : NULL;
    in->has_route = (int)HAS_(veer_v1_Plan_route_tag);
    in->options = HAS_(veer_v1_Plan_options_tag) ? &msgs->options : NULL;
    in->has_profile = (int)HAS_(veer_v1_Plan_profile_tag);
#undef HAS_
    veer_sha256 c;
    veer__sha256_init(&c);
    pb_ostream_t os = veer__wire_hash_stream(&c);
    in->digest_ok = put_plan(&os, in, cart_id, cart_id_size);
    veer__sha256_final(&c, in->digest);
    return VEER_OK;
}
