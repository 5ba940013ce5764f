/* The range checks through the message interface (range.proto): requests
 * decoded with nanopb, plans carried as Plan bytes and decoded onto the heap
 * (veer_plan_decode_pb), replies written whole or not at all.
 * SPDX-License-Identifier: MIT */
#include <stdio.h>
#include <string.h>
#include "range_internal.h"
#include "wire_internal.h"
#include "veer/range_wire.h"
#include "veer/v1/range.pb.h"

#define NONE_ID veer__limit(VEER_LIMIT_NONE, -1)

/* ---- Plan bytes read by callback into the heap ----------------------------- */

typedef struct {
    uint8_t *buf;
    size_t size;
    int seen;
    int no_memory;
} blob;

static void blob_free(blob *b) {
    if (b->buf) veer__free(b->buf, b->size);
    b->buf = NULL;
    b->size = 0;
}

static bool read_blob(pb_istream_t *stream, const pb_field_t *field, void **arg) {
    (void)field;
    blob *b = *arg;
    blob_free(b); /* a repeated field: the last one wins, as proto3 says */
    size_t n = stream->bytes_left;
    b->seen = 1;
    if (n == 0) return true;
    b->buf = veer__alloc(n);
    if (!b->buf) {
        b->no_memory = 1;
        return false;
    }
    b->size = n;
    return pb_read(stream, b->buf, n);
}

static veer_status decode_plan(const blob *b, const char *what, veer_plan **plan, veer_diag *diag) {
    if (!b->seen || b->size == 0)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, NONE_ID, "%s: the plan is missing", what);
    veer_status st = veer_plan_decode_pb(b->buf, b->size, plan, diag);
    if (st && diag) {
        char msg[VEER_DIAG_MESSAGE_SIZE];
        snprintf(msg, sizeof msg, "%s", diag->message);
        veer__fail(diag, st, -1, -1, -1, -1.0, NONE_ID, "%s: %s", what, msg);
    }
    return st;
}

/* ---- messages -> structs ------------------------------------------------------- */

static void outline_from_pb(const veer_v1_Outline *m, veer_outline *o) {
    *o = veer_default_outline();
    o->count = (int)m->points_count;
    for (int i = 0; i < o->count && i < VEER_MAX_OUTLINE_VERTICES; i++) {
        o->points[i][0] = m->points[i].x;
        o->points[i][1] = m->points[i].y;
    }
}

/* The range (checked); an unset message is an empty range. */
static veer_status range_from_pb(bool has, const veer_v1_Range *m, veer_range *r, veer_diag *diag) {
    *r = veer_default_range();
    if (!has) return VEER_OK;
    if (m->has_keep_in) outline_from_pb(&m->keep_in, &r->keep_in);
    r->keep_out_count = (int)m->keep_out_count;
    for (int i = 0; i < r->keep_out_count; i++) outline_from_pb(&m->keep_out[i], &r->keep_out[i]);
    r->zone_count = (int)m->zones_count;
    for (int i = 0; i < r->zone_count; i++) {
        if (m->zones[i].has_area) outline_from_pb(&m->zones[i].area, &r->zones[i].area);
        r->zones[i].speed = m->zones[i].speed;
    }
    return veer__range_validate(r, diag);
}

static veer_status footprint_from_pb(bool has, const veer_v1_Footprint *m, veer_footprint *fp, const char *what,
                                     veer_diag *diag) {
    if (!has || !m->has_shape)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, NONE_ID, "%s: the footprint is missing", what);
    outline_from_pb(&m->shape, &fp->shape);
    fp->margin = m->margin;
    return veer__footprint_validate(fp, diag);
}

static veer_status version_ok(uint32_t v, const char *what, veer_diag *diag) {
    if (v != 0 && v != VEER_WIRE_SCHEMA_VERSION)
        return veer__fail(diag, VEER_ERR_VERSION, -1, -1, -1, -1.0, NONE_ID,
                          "%s: schema version %u, this library reads version %d", what, (unsigned)v,
                          VEER_WIRE_SCHEMA_VERSION);
    return VEER_OK;
}

/* ---- structs -> messages ------------------------------------------------------- */

static void event_to_pb(const veer_range_event *e, veer_v1_RangeEvent *m) {
    m->t = e->t;
    m->s = e->s;
    m->x = e->pose[0];
    m->y = e->pose[1];
    m->yaw = e->pose[2];
    m->area_kind = (veer_v1_AreaKind)e->area.kind;
    m->area_index = e->area.index;
    veer_area_name(e->area, m->area_name, sizeof m->area_name);
    m->margin = e->margin;
}

