/* The range checks through the message interface (range.proto): requests
 * built here with nanopb, replies decoded and checked against the same
 * outside references as test_range.c (elementary geometry, the closed-form
 * trapezoid, brute-force sampling), and bad bytes refused by name.
 * Scenarios are invented. SPDX-License-Identifier: MIT */
#include <criterion/criterion.h>
#include <math.h>
#include <string.h>
#include <pb_decode.h>
#include <pb_encode.h>
#include <veer/veer.h>
#include <veer/range_wire.h>
#include "veer/v1/range.pb.h"

/* NAN and INFINITY are float constants under clang: doubles here (-Wdouble-promotion). */
#define T_NAN ((double)NAN)
#define T_INF ((double)INFINITY)

typedef struct {
    const uint8_t *buf;
    size_t size;
} bytes_ref;

static bool put_bytes(pb_ostream_t *os, const pb_field_t *field, void *const *arg) {
    const bytes_ref *b = *arg;
    if (!b || !b->buf) return true;
    return pb_encode_tag_for_field(os, field) && pb_encode_string(os, b->buf, b->size);
}

typedef struct {
    uint8_t buf[65536];
    size_t size;
} bytes_out;

static bool get_bytes(pb_istream_t *is, const pb_field_t *field, void **arg) {
    (void)field;
    bytes_out *b = *arg;
    b->size = is->bytes_left;
    if (b->size > sizeof b->buf) return false;
    return pb_read(is, b->buf, b->size);
}

static veer_plan *line_plan(double x1, double y0, double v, double a) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    l.body_speed = v;
    l.body_accel = a;
    veer_route r = veer_default_route(0.0, y0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(x1, y0);
    w.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    veer_plan *p = NULL;
    cr_assert_eq(veer_plan_create(&d, &l, &r, NULL, &p, NULL), VEER_OK);
    return p;
}

static size_t plan_bytes(const veer_plan *p, uint8_t *buf, size_t cap) {
    size_t n = 0;
    veer_diag d;
    cr_assert_eq(veer_plan_encode_pb(p, buf, cap, &n, &d), VEER_OK, "%s", d.message);
    return n;
}

static void box_pb(veer_v1_Outline *o, double x0, double y0, double x1, double y1) {
    o->points_count = 4;
    double xy[4][2] = {{x0, y0}, {x1, y0}, {x1, y1}, {x0, y1}};
    for (int i = 0; i < 4; i++) o->points[i].x = xy[i][0], o->points[i].y = xy[i][1];
}

static void rect_fp(veer_v1_Footprint *f, double front, double rear, double half_w, double margin) {
    f->has_shape = true;
    box_pb(&f->shape, -rear, -half_w, front, half_w);
    f->margin = margin;
}

static size_t encode(const pb_msgdesc_t *fields, const void *msg, uint8_t *buf, size_t cap) {
    pb_ostream_t os = pb_ostream_from_buffer(buf, cap);
    cr_assert(pb_encode(&os, fields, msg), "%s", PB_GET_ERROR(&os));
    return os.bytes_written;
}

static veer_v1_RangeCheckReply check(const uint8_t *req, size_t n, veer_status want) {
    static uint8_t reply[VEER_RANGE_REPLY_CAPACITY];
    size_t rs = 0;
    veer_status st = veer_range_check_pb(req, n, reply, sizeof reply, &rs);
    veer_v1_RangeCheckReply rep = veer_v1_RangeCheckReply_init_zero;
    pb_istream_t is = pb_istream_from_buffer(reply, rs);
    cr_assert(pb_decode(&is, veer_v1_RangeCheckReply_fields, &rep));
    cr_assert_eq(st, want, "status %s, want %s: %s", veer_status_name(st), veer_status_name(want), rep.diagnostic.message);
    cr_assert_eq((int)rep.status, (int)want + 1, "the reply names the same status");
    return rep;
}

/* A straight run past a keep-out 0.123 m from the grown footprint's side
 * (elementary geometry), and into a wall ahead: the first violation where
 * the grown front reaches it, at the cruise time of the closed-form
 * trapezoid (Lynch & Park, Modern Robotics, 9.2). */
