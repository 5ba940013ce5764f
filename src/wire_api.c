/* The public entry points of the message interface: bytes in, bytes out.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "wire_internal.h"
#include "veer/link.h"


unsigned veer_wire_schema_version(void) { return VEER_WIRE_SCHEMA_VERSION; }

size_t veer_plan_workspace_size(void) { return VEER__WIRE_WORK_BYTES; }

/* ---- plan request -> plan reply ------------------------------------------ */

/* Streams the per-grid-point arrays of a reply from the plan. */
static bool put_grid(pb_ostream_t *os, const pb_field_t *field, void *const *arg) {
    const veer_plan *p = *arg;
    int tag = (int)field->tag, n = p->n;
    pb_ostream_t sz = PB_OSTREAM_SIZING;
    for (int pass = 0; pass < 2; pass++) {
        pb_ostream_t *o = pass == 0 ? &sz : os;
        if (pass == 1 && (!pb_encode_tag(os, PB_WT_STRING, field->tag) || !pb_encode_varint(os, sz.bytes_written)))
            return false;
        for (int k = 0; k < n; k++) {
            bool ok;
            if (tag == veer_v1_PlanReply_grid_s_tag) ok = pb_encode_fixed64(o, &p->s[k]);
            else if (tag == veer_v1_PlanReply_grid_sdot_tag) {
                double v = sqrt(p->x[k]);
                ok = pb_encode_fixed64(o, &v);
            } else {
                veer_limit_id id = p->binding ? p->binding[k] : veer__limit(VEER_LIMIT_NONE, -1);
                if (tag == veer_v1_PlanReply_binding_kind_tag)
                    ok = pb_encode_varint(o, (uint64_t)(id.kind > 0 ? id.kind : 0));
                else
                    ok = pb_encode_svarint(o, id.kind == VEER_LIMIT_NONE ? -1 : id.module);
            }
            if (!ok) return false;
        }
        if (n == 0) return true;
    }
    return true;
}

typedef struct {
    veer_v1_PlanRequest req;
    veer_v1_PlanReply rep;
} request_work;

static void fill_error(veer_v1_PlanReply *rep, const veer_diag *d) {
    rep->status = (veer_v1_Status)veer__wire_status_to_pb(d->status);
    rep->has_diagnostic = true;
    veer__wire_diag_to_pb(d, &rep->diagnostic);
}

veer_status veer__wire_request_inputs(const veer_v1_PlanRequest *r, const char *what, veer_wire_inputs *out,
                                      veer_diag *diag) {
    if (r->schema_version != 0 && r->schema_version != VEER_WIRE_SCHEMA_VERSION)
        return veer__fail_plain(diag, VEER_ERR_VERSION, "%s: schema version %u, this library reads version %d", what,
                                (unsigned)r->schema_version, VEER_WIRE_SCHEMA_VERSION);
    if (!r->has_drive || !r->has_route)
        return veer__fail_plain(diag, VEER_ERR_VALUE, "%s: the %s is missing", what,
                                !r->has_drive ? "drive" : "route");
    if (!veer__wire_utf8_ok(r->cart_id))
        return veer__fail_plain(diag, VEER_ERR_VALUE, "request.cart_id is not valid UTF-8");
    out->limits = veer_default_limits();
    out->options = veer_default_plan_options();
    veer_status st;
    if ((st = veer__wire_drive_from_pb(&r->drive, &out->drive, diag))) return st;
    if ((st = veer_drive_check(&out->drive, diag))) return st;
    int M = veer_drive_module_count(&out->drive);
    if (r->has_limits && (st = veer__wire_limits_from_pb(&r->limits, M, &out->limits, diag))) return st;
    if ((st = veer__wire_route_from_pb(&r->route, M, &out->route, diag))) return st;
    if (r->has_options && (st = veer__wire_options_from_pb(&r->options, &out->options, diag))) return st;
    return VEER_OK;
}