static void report_to_pb(const veer_range_report *r, veer_v1_RangeReport *m) {
    m->clear = r->clear != 0;
    m->has_worst = true;
    event_to_pb(&r->worst, &m->worst);
    m->violated = r->violated != 0;
    if (r->violated) {
        m->has_first_violation = m->has_first_violation_end = true;
        event_to_pb(&r->first_violation, &m->first_violation);
        event_to_pb(&r->first_violation_end, &m->first_violation_end);
    }
    m->poses = r->poses;
}

static void braking_to_pb(const veer_braking_report *b, veer_v1_BrakingReport *m) {
    m->clear = b->clear != 0;
    m->worst_margin = b->worst_margin;
    m->worst_s = b->worst_s;
    m->worst_area_kind = (veer_v1_AreaKind)b->worst_area.kind;
    m->worst_area_index = b->worst_area.index;
    m->worst_t = b->worst_t;
    m->stop_distance = b->stop_distance;
    m->stop_distance_t = b->stop_distance_t;
    m->stop_duration = b->stop_duration;
    m->stop_speed = b->stop_speed;
    m->last_safe_stop_t = b->last_safe_stop_t;
    m->last_safe_stop_s = b->last_safe_stop_s;
    m->stops = b->stops;
}

static void separation_to_pb(const veer_separation_report *r, veer_v1_SeparationReport *m) {
    m->min_separation = r->min_separation;
    m->min_t = r->min_t;
    m->min_a = r->min_a;
    m->min_b = r->min_b;
    m->conflict = r->conflict != 0;
    m->conflict_t = r->conflict_t;
    m->conflict_a = r->conflict_a;
    m->conflict_b = r->conflict_b;
    m->t_begin = r->t_begin;
    m->t_end = r->t_end;
    m->poses = r->poses;
}

/* Encodes the reply; VEER_ERR_BUFFER (reply untouched) when it does not fit,
 * else the reply's own status. */
static veer_status finish(const pb_msgdesc_t *fields, const void *msg, veer_status st, uint8_t *reply,
                          size_t capacity, size_t *reply_size) {
    veer_status enc = veer__wire_encode(fields, msg, reply, capacity, reply_size, NULL);
    return enc != VEER_OK ? enc : st;
}

/* ---- range check ------------------------------------------------------------- */

typedef struct {
    veer_v1_RangeCheckRequest req;
    veer_v1_RangeCheckReply rep;
    veer_range range;
    veer_footprint fp;
    blob plan_bytes;
} check_work;

static veer_status run_check(check_work *w, const uint8_t *request, size_t request_size, veer_diag *diag) {
    w->req.plan.funcs.decode = read_blob;
    w->req.plan.arg = &w->plan_bytes;
    veer_status st = veer__wire_decode(veer_v1_RangeCheckRequest_fields, &w->req, request, request_size,
                                       "range check request", diag);
    if (w->plan_bytes.no_memory)
        return veer__fail(diag, VEER_ERR_NO_MEMORY, -1, -1, -1, -1.0, NONE_ID, "out of memory");
    if (st) return st;
    if ((st = version_ok(w->req.schema_version, "range check request", diag))) return st;
    if ((st = range_from_pb(w->req.has_range, &w->req.range, &w->range, diag))) return st;
    if ((st = footprint_from_pb(w->req.has_footprint, &w->req.footprint, &w->fp, "range check request", diag)))
        return st;
    veer_plan *plan = NULL;
    if ((st = decode_plan(&w->plan_bytes, "range check request", &plan, diag))) return st;
    veer_range_report r;
    st = veer_plan_check_range(plan, &w->range, &w->fp, &r, diag);
    if (st == VEER_OK) {
        w->rep.has_report = true;
        report_to_pb(&r, &w->rep.report);
        if (w->req.braking) {
            veer_braking_report b;
            st = veer_plan_check_braking(plan, &w->range, &w->fp, &b, diag);
            if (st == VEER_OK) {
                w->rep.has_braking = true;
                braking_to_pb(&b, &w->rep.braking);
            }
        }
    }
    veer_plan_destroy(plan);
    return st;
}