Test(range_wire, check_reports_margin_and_first_violation) {
    veer_plan *p = line_plan(10.0, 0.0, 2.0, 1.0);
    static uint8_t pb[65536], req_buf[131072];
    bytes_ref plan = {pb, plan_bytes(p, pb, sizeof pb)};
    static veer_v1_RangeCheckRequest req;
    memset(&req, 0, sizeof req);
    req.plan.funcs.encode = put_bytes;
    req.plan.arg = &plan;
    req.has_range = true;
    req.range.has_keep_in = true;
    box_pb(&req.range.keep_in, -50, -50, 50, 50);
    req.range.keep_out_count = 1;
    box_pb(&req.range.keep_out[0], 4.0, 0.35 + 0.05 + 0.123, 6.0, 3.0);
    req.has_footprint = true;
    rect_fp(&req.footprint, 0.6, 0.4, 0.35, 0.05);
    req.braking = true;
    veer_v1_RangeCheckReply rep = check(req_buf, encode(veer_v1_RangeCheckRequest_fields, &req, req_buf, sizeof req_buf),
                                        VEER_OK);
    cr_assert(rep.has_report);
    cr_expect(rep.report.clear);
    cr_expect(fabs(rep.report.worst.margin - 0.123) < 1e-3, "worst %g", rep.report.worst.margin);
    cr_expect_str_eq(rep.report.worst.area_name, "keep_out[0]");
    cr_assert(rep.has_braking);
    cr_expect(fabs(rep.braking.stop_distance - 2.0) < 1e-3, "v^2 / 2a = 2 m: %g", rep.braking.stop_distance);

    /* now a wall across the line at x = 7 */
    req.range.keep_out_count = 2;
    box_pb(&req.range.keep_out[1], 7.0, -5.0, 20.0, 5.0);
    rep = check(req_buf, encode(veer_v1_RangeCheckRequest_fields, &req, req_buf, sizeof req_buf), VEER_OK);
    cr_expect(!rep.report.clear);
    cr_assert(rep.report.violated && rep.report.has_first_violation);
    double s_v = 7.0 - 0.6 - 0.05, t_v = 2.0 + (s_v - 2.0) / 2.0;
    cr_expect(fabs(rep.report.first_violation.s - s_v) < 1e-4, "s %g", rep.report.first_violation.s);
    cr_expect(fabs(rep.report.first_violation.t - t_v) < 5e-3, "t %g want %g", rep.report.first_violation.t, t_v);
    cr_expect_str_eq(rep.report.first_violation.area_name, "keep_out[1]");
    cr_expect(fabs(rep.report.first_violation.margin + (10.6 + 0.05 - 7.0)) < 1e-3);
    /* the last safe stop: cruising at 2 m/s, 2 m (v^2 / 2a) before s_v */
    cr_expect(fabs(rep.braking.last_safe_stop_t - (2.0 + (s_v - 2.0 - 2.0) / 2.0)) < 3e-3, "t %g",
              rep.braking.last_safe_stop_t);
    veer_plan_destroy(p);
}