static veer_status plan_request(const request_work *w, veer_plan **plan, veer_diag *diag) {
    veer_wire_inputs in;
    veer_status st = veer__wire_request_inputs(&w->req, "request", &in, diag);
    if (st) return st;
    return veer_plan_create(&in.drive, &in.limits, &in.route, &in.options, plan, diag);
}

veer_status veer_plan_request_pb(const uint8_t *request, size_t request_size, uint8_t *reply, size_t reply_capacity,
                                 size_t *reply_size) {
    if (!reply_size) return VEER_ERR_NULL;
    request_work *w = veer__calloc(1, sizeof *w);
    if (!w) return VEER_ERR_NO_MEMORY;
    veer_diag diag;
    veer__diag_ok(&diag);
    veer_plan *plan = NULL;
    veer_v1_PlanReply *rep = &w->rep;
    rep->schema_version = VEER_WIRE_SCHEMA_VERSION;
    rep->library_version = VEER_VERSION_HEX;
    veer_status st = veer__wire_decode(veer_v1_PlanRequest_fields, &w->req, request, request_size, "request", &diag);
    if (st == VEER_OK) st = plan_request(w, &plan, &diag);
    if (st == VEER_OK) st = veer__wire_plan_to_pb(plan, &w->req, &rep->plan, &diag);
    if (st == VEER_OK) {
        rep->status = (veer_v1_Status)veer__wire_status_to_pb(VEER_OK);
        rep->has_diagnostic = true;
        veer__diag_ok(&diag);
        veer__wire_diag_to_pb(&diag, &rep->diagnostic);
        rep->has_plan = true;
        rep->legs_count = (pb_size_t)plan->leg_count;
        for (int l = 0; l < plan->leg_count; l++) {
            const veer_leg_summary *ls = &plan->legs[l];
            veer_v1_LegSummary *m = &rep->legs[l];
            m->start = ls->start;
            m->duration = ls->duration;
            m->resteer_time = ls->resteer_time;
            m->dwell_time = ls->dwell_time;
            m->s_begin = ls->s_begin;
            m->s_end = ls->s_end;
        }
        rep->grid_s.funcs.encode = rep->grid_sdot.funcs.encode = put_grid;
        rep->binding_kind.funcs.encode = rep->binding_module.funcs.encode = put_grid;
        rep->grid_s.arg = rep->grid_sdot.arg = rep->binding_kind.arg = rep->binding_module.arg = plan;
        rep->duration = plan->duration;
        rep->length = plan->path.length;
    } else {
        memset(&rep->plan, 0, sizeof rep->plan);
        rep->has_plan = false;
        fill_error(rep, &diag);
    }
    veer_diag ed;
    veer_status est = veer__wire_encode(veer_v1_PlanReply_fields, rep, reply, reply_capacity, reply_size, &ed);
    veer_plan_destroy(plan);
    veer__free(w, sizeof *w);
    return est != VEER_OK ? est : st;
}

size_t veer_plan_reply_size_bound(int grid_points) {
    size_t n = grid_points > 0 ? (size_t)grid_points : 0;
    /* Fixed parts at their generated maxima, plus per grid point two doubles and two varints of at most 10 bytes. */
    return 64 + (size_t)veer_v1_Diagnostic_size + (size_t)veer_v1_Plan_size + 8 +
           (size_t)VEER_MAX_LEGS * ((size_t)veer_v1_LegSummary_size + 2) + 4 * 12 + n * (8 + 8 + 10 + 10);
}

/* ---- Plan bytes -> plan ------------------------------------------------- */

/* The cart's workspace (veer__wire_load_pb_cap): the plan, its submessages
 * decoded where its grid arrays go (they are read before the grid is
 * written), so the larger of the two. */
size_t veer__wire_work_bytes_for(const veer__plan_cap *cap) {
    return VEER__ALIGN16(veer__wire_plan_bytes_for(cap)); /* its grid area has room for veer__plan_msgs */
}