veer_status veer_range_check_pb(const uint8_t *request, size_t request_size, uint8_t *reply, size_t reply_capacity,
                                size_t *reply_size) {
    if (!reply_size) return VEER_ERR_NULL;
    check_work *w = veer__calloc(1, sizeof *w);
    if (!w) return VEER_ERR_NO_MEMORY;
    veer_diag diag;
    veer__diag_ok(&diag);
    veer_status st = run_check(w, request, request_size, &diag);
    blob_free(&w->plan_bytes);
    w->rep.schema_version = VEER_WIRE_SCHEMA_VERSION;
    w->rep.status = (veer_v1_Status)veer__wire_status_to_pb(st);
    if (st != VEER_OK) {
        memset(&w->rep.report, 0, sizeof w->rep.report);
        memset(&w->rep.braking, 0, sizeof w->rep.braking);
        w->rep.has_report = w->rep.has_braking = false;
        w->rep.has_diagnostic = true;
        diag.status = st;
        veer__wire_diag_to_pb(&diag, &w->rep.diagnostic);
    }
    st = finish(veer_v1_RangeCheckReply_fields, &w->rep, st, reply, reply_capacity, reply_size);
    veer__free(w, sizeof *w);
    return st;
}

/* ---- planning with speed zones ------------------------------------------------- */

typedef struct {
    veer_v1_RangePlanRequest req;
    veer_v1_RangePlanReply rep;
    veer_v1_Plan plan_msg;
    veer_range range;
    veer_footprint fp;
    blob out;
} plan_work;

static bool write_blob(pb_ostream_t *os, const pb_field_t *field, void *const *arg) {
    const blob *b = *arg;
    if (!b->buf) return true;
    return pb_encode_tag_for_field(os, field) && pb_encode_string(os, b->buf, b->size);
}

static veer_status run_plan(plan_work *w, const uint8_t *request, size_t request_size, veer_diag *diag) {
    veer_status st = veer__wire_decode(veer_v1_RangePlanRequest_fields, &w->req, request, request_size,
                                       "range plan request", diag);
    if (st) return st;
    const veer_v1_PlanRequest *r = &w->req.request;
    if (!w->req.has_request)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, NONE_ID, "range plan request: the request is missing");
    veer_wire_inputs in;
    if ((st = veer__wire_request_inputs(r, "range plan request", &in, diag))) return st;
    if ((st = range_from_pb(w->req.has_range, &w->req.range, &w->range, diag))) return st;
    if ((st = footprint_from_pb(w->req.has_footprint, &w->req.footprint, &w->fp, "range plan request", diag)))
        return st;
    veer_plan *plan = NULL;
    if ((st = veer_plan_create_in_range(&in.drive, &in.limits, &in.route, &in.options, &w->range, &w->fp, &plan, diag)))
        return st;
    st = veer__wire_plan_to_pb(plan, r, &w->plan_msg, diag);
    veer_plan_destroy(plan);
    if (st) return st;
    size_t need = 0;
    if (!pb_get_encoded_size(&need, veer_v1_Plan_fields, &w->plan_msg))
        return veer__fail(diag, VEER_ERR_CAPACITY, -1, -1, -1, -1.0, NONE_ID, "the plan cannot be encoded");
    w->out.buf = veer__alloc(need ? need : 1);
    if (!w->out.buf) return veer__fail(diag, VEER_ERR_NO_MEMORY, -1, -1, -1, -1.0, NONE_ID, "out of memory");
    w->out.size = need ? need : 1;
    pb_ostream_t os = pb_ostream_from_buffer(w->out.buf, need);
    if (!pb_encode(&os, veer_v1_Plan_fields, &w->plan_msg) || os.bytes_written != need)
        return veer__fail(diag, VEER_ERR_STATE, -1, -1, -1, -1.0, NONE_ID, "encoding the plan changed size");
    w->out.size = need;
    return VEER_OK;
}

veer_status veer_range_plan_pb(const uint8_t *request, size_t request_size, uint8_t *reply, size_t reply_capacity,
                               size_t *reply_size) {
    if (!reply_size) return VEER_ERR_NULL;
    plan_work *w = veer__calloc(1, sizeof *w);
    if (!w) return VEER_ERR_NO_MEMORY;
    veer_diag diag;
    veer__diag_ok(&diag);
    veer_status st = run_plan(w, request, request_size, &diag);
    w->rep.schema_version = VEER_WIRE_SCHEMA_VERSION;
    w->rep.status = (veer_v1_Status)veer__wire_status_to_pb(st);
    if (st != VEER_OK) {
        blob_free(&w->out);
        w->rep.has_diagnostic = true;
        diag.status = st;
        veer__wire_diag_to_pb(&diag, &w->rep.diagnostic);
    }
    w->rep.plan.funcs.encode = write_blob;
    w->rep.plan.arg = &w->out;
    st = finish(veer_v1_RangePlanReply_fields, &w->rep, st, reply, reply_capacity, reply_size);
    blob_free(&w->out);
    veer__free(w, sizeof *w);
    return st;
}