Test(range_wire, bad_bytes_are_refused_by_name) {
    veer_plan *p = line_plan(5.0, 0.0, 1.0, 1.0);
    static uint8_t pb[65536], req_buf[131072];
    bytes_ref plan = {pb, plan_bytes(p, pb, sizeof pb)};
    static veer_v1_RangeCheckRequest req;
    memset(&req, 0, sizeof req);
    req.plan.funcs.encode = put_bytes;
    req.plan.arg = &plan;
    req.has_range = true;
    req.range.has_keep_in = true;
    box_pb(&req.range.keep_in, -50, -50, 50, 50);
    req.has_footprint = true;
    rect_fp(&req.footprint, 0.5, 0.5, 0.3, 0.0);
    size_t n = encode(veer_v1_RangeCheckRequest_fields, &req, req_buf, sizeof req_buf);
    (void)check(req_buf, n, VEER_OK);

    /* reply buffer too small: VEER_ERR_BUFFER, untouched, size said */
    uint8_t small[8];
    memset(small, 0xab, sizeof small);
    size_t rs = 0;
    cr_expect_eq(veer_range_check_pb(req_buf, n, small, sizeof small, &rs), VEER_ERR_BUFFER);
    cr_expect(rs > sizeof small);
    for (size_t i = 0; i < sizeof small; i++) cr_expect_eq(small[i], 0xab);
    cr_expect_eq(veer_range_check_pb(req_buf, n, small, sizeof small, NULL), VEER_ERR_NULL);

    /* garbage and truncation */
    uint8_t junk[64];
    for (size_t i = 0; i < sizeof junk; i++) junk[i] = (uint8_t)(37 * i + 11);
    veer_v1_RangeCheckReply rep = check(junk, sizeof junk, VEER_ERR_DECODE);
    cr_expect(rep.has_diagnostic && strlen(rep.diagnostic.message) > 0);
    (void)check(req_buf, n / 2, VEER_ERR_DECODE);

    /* a NaN in a keep-out, a bow tie, no footprint, no plan, no keep-in, wrong version */
    req.range.keep_out_count = 1;
    box_pb(&req.range.keep_out[0], 1, 1, 2, 2);
    req.range.keep_out[0].points[2].x = T_NAN;
    rep = check(req_buf, encode(veer_v1_RangeCheckRequest_fields, &req, req_buf, sizeof req_buf), VEER_ERR_VALUE);
    cr_expect(strstr(rep.diagnostic.message, "keep_out[0]") != NULL, "%s", rep.diagnostic.message);
    box_pb(&req.range.keep_out[0], 1, 1, 2, 2);
    req.range.keep_out[0].points[1].x = 2, req.range.keep_out[0].points[1].y = 2; /* (1,1) (2,2) (2,1) (1,2): a bow tie */
    req.range.keep_out[0].points[2].x = 2, req.range.keep_out[0].points[2].y = 1;
    rep = check(req_buf, encode(veer_v1_RangeCheckRequest_fields, &req, req_buf, sizeof req_buf), VEER_ERR_GEOMETRY);
    cr_expect(strstr(rep.diagnostic.message, "cross") != NULL, "%s", rep.diagnostic.message);
    req.range.keep_out_count = 0;
    req.has_footprint = false;
    rep = check(req_buf, encode(veer_v1_RangeCheckRequest_fields, &req, req_buf, sizeof req_buf), VEER_ERR_VALUE);
    cr_expect(strstr(rep.diagnostic.message, "footprint") != NULL, "%s", rep.diagnostic.message);
    req.has_footprint = true;
    req.plan.arg = NULL;
    rep = check(req_buf, encode(veer_v1_RangeCheckRequest_fields, &req, req_buf, sizeof req_buf), VEER_ERR_VALUE);
    cr_expect(strstr(rep.diagnostic.message, "plan is missing") != NULL, "%s", rep.diagnostic.message);
    uint8_t bad_plan[5] = {1, 2, 3, 4, 5};
    bytes_ref bp = {bad_plan, sizeof bad_plan};
    req.plan.arg = &bp;
    (void)check(req_buf, encode(veer_v1_RangeCheckRequest_fields, &req, req_buf, sizeof req_buf), VEER_ERR_DECODE);
    req.plan.arg = &plan;
    req.range.has_keep_in = false;
    rep = check(req_buf, encode(veer_v1_RangeCheckRequest_fields, &req, req_buf, sizeof req_buf), VEER_ERR_VALUE);
    cr_expect(strstr(rep.diagnostic.message, "keep-in") != NULL, "%s", rep.diagnostic.message);
    req.range.has_keep_in = true;
    req.schema_version = 99;
    (void)check(req_buf, encode(veer_v1_RangeCheckRequest_fields, &req, req_buf, sizeof req_buf), VEER_ERR_VERSION);
    veer_plan_destroy(p);
}

/* Planning through the bytes API with a speed zone across a straight line:
 * the Plan bytes in the reply decode, and wherever the footprint grown by
 * its margin meets the zone (checked here against the rectangle's extent,
 * which for a footprint translating along x is exact) the body speed is
 * within the cap, at every millisecond. */