/* The workspace of veer_plan_load_pb: plan first, decoded message behind it. */
static veer_status load_pb(const uint8_t *bytes, size_t size, void *work, size_t work_size,
                           const veer__plan_cap *cap, veer_plan **out, veer_diag *diag) {
    veer__plan_cap max = veer__plan_cap_max();
    if (!cap) cap = &max;
    size_t at = VEER__ALIGN16(veer__wire_plan_bytes_for(cap)), need = at + VEER__ALIGN16(sizeof(veer_v1_Plan));
    if (!work || work_size < need || ((uintptr_t)work % sizeof(double)) != 0)
        return veer__fail_plain(diag, VEER_ERR_VALUE,
                                "plan workspace: needs %zu bytes aligned for double (veer_plan_workspace_size())",
                                need);
    veer_v1_Plan *m = (veer_v1_Plan *)((char *)work + at);
    veer_status st = veer__wire_decode(veer_v1_Plan_fields, m, bytes, size, "plan", diag);
    if (st != VEER_OK) return st;
    return veer__wire_plan_load(m, work, at, cap, out, diag);
}

veer_status veer__wire_load_pb_cap(const uint8_t *bytes, size_t size, void *work, size_t work_size,
                                   const veer__plan_cap *cap, const veer_plan **out, veer_diag *diag) {
    veer__diag_ok(diag);
    *out = NULL;
    veer__plan_cap max = veer__plan_cap_max();
    if (!cap) cap = &max;
    size_t need = veer__wire_work_bytes_for(cap);
    if (!work || work_size < need || ((uintptr_t)work % sizeof(double)) != 0)
        return veer__fail_plain(diag, VEER_ERR_VALUE, "plan workspace: needs %zu bytes aligned for double", need);
    veer__plan_msgs *msgs = (veer__plan_msgs *)((char *)work + veer__wire_plan_grid_at(cap));
    veer_status st = veer__wire_plan_read(bytes, size, msgs, &msgs->in, diag);
    veer_plan *p = NULL;
    if (st == VEER_OK) st = veer__wire_plan_load_in(&msgs->in, work, work_size, cap, &p, diag);
    if (st == VEER_OK) *out = p;
    return st;
}

veer_status veer_plan_load_pb(const uint8_t *plan, size_t plan_size, void *work, size_t work_size,
                              const veer_plan **out, veer_diag *diag) {
    veer__diag_ok(diag);
    if (!out) return veer__fail_plain(diag, VEER_ERR_NULL, "out is NULL");
    *out = NULL;
    /* The documented room (the cart's reader below needs less: veer__wire_work_bytes_for). */
    if (!work || work_size < VEER__WIRE_WORK_BYTES || ((uintptr_t)work % sizeof(double)) != 0)
        return veer__fail_plain(diag, VEER_ERR_VALUE,
                                "plan workspace: needs %zu bytes aligned for double (veer_plan_workspace_size())",
                                (size_t)VEER__WIRE_WORK_BYTES);
    return veer__wire_load_pb_cap(plan, plan_size, work, work_size, NULL, out, diag);
}

veer_status veer_plan_sample_pb(const uint8_t *plan, size_t plan_size, double t, veer_sample *out) {
    if (!out) return VEER_ERR_NULL;
    if (isnan(t)) return VEER_ERR_VALUE;
    union {
        double d;
        void *p;
        unsigned char bytes[VEER__WIRE_WORK_BYTES];
    } work;
    veer_plan *p = NULL;
    veer_status st = load_pb(plan, plan_size, &work, sizeof work, NULL, &p, NULL);
    if (st != VEER_OK) return st;
    return veer_plan_sample(p, t, out);
}

veer_status veer_plan_decode_pb(const uint8_t *plan, size_t plan_size, veer_plan **out, veer_diag *diag) {
    veer__diag_ok(diag);
    if (!out) return veer__fail_plain(diag, VEER_ERR_NULL, "out is NULL");
    *out = NULL;
    size_t mb = sizeof(veer_v1_Plan);
    veer_v1_Plan *m = veer__alloc(mb);
    if (!m) return veer__fail_plain(diag, VEER_ERR_NO_MEMORY, "out of memory");
    veer_status st = veer__wire_decode(veer_v1_Plan_fields, m, plan, plan_size, "plan", diag);
    if (st == VEER_OK) st = veer__wire_plan_decode_heap(m, out, diag);
    veer__free(m, mb);
    return st;
}