/* ---- separation ---------------------------------------------------------------- */

typedef struct {
    veer_cart carts[VEER_MAX_CARTS];
    veer_plan *plans[VEER_MAX_CARTS];
    int count;
    int too_many, no_memory;
    veer_status st;   /* first problem with a cart, reported after decoding */
    veer_diag diag;
    veer_v1_Cart cart; /* scratch for one Cart message */
    blob plan_bytes;
} carts_sink;

static bool read_cart(pb_istream_t *stream, const pb_field_t *field, void **arg) {
    (void)field;
    carts_sink *c = *arg;
    if (c->count >= VEER_MAX_CARTS) {
        c->too_many = 1;
        return false;
    }
    memset(&c->cart, 0, sizeof c->cart);
    c->plan_bytes.seen = 0;
    c->cart.plan.funcs.decode = read_blob;
    c->cart.plan.arg = &c->plan_bytes;
    bool ok = pb_decode(stream, veer_v1_Cart_fields, &c->cart);
    if (c->plan_bytes.no_memory) c->no_memory = 1;
    if (!ok) {
        blob_free(&c->plan_bytes);
        return false;
    }
    int i = c->count++;
    char what[32];
    snprintf(what, sizeof what, "carts[%d]", i);
    if (c->st == VEER_OK) {
        veer_status st = footprint_from_pb(c->cart.has_footprint, &c->cart.footprint, &c->carts[i].footprint, what,
                                           &c->diag);
        if (st == VEER_OK) st = decode_plan(&c->plan_bytes, what, &c->plans[i], &c->diag);
        c->st = st;
    }
    c->carts[i].plan = c->plans[i];
    c->carts[i].start_time = c->cart.start_time;
    blob_free(&c->plan_bytes);
    return true;
}

typedef struct {
    veer_v1_SeparationRequest req;
    veer_v1_SeparationReply rep;
    carts_sink sink;
} sep_work;

static veer_status run_separation(sep_work *w, const uint8_t *request, size_t request_size, veer_diag *diag) {
    carts_sink *c = &w->sink;
    veer__diag_ok(&c->diag);
    w->req.carts.funcs.decode = read_cart;
    w->req.carts.arg = c;
    veer_status st = veer__wire_decode(veer_v1_SeparationRequest_fields, &w->req, request, request_size,
                                       "separation request", diag);
    if (c->no_memory) return veer__fail(diag, VEER_ERR_NO_MEMORY, -1, -1, -1, -1.0, NONE_ID, "out of memory");
    if (c->too_many)
        return veer__fail(diag, VEER_ERR_CAPACITY, -1, -1, -1, -1.0, NONE_ID,
                          "separation request: more than %d carts", VEER_MAX_CARTS);
    if (st) return st;
    if ((st = version_ok(w->req.schema_version, "separation request", diag))) return st;
    if (c->st) {
        if (diag) *diag = c->diag;
        return c->st;
    }
    veer_separation_report r;
    st = veer_carts_check_separation(c->carts, c->count, w->req.required, &r, diag);
    if (st == VEER_OK) {
        w->rep.has_report = true;
        separation_to_pb(&r, &w->rep.report);
    }
    return st;
}

veer_status veer_carts_separation_pb(const uint8_t *request, size_t request_size, uint8_t *reply,
                                     size_t reply_capacity, size_t *reply_size) {
    if (!reply_size) return VEER_ERR_NULL;
    sep_work *w = veer__calloc(1, sizeof *w);
    if (!w) return VEER_ERR_NO_MEMORY;
    veer_diag diag;
    veer__diag_ok(&diag);
    veer_status st = run_separation(w, request, request_size, &diag);
    for (int i = 0; i < w->sink.count; i++) veer_plan_destroy(w->sink.plans[i]);
    blob_free(&w->sink.plan_bytes);
    w->rep.schema_version = VEER_WIRE_SCHEMA_VERSION;
    w->rep.status = (veer_v1_Status)veer__wire_status_to_pb(st);
    if (st != VEER_OK) {
        w->rep.has_report = false;
        memset(&w->rep.report, 0, sizeof w->rep.report);
        w->rep.has_diagnostic = true;
        diag.status = st;
        veer__wire_diag_to_pb(&diag, &w->rep.diagnostic);
    }
    st = finish(veer_v1_SeparationReply_fields, &w->rep, st, reply, reply_capacity, reply_size);
    veer__free(w, sizeof *w);
    return st;
}