Test(range_wire, plan_with_speed_zone) {
    static veer_v1_RangePlanRequest req;
    memset(&req, 0, sizeof req);
    req.has_request = true;
    veer_v1_PlanRequest *r = &req.request;
    r->has_drive = true;
    r->drive.kind = veer_v1_DriveKind_DRIVE_KIND_MECANUM;
    r->drive.has_wheel_radius = r->drive.has_half_wheelbase = r->drive.has_half_track = true;
    r->drive.wheel_radius = 0.1;
    r->drive.half_wheelbase = 0.3;
    r->drive.half_track = 0.25;
    r->has_limits = true;
    r->limits.has_body_speed = true;
    r->limits.body_speed = 2.0;
    r->limits.has_body_accel = true;
    r->limits.body_accel = 1.0;
    r->has_route = true;
    r->route.legs_count = 1;
    r->route.legs[0].kind = veer_v1_LegKind_LEG_KIND_TRAVEL;
    r->route.legs[0].waypoint_count = 1;
    r->route.waypoints_count = 1;
    r->route.waypoints[0].x = 12.0;
    r->route.waypoints[0].stop = true;
    req.has_range = true;
    req.range.zones_count = 1;
    req.range.zones[0].has_area = true;
    box_pb(&req.range.zones[0].area, 5.0, -2.0, 6.0, 2.0);
    req.range.zones[0].speed = 0.5;
    req.has_footprint = true;
    rect_fp(&req.footprint, 0.6, 0.4, 0.35, 0.1);
    static uint8_t req_buf[200000], reply[200000];
    size_t n = encode(veer_v1_RangePlanRequest_fields, &req, req_buf, sizeof req_buf), rs = 0;
    veer_status st = veer_range_plan_pb(req_buf, n, reply, sizeof reply, &rs);
    static veer_v1_RangePlanReply rep;
    static bytes_out out;
    memset(&rep, 0, sizeof rep);
    rep.plan.funcs.decode = get_bytes;
    rep.plan.arg = &out;
    pb_istream_t is = pb_istream_from_buffer(reply, rs);
    cr_assert(pb_decode(&is, veer_v1_RangePlanReply_fields, &rep));
    cr_assert_eq(st, VEER_OK, "%s", rep.diagnostic.message);
    veer_plan *p = NULL;
    veer_diag d;
    cr_assert_eq(veer_plan_decode_pb(out.buf, out.size, &p, &d), VEER_OK, "%s", d.message);
    int met = 0;
    double fastest = 0.0;
    for (long k = 0; k * 1e-3 <= veer_plan_duration(p); k++) {
        veer_sample s;
        cr_assert_eq(veer_plan_sample(p, k * 1e-3, &s), VEER_OK);
        double v = hypot(s.twist_world[0], s.twist_world[1]);
        fastest = fmax(fastest, v);
        /* grown footprint x extent [x - 0.5, x + 0.7] meets [5, 6] */
        if (s.pose[0] + 0.7 >= 5.0 && s.pose[0] - 0.5 <= 6.0) {
            met++;
            cr_assert(v <= 0.5 * (1 + 1e-9), "t %.3f x %.3f: %.4f m/s", s.t, s.pose[0], v);
        }
    }
    cr_expect(met > 1000, "in the zone for %d ms", met);
    cr_expect(fastest > 1.9, "full speed elsewhere: %g", fastest);
    veer_plan_destroy(p);

    /* a zone speed of 0 is refused by name */
    req.range.zones[0].speed = 0.0;
    n = encode(veer_v1_RangePlanRequest_fields, &req, req_buf, sizeof req_buf);
    cr_expect_eq(veer_range_plan_pb(req_buf, n, reply, sizeof reply, &rs), VEER_ERR_VALUE);
}

/* Two carts on crossing lanes through the bytes API: separation and first
 * conflict against brute-force sampling every 0.1 ms with the decoded plans
 * (rectangles crossing at right angles: the test's own corner-to-edge
 * distances). */
typedef struct {
    bytes_ref plans[3];
    double start[3];
    int count;
} carts_src;

static bool put_carts(pb_ostream_t *os, const pb_field_t *field, void *const *arg) {
    const carts_src *c = *arg;
    for (int i = 0; i < c->count; i++) {
        veer_v1_Cart cart = veer_v1_Cart_init_zero;
        cart.plan.funcs.encode = put_bytes;
        cart.plan.arg = (void *)&c->plans[i];
        cart.start_time = c->start[i];
        cart.has_footprint = true;
        rect_fp(&cart.footprint, 0.5, 0.5, 0.3, 0.05);
        if (!pb_encode_tag_for_field(os, field) || !pb_encode_submessage(os, veer_v1_Cart_fields, &cart)) return false;
    }
    return true;
}