veer_status veer_plan_encode_pb(const veer_plan *plan, uint8_t *out, size_t capacity, size_t *size,
                                veer_diag *diag) {
    veer__diag_ok(diag);
    if (!plan || !size)
        return veer__fail_plain(diag, VEER_ERR_NULL, "%s is NULL", !plan ? "plan" : "size");
    size_t mb = sizeof(veer_v1_Plan);
    veer_v1_Plan *m = veer__alloc(mb);
    if (!m) return veer__fail_plain(diag, VEER_ERR_NO_MEMORY, "out of memory");
    veer_status st = veer__wire_plan_to_pb(plan, NULL, m, diag);
    if (st == VEER_OK) st = veer__wire_encode(veer_v1_Plan_fields, m, out, capacity, size, diag);
    veer__free(m, mb);
    if (st == VEER_OK) veer__diag_ok(diag);
    return st;
}

/* ---- Plan bytes -> SetpointTable ------------------------------------------ */

/* The table is written by hand in one pass: every column's size follows from
 * the row count (doubles are 8 bytes, phase and leg values 1 byte each), so
 * each row's values go straight to their places in the output. */
static size_t varint_size(uint64_t v) {
    size_t n = 1;
    while (v >= 0x80u) v >>= 7, n++;
    return n;
}

static uint8_t *put_varint(uint8_t *p, uint64_t v) {
    while (v >= 0x80u) *p++ = (uint8_t)(v | 0x80u), v >>= 7;
    *p++ = (uint8_t)v;
    return p;
}

static uint8_t *put_double(uint8_t *p, double v) {
    uint64_t u;
    memcpy(&u, &v, sizeof u);
    for (int i = 0; i < 8; i++) *p++ = (uint8_t)(u >> (8 * i));
    return p;
}

/* A packed column of n entries of `each` bytes: tag + length + payload. */
static size_t column_size(int field, size_t n, size_t each) {
    return varint_size((uint64_t)field << 3) + varint_size(n * each) + n * each;
}

#define TABLE_BODY_COLUMNS 7 /* t, x, y, yaw, vx, vy, wz: fields 5..11 */

veer_status veer_plan_table_pb(const uint8_t *plan, size_t plan_size, double rate_hz, uint8_t *out, size_t capacity,
                               size_t *size) {
    if (!size) return VEER_ERR_NULL;
    if (!(rate_hz > 0.0) || !isfinite(rate_hz) || rate_hz > 1e6) return VEER_ERR_VALUE;
    size_t wb = VEER__WIRE_WORK_BYTES;
    void *work = veer__alloc(wb);
    if (!work) return VEER_ERR_NO_MEMORY;
    veer_plan *p = NULL;
    veer_status st = load_pb(plan, plan_size, work, wb, NULL, &p, NULL);
    size_t rows = 0;
    if (st == VEER_OK) {
        st = veer_plan_table(p, rate_hz, NULL, 0, &rows);
        if (st == VEER_ERR_BUFFER) st = VEER_OK;
    }
    if (st != VEER_OK) {
        veer__free(work, wb);
        return st;
    }
    const veer_v1_Plan *m = (const veer_v1_Plan *)((char *)work + VEER__ALIGN16(VEER__WIRE_PLAN_WORK_BYTES));
    int M = p->module_count;
    /* Sizes. */
    size_t module_body = 0;
    for (int f = 1; f <= 4; f++) module_body += column_size(f, rows, 8);
    size_t total = 0;
    total += 1 + varint_size(VEER_WIRE_SCHEMA_VERSION);          /* 1: schema_version */
    total += 1 + 8;                                              /* 2: rate_hz */
    total += 1 + varint_size(rows);                              /* 3: row_count */
    total += 1 + 1 + m->content_hash.size;                       /* 4: plan_hash */
    for (int f = 5; f <= 11; f++) total += column_size(f, rows, 8);
    total += column_size(12, rows, 1) + column_size(13, rows, 1); /* phase 1..4, leg < 32 */
    total += (size_t)M * (1 + varint_size(module_body) + module_body);
    *size = total;
    if (!out || capacity < total) {
        veer__free(work, wb);
        return VEER_ERR_BUFFER;
    }
    /* Header fields, then the columns' tags and lengths at their offsets. */
    uint8_t *q = out;
    q = put_varint(q, 1u << 3), q = put_varint(q, VEER_WIRE_SCHEMA_VERSION);
    q = put_varint(q, 2u << 3 | 1u), q = put_double(q, rate_hz);
    q = put_varint(q, 3u << 3), q = put_varint(q, rows);
    q = put_varint(q, 4u << 3 | 2u), q = put_varint(q, m->content_hash.size);
    memcpy(q, m->content_hash.bytes, m->content_hash.size), q += m->content_hash.size;
    uint8_t *col[TABLE_BODY_COLUMNS + 2], *mod[VEER_MAX_MODULES][4];
    for (int f = 5; f <= 13; f++) {
        size_t each = f <= 11 ? 8 : 1;
        q = put_varint(q, (uint64_t)f << 3 | 2u), q = put_varint(q, rows * each);
        col[f - 5] = q;
        q += rows * each;
    }
    for (int i = 0; i < M; i++) {
        q = put_varint(q, 14u << 3 | 2u), q = put_varint(q, module_body);
        for (int f = 1; f <= 4; f++) {
            q = put_varint(q, (uint64_t)f << 3 | 2u), q = put_varint(q, rows * 8);
            mod[i][f - 1] = q;
            q += rows * 8;
        }
    }
    /* Rows, at the times veer_plan_table uses. */
    double dt = 1.0 / rate_hz;
    size_t base = (size_t)(floor(p->duration / dt + 1e-9) + 1.0);
    int extra = rows > base;
    for (size_t r = 0; r < rows; r++) {
        double t = (extra && r == rows - 1) ? p->duration : (double)r * dt;
        veer_sample o;
        veer_status ss = veer_plan_sample(p, t > p->duration ? p->duration : t, &o);
        (void)ss; /* cannot fail: the plan and t are valid */
        const double v[TABLE_BODY_COLUMNS] = {o.t,           o.pose[0],      o.pose[1],     o.pose[2],
                                              o.twist_body[0], o.twist_body[1], o.twist_body[2]};
        for (int c = 0; c < TABLE_BODY_COLUMNS; c++) put_double(col[c] + 8 * r, v[c]);
        col[7][r] = (uint8_t)o.phase;
        col[8][r] = (uint8_t)o.leg;
        for (int i = 0; i < M; i++) {
            put_double(mod[i][0] + 8 * r, o.modules[i].steer);
            put_double(mod[i][1] + 8 * r, o.modules[i].steer_rate);
            put_double(mod[i][2] + 8 * r, o.modules[i].wheel_rate);
            put_double(mod[i][3] + 8 * r, o.modules[i].wheel_accel);
        }
    }
    veer__free(work, wb);
    return VEER_OK;
}

/* ---- what a cart needs ---------------------------------------------------- */

veer_status veer_plan_needs_pb(const uint8_t *plan, size_t plan_size, veer_plan_needs *out, veer_diag *diag) {
    if (!out) return veer__fail_plain(diag, VEER_ERR_NULL, "out is NULL");
    veer_plan *p = NULL;
    veer_status st = veer_plan_decode_pb(plan, plan_size, &p, diag);
    if (st != VEER_OK) return st;
    veer_plan_needs n;
    n.plan_bytes = plan_size < VEER_LINK_MIN_PLAN_BYTES ? VEER_LINK_MIN_PLAN_BYTES : (uint32_t)plan_size;
    n.knots = (uint32_t)p->n;
    n.waypoints = (uint32_t)p->route->waypoint_count;
    n.legs = (uint32_t)p->route->leg_count;
    n.modules = (uint32_t)p->module_count;
    veer_plan_destroy(p);
    *out = n;
    return VEER_OK;
}