static double rect_gap(const double pa[3], const double pb[3]) {
    /* corners of each 1.0 x 0.6 rectangle, distance by vertex-to-edge pairs
     * (axis-aligned here: both lanes keep yaw 0) */
    double ax0 = pa[0] - 0.5, ax1 = pa[0] + 0.5, ay0 = pa[1] - 0.3, ay1 = pa[1] + 0.3;
    double bx0 = pb[0] - 0.5, bx1 = pb[0] + 0.5, by0 = pb[1] - 0.3, by1 = pb[1] + 0.3;
    double dx = fmax(0.0, fmax(ax0 - bx1, bx0 - ax1)), dy = fmax(0.0, fmax(ay0 - by1, by0 - ay1));
    return hypot(dx, dy);
}

Test(range_wire, separation_of_crossing_carts) {
    veer_plan *pa = line_plan(10.0, 0.0, 2.0, 1.0);
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    l.body_speed = 1.5;
    l.body_accel = 0.8;
    veer_route r = veer_default_route(5.0, -8.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(5.0, 8.0);
    w.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    veer_plan *pb = NULL;
    cr_assert_eq(veer_plan_create(&d, &l, &r, NULL, &pb, NULL), VEER_OK);
    static uint8_t ba[65536], bb[65536], req_buf[262144], reply[VEER_RANGE_REPLY_CAPACITY];
    carts_src src;
    memset(&src, 0, sizeof src);
    src.plans[0] = (bytes_ref){ba, plan_bytes(pa, ba, sizeof ba)};
    src.plans[1] = (bytes_ref){bb, plan_bytes(pb, bb, sizeof bb)};
    src.start[0] = 0.0;
    src.start[1] = -3.2;
    src.count = 2;
    veer_v1_SeparationRequest req = veer_v1_SeparationRequest_init_zero;
    req.carts.funcs.encode = put_carts;
    req.carts.arg = &src;
    req.required = 1.5;
    size_t n = encode(veer_v1_SeparationRequest_fields, &req, req_buf, sizeof req_buf), rs = 0;
    veer_status st = veer_carts_separation_pb(req_buf, n, reply, sizeof reply, &rs);
    veer_v1_SeparationReply rep = veer_v1_SeparationReply_init_zero;
    pb_istream_t is = pb_istream_from_buffer(reply, rs);
    cr_assert(pb_decode(&is, veer_v1_SeparationReply_fields, &rep));
    cr_assert_eq(st, VEER_OK, "%s", rep.diagnostic.message);
    /* brute force on the decoded plans */
    veer_plan *da = NULL, *db = NULL;
    cr_assert_eq(veer_plan_decode_pb(ba, src.plans[0].size, &da, NULL), VEER_OK);
    cr_assert_eq(veer_plan_decode_pb(bb, src.plans[1].size, &db, NULL), VEER_OK);
    double t0 = -3.2, t1 = fmax(veer_plan_duration(da), -3.2 + veer_plan_duration(db));
    double best = T_INF, first = -1.0;
    for (long k = 0; t0 + k * 1e-4 <= t1; k++) {
        double T = t0 + k * 1e-4;
        veer_sample sa, sb;
        cr_assert_eq(veer_plan_sample(da, T, &sa), VEER_OK);
        cr_assert_eq(veer_plan_sample(db, T + 3.2, &sb), VEER_OK);
        double sep = rect_gap(sa.pose, sb.pose) - 0.1;
        best = fmin(best, sep);
        if (first < 0.0 && sep < 1.5) first = T;
    }
    cr_expect(fabs(rep.report.min_separation - best) < 1e-3, "min %.5f brute %.5f", rep.report.min_separation, best);
    cr_expect_eq(rep.report.conflict, first >= 0.0);
    if (first >= 0.0) cr_expect(fabs(rep.report.conflict_t - first) < 2e-4, "%.5f vs %.5f", rep.report.conflict_t, first);
    veer_plan_destroy(da);
    veer_plan_destroy(db);

    /* one cart only, and a cart without plan bytes */
    src.count = 1;
    n = encode(veer_v1_SeparationRequest_fields, &req, req_buf, sizeof req_buf);
    cr_expect_eq(veer_carts_separation_pb(req_buf, n, reply, sizeof reply, &rs), VEER_ERR_VALUE);
    src.count = 2;
    src.plans[1].buf = NULL;
    n = encode(veer_v1_SeparationRequest_fields, &req, req_buf, sizeof req_buf);
    cr_expect_eq(veer_carts_separation_pb(req_buf, n, reply, sizeof reply, &rs), VEER_ERR_VALUE);
    veer_plan_destroy(pa);
    veer_plan_destroy(pb);
}
