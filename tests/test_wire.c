/* Message interface suite: message round trips, bytes made by protoc,
 * SHA-256 test vectors, untrusted input (truncation at every length, fixed-
 * seed garbage, bit flips, over-capacity lists), buffer rules, and a plan
 * carried request -> reply -> Plan bytes that samples like the plan in memory.
 * The scenarios are invented test data. */
#include <criterion/criterion.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "wire_internal.h"
#include "diag_text.h"

#define PI 3.14159265358979323846
#define DEG (PI / 180.0)

/* ---- helpers ------------------------------------------------------------ */

static int known_status(veer_status st) { return strcmp(veer_status_name(st), "UNKNOWN") != 0; }

/* A small xorshift generator: fixed seeds, same bytes on every machine. */
static uint64_t rng_state;
static uint64_t rng(void) {
    rng_state ^= rng_state << 13;
    rng_state ^= rng_state >> 7;
    rng_state ^= rng_state << 17;
    return rng_state;
}

/* The demo scenario of examples/demo.c (Kestrel Flats, lane 4, cart K4). */
typedef struct {
    veer_drive_def drive;
    veer_limits limits;
    veer_route route;
} scenario;

static scenario demo_scenario(void) {
    scenario sc;
    sc.drive = veer_default_drive_def(VEER_DRIVE_STEERED);
    sc.drive.module_count = 4;
    const double mx[4] = {0.35, 0.35, -0.35, -0.35}, my[4] = {0.30, -0.30, -0.30, 0.30};
    for (int i = 0; i < 4; i++) sc.drive.modules[i].x = mx[i], sc.drive.modules[i].y = my[i];
    sc.drive.wheel_radius = 0.1;
    sc.limits = veer_default_limits();
    for (int i = 0; i < 4; i++) {
        sc.limits.modules[i].wheel_rate = 25.0;
        sc.limits.modules[i].wheel_accel = 30.0;
        sc.limits.modules[i].steer_rate = 4.0;
        sc.limits.modules[i].steer_min = -270.0 * DEG;
        sc.limits.modules[i].steer_max = 270.0 * DEG;
    }
    sc.limits.body_speed = 2.2;
    sc.limits.body_accel = 2.0;
    sc.limits.yaw_rate = 1.5;
    sc.limits.yaw_accel = 3.0;
    double x0 = -12.0, y0 = 0.5;
    sc.route = veer_default_route(x0, y0, atan2(-40.0 - y0, 0.0 - x0));
    veer_leg cross = veer_default_leg(VEER_LEG_TRAVEL);
    cross.heading = VEER_HEADING_TOWARD;
    cross.toward_x = 0.0;
    cross.toward_y = -40.0;
    cross.corner_tolerance = 0.4;
    cr_assert_eq(veer_route_add_leg(&sc.route, &cross), VEER_OK);
    const double wx[3] = {-6.0, 1.0, 6.5}, wy[3] = {2.0, 2.0, 0.0};
    for (int w = 0; w < 3; w++) {
        veer_waypoint wp = veer_default_waypoint(wx[w], wy[w]);
        if (w == 2) wp.stop = 1, wp.dwell = 2.0;
        cr_assert_eq(veer_route_add_waypoint(&sc.route, &wp), VEER_OK);
    }
    veer_leg pivot = veer_default_leg(VEER_LEG_PIVOT);
    pivot.pivot_x = 8.5;
    pivot.pivot_y = -0.5;
    pivot.angle = -50.0 * DEG;
    cr_assert_eq(veer_route_add_leg(&sc.route, &pivot), VEER_OK);
    return sc;
}

/* A mecanum cart on an invented scenario: travel with a tangent heading and a spin. */
static scenario mecanum_scenario(void) {
    scenario sc;
    sc.drive = veer_default_drive_def(VEER_DRIVE_MECANUM);
    sc.limits = veer_default_limits();
    for (int i = 0; i < 4; i++) sc.limits.modules[i].wheel_rate = 20.0, sc.limits.modules[i].wheel_accel = 40.0;
    sc.limits.body_speed = 1.5;
    sc.limits.yaw_rate = 2.0;
    sc.route = veer_default_route(-3.0, 1.5, 0.0);
    veer_leg l = veer_default_leg(VEER_LEG_TRAVEL);
    l.heading = VEER_HEADING_TANGENT;
    cr_assert_eq(veer_route_add_leg(&sc.route, &l), VEER_OK);
    veer_waypoint a = veer_default_waypoint(2.0, 1.5), b = veer_default_waypoint(4.0, -1.0);
    b.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&sc.route, &a), VEER_OK);
    cr_assert_eq(veer_route_add_waypoint(&sc.route, &b), VEER_OK);
    veer_leg s = veer_default_leg(VEER_LEG_SPIN);
    s.yaw = 2.0;
    cr_assert_eq(veer_route_add_leg(&sc.route, &s), VEER_OK);
    return sc;
}

/* PlanRequest bytes for a scenario (heap; *size gets the length). */
static uint8_t *request_bytes(const scenario *sc, int grid_points, const char *cart_id, size_t *size) {
    veer_v1_PlanRequest *r = calloc(1, sizeof *r);
    cr_assert_not_null(r);
    int M = veer_drive_module_count(&sc->drive);
    r->schema_version = VEER_WIRE_SCHEMA_VERSION;
    r->has_drive = r->has_limits = r->has_route = true;
    veer__wire_drive_to_pb(&sc->drive, &r->drive);
    veer__wire_limits_to_pb(&sc->limits, M, &r->limits);
    veer__wire_route_to_pb(&sc->route, M, &r->route);
    if (grid_points > 0) {
        r->has_options = true;
        r->options.has_grid_points = true;
        r->options.grid_points = (uint32_t)grid_points;
    }
    if (cart_id) snprintf(r->cart_id, sizeof r->cart_id, "%s", cart_id);
    size_t need = 0;
    cr_assert(pb_get_encoded_size(&need, veer_v1_PlanRequest_fields, r));
    uint8_t *buf = malloc(need + 1);
    pb_ostream_t os = pb_ostream_from_buffer(buf, need);
    cr_assert(pb_encode(&os, veer_v1_PlanRequest_fields, r));
    *size = os.bytes_written;
    free(r);
    return buf;
}

/* Runs a request; returns the reply bytes (heap) and the status. */
static uint8_t *run_request(const uint8_t *req, size_t n, size_t *reply_size, veer_status *st) {
    size_t cap = veer_plan_reply_size_bound(50000);
    uint8_t *rep = malloc(cap);
    *st = veer_plan_request_pb(req, n, rep, cap, reply_size);
    cr_assert_neq(*st, VEER_ERR_BUFFER, "the size bound %zu was too small (%zu)", cap, *reply_size);
    return rep;
}

/* Per-grid-point arrays of a reply, decoded through callbacks. */
typedef struct {
    double *v;
    int64_t *iv;
    size_t n, cap;
    int kind; /* 0 double, 1 varint, 2 svarint */
} column;

static bool read_column(pb_istream_t *in, const pb_field_t *field, void **arg) {
    (void)field;
    column *c = *arg;
    while (in->bytes_left) {
        if (c->n >= c->cap) return false;
        if (c->kind == 0) {
            if (!pb_decode_fixed64(in, &c->v[c->n])) return false;
        } else if (c->kind == 1) {
            uint64_t u;
            if (!pb_decode_varint(in, &u)) return false;
            c->iv[c->n] = (int64_t)u;
        } else {
            int64_t s;
            if (!pb_decode_svarint(in, &s)) return false;
            c->iv[c->n] = s;
        }
        c->n++;
    }
    return true;
}

static column new_column(size_t cap, int kind) {
    column c = {calloc(cap, sizeof(double)), calloc(cap, sizeof(int64_t)), 0, cap, kind};
    return c;
}

static void free_column(column *c) {
    free(c->v);
    free(c->iv);
}

/* ---- SHA-256 ------------------------------------------------------------ */

static void hex32(const uint8_t *d, char *out) {
    for (int i = 0; i < 32; i++) sprintf(out + 2 * i, "%02x", d[i]);
}

Test(wire_sha256, fips_180_examples) {
    /* NIST FIPS 180-4 / CSRC example values for SHA-256 ("abc", the empty
     * string, the 448-bit message, one million 'a'), checked with Python's
     * hashlib (Debian python3). */
    static const char *msg[] = {"abc", "", "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"};
    static const char *want[] = {"ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad",
                                 "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855",
                                 "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"};
    for (int i = 0; i < 3; i++) {
        veer_sha256 c;
        uint8_t d[32];
        char h[65];
        veer__sha256_init(&c);
        veer__sha256_update(&c, msg[i], strlen(msg[i]));
        veer__sha256_final(&c, d);
        hex32(d, h);
        cr_expect_str_eq(h, want[i], "message %d", i);
    }
    veer_sha256 c;
    uint8_t d[32], a[1001];
    char h[65];
    memset(a, 'a', sizeof a);
    veer__sha256_init(&c);
    for (int i = 0; i < 1000; i++) veer__sha256_update(&c, a, i % 2 ? 999 : 1001); /* uneven pieces */
    veer__sha256_final(&c, d);
    hex32(d, h);
    cr_expect_str_eq(h, "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
}

/* ---- bytes made by protoc ------------------------------------------------- */

/* protoc --encode=veer.v1.PlanRequest (libprotoc 3.21.12, Debian
 * protobuf-compiler) of this text:
 *   schema_version: 1
 *   drive { kind: DRIVE_KIND_MECANUM wheel_radius: 0.076 half_wheelbase: 0.25
 *           half_track: 0.2 roller_angle: 0.7853981633974483 }
 *   limits { modules { wheel_rate: 20 wheel_accel: 40 } body_speed: 1.5 yaw_rate: 2 }
 *   route { start_x: -3 start_y: 1.5 start_yaw: 0.5
 *     legs { kind: LEG_KIND_TRAVEL waypoint_count: 2 heading: HEADING_TANGENT
 *            reversed: true corner_tolerance: 0.3 dwell: 1.5 }
 *     legs { kind: LEG_KIND_SPIN yaw: -1 turn: TURN_CLOCKWISE }
 *     waypoints { x: 2 y: 1.5 }
 *     waypoints { x: 4 y: -1 yaw: 0.25 stop: true dwell: 0.5 } }
 *   options { grid_points: 400 accel_polygon_sides: 16 traction_polygon_sides: 16 }
 *   cart_id: "M7" */
static const uint8_t protoc_request[] = {
    0x08, 0x01, 0x12, 0x26, 0x08, 0x02, 0x19, 0xdb, 0xf9, 0x7e, 0x6a, 0xbc, 0x74, 0xb3, 0x3f, 0x21, 0x00, 0x00, 0x00,
    0x00, 0x00, 0x00, 0xd0, 0x3f, 0x29, 0x9a, 0x99, 0x99, 0x99, 0x99, 0x99, 0xc9, 0x3f, 0x31, 0x18, 0x2d, 0x44, 0x54,
    0xfb, 0x21, 0xe9, 0x3f, 0x1a, 0x26, 0x0a, 0x12, 0x09, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x34, 0x40, 0x11, 0x00,
    0x00, 0x00, 0x00, 0x00, 0x00, 0x44, 0x40, 0x11, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0xf8, 0x3f, 0x21, 0x00, 0x00,
    0x00, 0x00, 0x00, 0x00, 0x00, 0x40, 0x22, 0x82, 0x01, 0x09, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x08, 0xc0, 0x11,
    0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0xf8, 0x3f, 0x19, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0xe0, 0x3f, 0x2a, 0x1a,
    0x08, 0x01, 0x10, 0x02, 0x18, 0x02, 0x20, 0x01, 0x39, 0x33, 0x33, 0x33, 0x33, 0x33, 0x33, 0xd3, 0x3f, 0x69, 0x00,
    0x00, 0x00, 0x00, 0x00, 0x00, 0xf8, 0x3f, 0x2a, 0x0d, 0x08, 0x02, 0x41, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0xf0,
    0xbf, 0x48, 0x03, 0x32, 0x12, 0x09, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x40, 0x11, 0x00, 0x00, 0x00, 0x00,
    0x00, 0x00, 0xf8, 0x3f, 0x32, 0x26, 0x09, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x10, 0x40, 0x11, 0x00, 0x00, 0x00,
    0x00, 0x00, 0x00, 0xf0, 0xbf, 0x19, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0xd0, 0x3f, 0x20, 0x01, 0x29, 0x00, 0x00,
    0x00, 0x00, 0x00, 0x00, 0xe0, 0x3f, 0x2a, 0x07, 0x08, 0x90, 0x03, 0x10, 0x10, 0x18, 0x10, 0x32, 0x02, 0x4d, 0x37};

Test(wire_protoc, request_decodes_to_the_stated_values) {
    veer_v1_PlanRequest *r = calloc(1, sizeof *r);
    veer_diag d;
    cr_assert_eq(veer__wire_decode(veer_v1_PlanRequest_fields, r, protoc_request, sizeof protoc_request, "request",
                                   &d),
                 VEER_OK, "%s", d.message);
    veer_drive_def drive;
    veer_limits lim;
    veer_route route;
    veer_plan_options opt;
    cr_assert_eq(veer__wire_drive_from_pb(&r->drive, &drive, &d), VEER_OK, "%s", d.message);
    cr_assert_eq(veer__wire_limits_from_pb(&r->limits, 4, &lim, &d), VEER_OK, "%s", d.message);
    cr_assert_eq(veer__wire_route_from_pb(&r->route, 4, &route, &d), VEER_OK, "%s", d.message);
    cr_assert_eq(veer__wire_options_from_pb(&r->options, &opt, &d), VEER_OK, "%s", d.message);
    cr_expect_eq(drive.kind, VEER_DRIVE_MECANUM);
    cr_expect_eq(drive.module_count, 4);
    cr_expect_eq(drive.wheel_radius, 0.076);
    cr_expect_eq(drive.half_wheelbase, 0.25);
    cr_expect_eq(drive.half_track, 0.2);
    cr_expect_eq(drive.roller_angle, 0.7853981633974483);
    for (int i = 0; i < 4; i++) { /* one module entry applies to all */
        cr_expect_eq(lim.modules[i].wheel_rate, 20.0);
        cr_expect_eq(lim.modules[i].wheel_accel, 40.0);
        cr_expect(isinf(lim.modules[i].steer_rate) && isinf(lim.modules[i].steer_min) && lim.modules[i].steer_min < 0);
    }
    cr_expect_eq(lim.body_speed, 1.5);
    cr_expect_eq(lim.yaw_rate, 2.0);
    cr_expect(isinf(lim.body_accel) && isinf(lim.yaw_accel));
    cr_expect_eq(route.start_x, -3.0);
    cr_expect_eq(route.start_yaw, 0.5);
    cr_expect_eq(route.has_start_steer, 0);
    cr_assert_eq(route.leg_count, 2);
    cr_expect_eq(route.legs[0].kind, VEER_LEG_TRAVEL);
    cr_expect_eq(route.legs[0].heading, VEER_HEADING_TANGENT);
    cr_expect_eq(route.legs[0].reversed, 1);
    cr_expect_eq(route.legs[0].corner_tolerance, 0.3);
    cr_expect_eq(route.legs[0].dwell, 1.5);
    cr_expect_eq(route.legs[1].kind, VEER_LEG_SPIN);
    cr_expect_eq(route.legs[1].yaw, -1.0);
    cr_expect_eq(route.legs[1].direction, -1);
    cr_assert_eq(route.waypoint_count, 2);
    cr_expect_eq(route.waypoints[0].has_yaw, 0);
    cr_expect_eq(route.waypoints[1].has_yaw, 1);
    cr_expect_eq(route.waypoints[1].yaw, 0.25);
    cr_expect_eq(route.waypoints[1].stop, 1);
    cr_expect_eq(route.waypoints[1].dwell, 0.5);
    cr_expect_eq(opt.grid_points, 400);
    cr_expect_eq(opt.accel_polygon_sides, 16);
    cr_expect_str_eq(r->cart_id, "M7");

    /* Our canonical encoding of the same structs is byte for byte protoc's. */
    veer_v1_PlanRequest *back = calloc(1, sizeof *back);
    back->schema_version = 1;
    back->has_drive = back->has_limits = back->has_route = back->has_options = true;
    veer__wire_drive_to_pb(&drive, &back->drive);
    veer__wire_limits_to_pb(&lim, 4, &back->limits);
    veer__wire_route_to_pb(&route, 4, &back->route);
    veer__wire_options_to_pb(&opt, &back->options);
    strcpy(back->cart_id, "M7");
    uint8_t buf[512];
    size_t n = 0;
    cr_assert_eq(veer__wire_encode(veer_v1_PlanRequest_fields, back, buf, sizeof buf, &n, &d), VEER_OK);
    cr_expect_eq(n, sizeof protoc_request);
    cr_expect(memcmp(buf, protoc_request, sizeof protoc_request) == 0, "encoding differs from protoc's");
    free(r);
    free(back);
}

/* ---- round trips of each message ------------------------------------------ */

/* Encodes msg, decodes it into a fresh struct of the same type and returns it (heap). */
static void *roundtrip(const pb_msgdesc_t *fields, const void *msg, size_t size) {
    uint8_t *buf = malloc(65536);
    size_t n = 0;
    veer_diag d;
    cr_assert_eq(veer__wire_encode(fields, msg, buf, 65536, &n, &d), VEER_OK, "%s", d.message);
    void *back = calloc(1, size);
    cr_assert_eq(veer__wire_decode(fields, back, buf, n, "message", &d), VEER_OK, "%s", d.message);
    free(buf);
    return back;
}

Test(wire_roundtrip, drive_every_kind) {
    for (int kind = VEER_DRIVE_STEERED; kind <= VEER_DRIVE_DIFFERENTIAL; kind++) {
        veer_drive_def a = veer_default_drive_def((veer_drive_kind)kind), b;
        a.wheel_radius = 0.0625 + 0.01 * kind;
        if (kind == VEER_DRIVE_OMNI) a.modules[1].drive_angle = 1.25;
        if (kind == VEER_DRIVE_DIFFERENTIAL) a.skid_factor = 1.4;
        veer_v1_DriveDef m;
        veer__wire_drive_to_pb(&a, &m);
        veer_v1_DriveDef *back = roundtrip(veer_v1_DriveDef_fields, &m, sizeof m);
        veer_diag d;
        cr_assert_eq(veer__wire_drive_from_pb(back, &b, &d), VEER_OK, "%s", d.message);
        cr_expect(memcmp(&a, &b, sizeof a) == 0, "drive kind %d changed in the round trip", kind);
        free(back);
    }
}

Test(wire_roundtrip, limits_route_options_diag) {
    scenario sc = demo_scenario();
    sc.limits.modules[2].wheel_rate = 22.0; /* modules differ: one entry each */
    sc.route.has_start_steer = 1;
    for (int i = 0; i < 4; i++) sc.route.start_steer[i] = 0.1 * i - 0.2;
    sc.route.legs[1].dwell = 0.75;
    veer_v1_Limits ml;
    veer_v1_Route *mr = calloc(1, sizeof *mr);
    veer__wire_limits_to_pb(&sc.limits, 4, &ml);
    cr_expect_eq(ml.modules_count, 4);
    veer__wire_route_to_pb(&sc.route, 4, mr);
    veer_v1_Limits *bl = roundtrip(veer_v1_Limits_fields, &ml, sizeof ml);
    veer_v1_Route *br = roundtrip(veer_v1_Route_fields, mr, sizeof *mr);
    veer_limits l2;
    veer_route *r2 = calloc(1, sizeof *r2);
    veer_diag d;
    cr_assert_eq(veer__wire_limits_from_pb(bl, 4, &l2, &d), VEER_OK, "%s", d.message);
    cr_assert_eq(veer__wire_route_from_pb(br, 4, r2, &d), VEER_OK, "%s", d.message);
    cr_expect(memcmp(&l2, &sc.limits, sizeof l2) == 0, "limits changed");
    /* Fields that do not apply to a leg's kind are not carried; compare what applies. */
    cr_expect_eq(r2->leg_count, sc.route.leg_count);
    cr_expect_eq(r2->waypoint_count, sc.route.waypoint_count);
    cr_expect(memcmp(r2->waypoints, sc.route.waypoints, sizeof r2->waypoints) == 0);
    cr_expect(memcmp(r2->start_steer, sc.route.start_steer, sizeof r2->start_steer) == 0);
    cr_expect_eq(r2->legs[0].heading, VEER_HEADING_TOWARD);
    cr_expect_eq(r2->legs[0].toward_y, -40.0);
    cr_expect_eq(r2->legs[0].corner_tolerance, 0.4);
    cr_expect_eq(r2->legs[1].pivot_x, 8.5);
    cr_expect_eq(r2->legs[1].angle, -50.0 * DEG);
    cr_expect_eq(r2->legs[1].dwell, 0.75);

    veer_plan_options o = veer_default_plan_options(), o2;
    o.grid_points = 777;
    veer_v1_PlanOptions mo;
    veer__wire_options_to_pb(&o, &mo);
    veer_v1_PlanOptions *bo = roundtrip(veer_v1_PlanOptions_fields, &mo, sizeof mo);
    cr_assert_eq(veer__wire_options_from_pb(bo, &o2, &d), VEER_OK);
    cr_expect(memcmp(&o, &o2, sizeof o) == 0);

    veer_diag dg;
    veer__fail(&dg, VEER_ERR_INFEASIBLE, 1, 2, 33, 4.5, veer__limit(VEER_LIMIT_WHEEL_ACCEL, 3), "no motion fits");
    veer_v1_Diagnostic md;
    veer__wire_diag_to_pb(&dg, &md);
    veer_v1_Diagnostic *bd = roundtrip(veer_v1_Diagnostic_fields, &md, sizeof md);
    cr_expect_eq(bd->status, veer_v1_Status_STATUS_ERR_INFEASIBLE);
    cr_expect(diag_text_is(bd->message, VEER_ERR_INFEASIBLE, "no motion fits"), "%s", bd->message);
    cr_expect_eq(bd->leg, 1);
    cr_expect_eq(bd->waypoint, 2);
    cr_expect_eq(bd->grid_index, 33);
    cr_expect_eq(bd->s, 4.5);
    cr_expect_eq(bd->limit_kind, veer_v1_LimitKind_LIMIT_KIND_WHEEL_ACCEL);
    cr_expect_eq(bd->limit_module, 3);
    cr_expect_str_eq(bd->limit_name, "wheel_accel[3]");
    free(mr), free(bl), free(br), free(r2), free(bo), free(bd);
}

Test(wire_roundtrip, newer_inputs) {
    /* Modules out, traction, motor curve, jerk, timed stops, orbits, start twist, options. */
    veer_drive_def a = veer_default_drive_def(VEER_DRIVE_MECANUM), b;
    a.modules[2].out = 1;
    veer_v1_DriveDef md;
    veer__wire_drive_to_pb(&a, &md);
    cr_expect_eq(md.modules_out_count, 1);
    veer_v1_DriveDef *bd = roundtrip(veer_v1_DriveDef_fields, &md, sizeof md);
    veer_diag d;
    cr_assert_eq(veer__wire_drive_from_pb(bd, &b, &d), VEER_OK, "%s", d.message);
    cr_expect(memcmp(&a, &b, sizeof a) == 0);
    bd->modules_out[0] = 4; /* a mecanum cart has wheels 0..3 */
    cr_expect_eq(veer__wire_drive_from_pb(bd, &b, &d), VEER_ERR_VALUE);

    veer_limits l = veer_default_limits(), l2;
    for (int i = 0; i < 4; i++) {
        l.modules[i].traction_mu = 0.7;
        l.modules[i].motor_stall_accel = 60.0;
        l.modules[i].motor_free_rate = 30.0;
        l.modules[i].wheel_jerk = 400.0;
    }
    l.body_jerk = 5.0;
    veer_v1_Limits ml;
    veer__wire_limits_to_pb(&l, 4, &ml);
    cr_expect_eq(ml.modules_count, 1); /* the same for every module: written once */
    veer_v1_Limits *bl = roundtrip(veer_v1_Limits_fields, &ml, sizeof ml);
    cr_assert_eq(veer__wire_limits_from_pb(bl, 4, &l2, &d), VEER_OK, "%s", d.message);
    cr_expect(memcmp(&l, &l2, sizeof l) == 0);

    veer_route *r = calloc(1, sizeof *r), *r2 = calloc(1, sizeof *r2);
    *r = veer_default_route(1.0, 2.0, 0.5);
    r->has_start_twist = 1;
    r->start_twist[0] = 0.4, r->start_twist[1] = -0.1, r->start_twist[2] = 0.05;
    veer_leg t = veer_default_leg(VEER_LEG_TRAVEL), pv = veer_default_leg(VEER_LEG_PIVOT);
    cr_assert_eq(veer_route_add_leg(r, &t), VEER_OK);
    veer_waypoint w = veer_default_waypoint(4.0, 2.0);
    w.stop = 1, w.timed = 1, w.arrival = 12.5;
    cr_assert_eq(veer_route_add_waypoint(r, &w), VEER_OK);
    pv.pivot_x = 4.0, pv.pivot_y = 3.0, pv.angle = 1.0, pv.hold_yaw = 1;
    cr_assert_eq(veer_route_add_leg(r, &pv), VEER_OK);
    veer_v1_Route *mr = calloc(1, sizeof *mr);
    veer__wire_route_to_pb(r, 4, mr);
    veer_v1_Route *br = roundtrip(veer_v1_Route_fields, mr, sizeof *mr);
    cr_assert_eq(veer__wire_route_from_pb(br, 4, r2, &d), VEER_OK, "%s", d.message);
    cr_expect_eq(r2->has_start_twist, 1);
    cr_expect(memcmp(r2->start_twist, r->start_twist, sizeof r->start_twist) == 0);
    cr_expect_eq(r2->waypoints[0].timed, 1);
    cr_expect_eq(r2->waypoints[0].arrival, 12.5);
    cr_expect_eq(r2->legs[1].hold_yaw, 1);
    br->start_twist.wz = (double)NAN;
    cr_expect_eq(veer__wire_route_from_pb(br, 4, r2, &d), VEER_ERR_VALUE);

    veer_plan_options o = veer_default_plan_options(), o2;
    o.traction_polygon_sides = 24;
    o.duration_target = 40.0;
    veer_v1_PlanOptions mo;
    veer__wire_options_to_pb(&o, &mo);
    veer_v1_PlanOptions *bo = roundtrip(veer_v1_PlanOptions_fields, &mo, sizeof mo);
    cr_assert_eq(veer__wire_options_from_pb(bo, &o2, &d), VEER_OK);
    cr_expect(memcmp(&o, &o2, sizeof o) == 0);
    bo->duration_target = -1.0;
    cr_expect_eq(veer__wire_options_from_pb(bo, &o2, &d), VEER_ERR_VALUE);
    free(bd), free(bl), free(r), free(r2), free(mr), free(br), free(bo);
}

Test(wire_roundtrip, status_and_enum_numbers_mirror_the_c_tables) {
    /* proto Status = veer_status + 1 with the same names; the other enums share numbers. */
    cr_expect_eq(veer__wire_status_to_pb(VEER_OK), veer_v1_Status_STATUS_OK);
    cr_expect_eq(veer__wire_status_to_pb(VEER_ERR_STATE), veer_v1_Status_STATUS_ERR_STATE);
    cr_expect_eq(veer__wire_status_to_pb(VEER_ERR_DECODE), veer_v1_Status_STATUS_ERR_DECODE);
    cr_expect_eq((int)veer_v1_LimitKind_LIMIT_KIND_PATH_END, VEER_LIMIT_PATH_END);
    cr_expect_eq((int)veer_v1_DriveKind_DRIVE_KIND_DIFFERENTIAL, VEER_DRIVE_DIFFERENTIAL);
    cr_expect_eq((int)veer_v1_Heading_HEADING_BLEND, VEER_HEADING_BLEND);
    cr_expect_eq((int)veer_v1_Phase_PHASE_DONE, VEER_PHASE_DONE);
    cr_expect_eq(veer_wire_schema_version(), 1u);
}

/* ---- value checks ----------------------------------------------------------- */

/* Every optional limit of the Limits message is read into its own field and
 * named in the diagnostic when NaN (message texts as the decoder has always
 * written them); an empty message gives veer_default_limits(). */
Test(wire_values, every_limit_field_is_read_and_named) {
    static const char *const module_names[] = {"wheel_rate",  "wheel_accel",       "steer_rate",
                                               "steer_min",   "steer_max",         "traction_mu",
                                               "motor_stall_accel", "motor_free_rate", "wheel_jerk"};
    static const char *const body_names[] = {"body_speed", "body_accel", "yaw_rate", "yaw_accel", "body_jerk"};
    veer_diag d;
    veer_limits lim, def = veer_default_limits();
    veer_v1_Limits ml;
    memset(&ml, 0, sizeof ml);
    cr_assert_eq(veer__wire_limits_from_pb(&ml, 4, &lim, &d), VEER_OK);
    cr_expect(memcmp(&lim, &def, sizeof lim) == 0, "an empty Limits message is the default limits");
    for (int k = 0; k < 9; k++) {
        memset(&ml, 0, sizeof ml);
        ml.modules_count = 4;
        veer_v1_ModuleLimits *m = &ml.modules[2];
        bool *has[] = {&m->has_wheel_rate, &m->has_wheel_accel, &m->has_steer_rate, &m->has_steer_min,
                       &m->has_steer_max, &m->has_traction_mu, &m->has_motor_stall_accel, &m->has_motor_free_rate,
                       &m->has_wheel_jerk};
        double *val[] = {&m->wheel_rate, &m->wheel_accel, &m->steer_rate, &m->steer_min, &m->steer_max,
                         &m->traction_mu, &m->motor_stall_accel, &m->motor_free_rate, &m->wheel_jerk};
        double *out[] = {&lim.modules[2].wheel_rate, &lim.modules[2].wheel_accel, &lim.modules[2].steer_rate,
                         &lim.modules[2].steer_min, &lim.modules[2].steer_max, &lim.modules[2].traction_mu,
                         &lim.modules[2].motor_stall_accel, &lim.modules[2].motor_free_rate,
                         &lim.modules[2].wheel_jerk};
        *has[k] = true;
        *val[k] = 0.5 + k; /* a value of its own reaches its own field */
        if (k == 3) *val[k] = -2.0; /* steer_min below the unset steer_max */
        cr_assert_eq(veer__wire_limits_from_pb(&ml, 4, &lim, &d), VEER_OK, "%s: %s", module_names[k], d.message);
        cr_expect_eq(*out[k], *val[k], "%s", module_names[k]);
        *val[k] = (double)NAN;
        cr_assert_eq(veer__wire_limits_from_pb(&ml, 4, &lim, &d), VEER_ERR_VALUE);
        char want[64];
        snprintf(want, sizeof want, "limits.modules[2].%s is nan", module_names[k]);
        cr_expect(diag_is(&d, want), "%s", d.message);
    }
    for (int k = 0; k < 5; k++) {
        memset(&ml, 0, sizeof ml);
        bool *has[] = {&ml.has_body_speed, &ml.has_body_accel, &ml.has_yaw_rate, &ml.has_yaw_accel, &ml.has_body_jerk};
        double *val[] = {&ml.body_speed, &ml.body_accel, &ml.yaw_rate, &ml.yaw_accel, &ml.body_jerk};
        double *out[] = {&lim.body_speed, &lim.body_accel, &lim.yaw_rate, &lim.yaw_accel, &lim.body_jerk};
        *has[k] = true;
        *val[k] = 1.5 + k;
        cr_assert_eq(veer__wire_limits_from_pb(&ml, 4, &lim, &d), VEER_OK, "%s: %s", body_names[k], d.message);
        cr_expect_eq(*out[k], *val[k], "%s", body_names[k]);
        *val[k] = -(double)INFINITY;
        cr_assert_eq(veer__wire_limits_from_pb(&ml, 4, &lim, &d), VEER_ERR_VALUE);
        char want[64];
        snprintf(want, sizeof want, "limits.%s is -inf", body_names[k]);
        cr_expect(diag_is(&d, want), "%s", d.message);
    }
    /* The steer range the wrong way round names the module. */
    memset(&ml, 0, sizeof ml);
    ml.modules_count = 4;
    ml.modules[1].has_steer_min = ml.modules[1].has_steer_max = true;
    ml.modules[1].steer_min = 1.0;
    ml.modules[1].steer_max = -1.0;
    cr_assert_eq(veer__wire_limits_from_pb(&ml, 4, &lim, &d), VEER_ERR_VALUE);
    cr_expect(diag_is(&d, "limits.modules[1]: steer_min 1 is above steer_max -1"), "%s", d.message);
}

/* A drive's non-finite module position or geometry is named in the message. */
Test(wire_values, drive_fields_are_named) {
    veer_diag d;
    veer_drive_def drive;
    veer_v1_DriveDef md;
    memset(&md, 0, sizeof md);
    md.kind = veer_v1_DriveKind_DRIVE_KIND_OMNI;
    md.modules_count = 3;
    for (int i = 0; i < 3; i++) md.modules[i].x = 0.1 * i, md.modules[i].y = 0.2, md.modules[i].drive_angle = 1.0;
    cr_assert_eq(veer__wire_drive_from_pb(&md, &drive, &d), VEER_OK, "%s", d.message);
    cr_expect_eq(drive.modules[2].x, 0.1 * 2);
    cr_expect_eq(drive.modules[1].drive_angle, 1.0);
    md.modules[1].drive_angle = (double)NAN;
    cr_assert_eq(veer__wire_drive_from_pb(&md, &drive, &d), VEER_ERR_VALUE);
    cr_expect(diag_is(&d, "drive.modules[1].drive_angle is not finite (nan)"), "%s", d.message);
    md.modules[1].drive_angle = 1.0;
    md.modules[2].y = (double)INFINITY;
    cr_assert_eq(veer__wire_drive_from_pb(&md, &drive, &d), VEER_ERR_VALUE);
    cr_expect(diag_is(&d, "drive.modules[2].y is not finite (inf)"), "%s", d.message);
    md.modules[2].y = 0.2;
    md.has_wheel_radius = true;
    md.wheel_radius = -(double)INFINITY;
    cr_assert_eq(veer__wire_drive_from_pb(&md, &drive, &d), VEER_ERR_VALUE);
    cr_expect(diag_is(&d, "drive.wheel_radius is not finite (-inf)"), "%s", d.message);
}

Test(wire_values, bad_values_are_named) {
    veer_diag d;
    veer_drive_def drive;
    veer_v1_DriveDef md = {0};
    md.kind = (veer_v1_DriveKind)9;
    cr_expect_eq(veer__wire_drive_from_pb(&md, &drive, &d), VEER_ERR_VALUE);
    cr_expect(diag_says(&d, "drive.kind"), "%s", d.message);
    md.kind = veer_v1_DriveKind_DRIVE_KIND_MECANUM;
    md.modules_count = 1;
    cr_expect_eq(veer__wire_drive_from_pb(&md, &drive, &d), VEER_ERR_VALUE);
    md.modules_count = 0;
    md.has_track_width = true;
    cr_expect_eq(veer__wire_drive_from_pb(&md, &drive, &d), VEER_ERR_VALUE);
    cr_expect(diag_says(&d, "track_width"), "%s", d.message);
    md.has_track_width = false;
    md.has_wheel_radius = true;
    md.wheel_radius = (double)NAN;
    cr_expect_eq(veer__wire_drive_from_pb(&md, &drive, &d), VEER_ERR_VALUE);

    veer_v1_Limits ml = {0};
    veer_limits lim;
    ml.modules_count = 3; /* neither 1 nor the 4 modules */
    cr_expect_eq(veer__wire_limits_from_pb(&ml, 4, &lim, &d), VEER_ERR_VALUE);
    ml.modules_count = 1;
    ml.modules[0].has_steer_min = ml.modules[0].has_steer_max = true;
    ml.modules[0].steer_min = 1.0;
    ml.modules[0].steer_max = -1.0;
    cr_expect_eq(veer__wire_limits_from_pb(&ml, 4, &lim, &d), VEER_ERR_VALUE);
    ml.modules_count = 0;
    ml.has_body_speed = true;
    ml.body_speed = -(double)INFINITY;
    cr_expect_eq(veer__wire_limits_from_pb(&ml, 4, &lim, &d), VEER_ERR_VALUE);
    ml.body_speed = (double)INFINITY; /* + infinity is the same as unset */
    cr_expect_eq(veer__wire_limits_from_pb(&ml, 4, &lim, &d), VEER_OK);

    veer_v1_Route *mr = calloc(1, sizeof *mr);
    veer_route *route = calloc(1, sizeof *route);
    cr_expect_eq(veer__wire_route_from_pb(mr, 4, route, &d), VEER_ERR_VALUE); /* no legs */
    mr->legs_count = 1;
    mr->legs[0].kind = (veer_v1_LegKind)7;
    cr_expect_eq(veer__wire_route_from_pb(mr, 4, route, &d), VEER_ERR_VALUE);
    cr_expect_eq(d.leg, 0);
    mr->legs[0].kind = veer_v1_LegKind_LEG_KIND_TRAVEL;
    mr->legs[0].waypoint_count = 2;
    mr->waypoints_count = 1; /* the leg takes more than there are */
    cr_expect_eq(veer__wire_route_from_pb(mr, 4, route, &d), VEER_ERR_VALUE);
    mr->waypoints_count = 3; /* one left over */
    cr_expect_eq(veer__wire_route_from_pb(mr, 4, route, &d), VEER_ERR_VALUE);
    mr->waypoints_count = 2;
    mr->waypoints[1].y = (double)NAN;
    cr_expect_eq(veer__wire_route_from_pb(mr, 4, route, &d), VEER_ERR_VALUE);
    cr_expect_eq(d.waypoint, 1);
    mr->waypoints[1].y = 1.0;
    mr->legs[0].heading = (veer_v1_Heading)12;
    cr_expect_eq(veer__wire_route_from_pb(mr, 4, route, &d), VEER_ERR_VALUE);
    mr->legs[0].heading = veer_v1_Heading_HEADING_UNSPECIFIED; /* means hold */
    mr->start_steer_count = 2; /* 4 modules */
    cr_expect_eq(veer__wire_route_from_pb(mr, 4, route, &d), VEER_ERR_VALUE);
    mr->start_steer_count = 0;
    cr_expect_eq(veer__wire_route_from_pb(mr, 4, route, &d), VEER_OK, "%s", d.message);
    cr_expect_eq(route->legs[0].heading, VEER_HEADING_HOLD);
    cr_expect(!veer__wire_utf8_ok("\xc0\xaf"));       /* overlong '/' (RFC 3629 forbids) */
    cr_expect(!veer__wire_utf8_ok("\xed\xa0\x80"));   /* a surrogate */
    cr_expect(veer__wire_utf8_ok("K4 \xc3\xa9t\xc3\xa9")); /* "K4 été" */
    free(mr);
    free(route);
}

/* ---- the demo plan over the wire ------------------------------------------- */

typedef struct {
    scenario sc;
    veer_plan *plan;   /* planned in memory */
    uint8_t *request;
    size_t request_size;
    uint8_t *reply;
    size_t reply_size;
    uint8_t plan_bytes[VEER_WIRE_MAX_PROFILE_BYTES + 8192];
    size_t plan_size;
} wire_demo;

static void demo_over_wire(wire_demo *w, scenario sc, int grid_points) {
    memset(w, 0, sizeof *w);
    w->sc = sc;
    veer_diag d;
    veer_plan_options opt = veer_default_plan_options();
    if (grid_points > 0) opt.grid_points = grid_points;
    cr_assert_eq(veer_plan_create(&sc.drive, &sc.limits, &sc.route, &opt, &w->plan, &d), VEER_OK, "%s", d.message);
    w->request = request_bytes(&sc, grid_points, "K4", &w->request_size);
    veer_status st;
    w->reply = run_request(w->request, w->request_size, &w->reply_size, &st);
    cr_assert_eq(st, VEER_OK);
    veer_v1_PlanReply *rep = calloc(1, sizeof *rep);
    cr_assert_eq(veer__wire_decode(veer_v1_PlanReply_fields, rep, w->reply, w->reply_size, "reply", &d), VEER_OK,
                 "%s", d.message);
    cr_assert_eq(rep->status, veer_v1_Status_STATUS_OK);
    cr_assert(rep->has_plan);
    cr_assert_eq(veer__wire_encode(veer_v1_Plan_fields, &rep->plan, w->plan_bytes, sizeof w->plan_bytes,
                                   &w->plan_size, &d),
                 VEER_OK);
    free(rep);
}

static void demo_free(wire_demo *w) {
    veer_plan_destroy(w->plan);
    free(w->request);
    free(w->reply);
}

/* Largest |value| / limit in one sample, by limit kind. */
static void ratios(const veer_sample *o, const veer_limits *l, double r[16]) {
    for (int i = 0; i < o->module_count; i++) {
        r[VEER_LIMIT_WHEEL_SPEED] = fmax(r[VEER_LIMIT_WHEEL_SPEED], fabs(o->modules[i].wheel_rate) / l->modules[i].wheel_rate);
        r[VEER_LIMIT_WHEEL_ACCEL] = fmax(r[VEER_LIMIT_WHEEL_ACCEL], fabs(o->modules[i].wheel_accel) / l->modules[i].wheel_accel);
        r[VEER_LIMIT_STEER_RATE] = fmax(r[VEER_LIMIT_STEER_RATE], fabs(o->modules[i].steer_rate) / l->modules[i].steer_rate);
    }
    r[VEER_LIMIT_BODY_SPEED] = fmax(r[VEER_LIMIT_BODY_SPEED], hypot(o->twist_world[0], o->twist_world[1]) / l->body_speed);
    r[VEER_LIMIT_BODY_ACCEL] = fmax(r[VEER_LIMIT_BODY_ACCEL], hypot(o->accel_world[0], o->accel_world[1]) / l->body_accel);
    r[VEER_LIMIT_YAW_RATE] = fmax(r[VEER_LIMIT_YAW_RATE], fabs(o->twist_world[2]) / l->yaw_rate);
    r[VEER_LIMIT_YAW_ACCEL] = fmax(r[VEER_LIMIT_YAW_ACCEL], fabs(o->accel_world[2]) / l->yaw_accel);
}

/* The issue-3 targets, checked by sampling every millisecond: pose within
 * 1 mm and 0.1 degree of the plan in memory, steer within 0.1 degree, and
 * every setpoint within 0.5 % of its limit beyond what the plan in memory
 * itself reaches (its own grid discretization). Returns the figures. */
static veer_wire_figures check_against(const veer_plan *orig, const veer_plan *dec, const veer_limits *l) {
    veer_wire_figures f = {0};
    double ra[16] = {0}, rb[16] = {0};
    double T = fmax(veer_plan_duration(orig), veer_plan_duration(dec));
    for (double t = 0.0; t <= T + 5e-4; t += 1e-3) {
        veer_sample a, b;
        cr_assert_eq(veer_plan_sample(orig, t, &a), VEER_OK);
        cr_assert_eq(veer_plan_sample(dec, t, &b), VEER_OK);
        f.position = fmax(f.position, hypot(a.pose[0] - b.pose[0], a.pose[1] - b.pose[1]));
        f.angle = fmax(f.angle, fabs(a.pose[2] - b.pose[2]));
        for (int i = 0; i < a.module_count; i++) f.angle = fmax(f.angle, fabs(a.modules[i].steer - b.modules[i].steer));
        ratios(&a, l, ra);
        ratios(&b, l, rb);
    }
    for (int k = 0; k < 16; k++) {
        f.ratio_a = fmax(f.ratio_a, ra[k]);
        f.ratio_b = fmax(f.ratio_b, rb[k]);
        f.limit_excess = fmax(f.limit_excess, rb[k] - fmax(1.0, ra[k]));
    }
    cr_expect_leq(f.position, 1e-3, "pose off by %.3g m", f.position);
    cr_expect_leq(f.angle, 0.1 * DEG, "angle off by %.3g deg", f.angle / DEG);
    cr_expect_leq(f.limit_excess, 0.005, "a setpoint goes %.3g %% of its limit further", 100.0 * f.limit_excess);
    f.duration = fabs(veer_plan_duration(orig) - veer_plan_duration(dec));
    return f;
}

Test(wire_plan, demo_sizes_and_agreement, .timeout = 120) {
    wire_demo *w = malloc(sizeof *w);
    demo_over_wire(w, demo_scenario(), 0);
    veer_plan *dec = NULL;
    veer_diag d;
    cr_assert_eq(veer_plan_decode_pb(w->plan_bytes, w->plan_size, &dec, &d), VEER_OK, "%s", d.message);
    veer_wire_figures f = check_against(w->plan, dec, &w->sc.limits);
    size_t table = 0;
    cr_assert_eq(veer_plan_table_pb(w->plan_bytes, w->plan_size, 50.0, NULL, 0, &table), VEER_ERR_BUFFER);
    /* Issue 3: the demo plan in at most 1 KiB, at least 20 times smaller than its 50 Hz table. */
    cr_expect_leq(w->plan_size, 1024u);
    cr_expect_geq((double)table / (double)w->plan_size, 20.0);
    printf("wire demo: plan %zu bytes (decoded grid %d points, planner grid %d), 50 Hz table %zu bytes (%.0fx), reply %zu "
           "bytes; pose %.3f mm, angle %.4f deg, limit ratio %.4f (in memory %.4f), duration %.4f s vs %.4f s\n",
           w->plan_size, veer_plan_grid_count(dec), veer_plan_grid_count(w->plan), table,
           (double)table / (double)w->plan_size, w->reply_size, 1e3 * f.position, f.angle / DEG, f.ratio_b, f.ratio_a,
           veer_plan_duration(dec), veer_plan_duration(w->plan));
    /* The cart's path: veer_plan_sample_pb gives exactly what the decoded plan gives. */
    for (double t = 0.0; t < veer_plan_duration(dec); t += 0.731) {
        veer_sample a, b;
        cr_assert_eq(veer_plan_sample(dec, t, &a), VEER_OK);
        cr_assert_eq(veer_plan_sample_pb(w->plan_bytes, w->plan_size, t, &b), VEER_OK);
        cr_expect(memcmp(&a, &b, sizeof a) == 0, "sample_pb differs at t = %g", t);
    }
    /* A decoded plan encodes again, and that plan keeps to the same tolerances against it. */
    uint8_t *again = malloc(sizeof w->plan_bytes);
    size_t n2 = 0;
    cr_assert_eq(veer_plan_encode_pb(dec, again, sizeof w->plan_bytes, &n2, &d), VEER_OK, "%s", d.message);
    cr_expect_leq(n2, w->plan_size + 16);
    veer_plan *dec2 = NULL;
    cr_assert_eq(veer_plan_decode_pb(again, n2, &dec2, &d), VEER_OK, "%s", d.message);
    check_against(dec, dec2, &w->sc.limits);
    veer_plan_destroy(dec2);
    free(again);
    veer_plan_destroy(dec);
    demo_free(w);
    free(w);
}

Test(wire_plan, mecanum_and_fine_grid_agree, .timeout = 120) {
    wire_demo *w = malloc(sizeof *w);
    demo_over_wire(w, mecanum_scenario(), 0);
    veer_plan *dec = NULL;
    veer_diag d;
    cr_assert_eq(veer_plan_decode_pb(w->plan_bytes, w->plan_size, &dec, &d), VEER_OK, "%s", d.message);
    check_against(w->plan, dec, &w->sc.limits);
    veer_plan_destroy(dec);
    demo_free(w);
    demo_over_wire(w, demo_scenario(), 4000);
    cr_assert_eq(veer_plan_decode_pb(w->plan_bytes, w->plan_size, &dec, &d), VEER_OK, "%s", d.message);
    veer_wire_figures f = check_against(w->plan, dec, &w->sc.limits);
    printf("wire demo at 4000 grid points: plan %zu bytes, decoded grid %d points, pose %.3f mm\n", w->plan_size,
           veer_plan_grid_count(dec), 1e3 * f.position);
    veer_plan_destroy(dec);
    demo_free(w);
    free(w);
}

/* A plan made on the move (start twist) and one slowed to meet a timed stop
 * keep to the same tolerances over the wire. */
Test(wire_plan, on_the_move_and_timed_stop, .timeout = 120) {
    scenario sc = mecanum_scenario();
    sc.route.has_start_twist = 1;
    sc.route.start_twist[0] = 0.6; /* moving forward at 0.6 m/s along the first leg */
    sc.route.waypoint_count = 0;
    sc.route.leg_count = 0;
    veer_leg l = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&sc.route, &l), VEER_OK);
    veer_waypoint a = veer_default_waypoint(3.0, 1.5);
    a.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&sc.route, &a), VEER_OK);
    wire_demo *w = malloc(sizeof *w);
    demo_over_wire(w, sc, 0);
    veer_plan *dec = NULL;
    veer_diag d;
    cr_assert_eq(veer_plan_decode_pb(w->plan_bytes, w->plan_size, &dec, &d), VEER_OK, "%s", d.message);
    veer_sample s0;
    cr_assert_eq(veer_plan_sample(dec, 0.0, &s0), VEER_OK);
    cr_expect(fabs(s0.twist_body[0] - 0.6) < 1e-3, "the decoded plan starts at %g m/s", s0.twist_body[0]);
    check_against(w->plan, dec, &w->sc.limits);
    double fastest = veer_plan_duration(w->plan);
    veer_plan_destroy(dec);
    demo_free(w);

    sc = mecanum_scenario();
    sc.route.waypoints[1].timed = 1;
    /* the first leg's fastest arrival is before the plan's end; ask for it 2 s later than the whole fastest plan */
    sc.route.waypoints[1].arrival = fastest + 2.0;
    demo_over_wire(w, sc, 0);
    cr_assert_eq(veer_plan_decode_pb(w->plan_bytes, w->plan_size, &dec, &d), VEER_OK, "%s", d.message);
    check_against(w->plan, dec, &w->sc.limits);
    veer_plan_destroy(dec);
    demo_free(w);
    free(w);
}

/* A jerk-limited plan (segment laws averaged over a window) keeps the tolerances over the wire. */
Test(wire_plan, jerk_limited, .timeout = 120) {
    scenario sc = mecanum_scenario();
    sc.limits.body_jerk = 4.0; /* m/s^3 */
    sc.limits.body_accel = 1.0;
    wire_demo *w = malloc(sizeof *w);
    demo_over_wire(w, sc, 0);
    veer_plan *dec = NULL;
    veer_diag d;
    cr_assert_eq(veer_plan_decode_pb(w->plan_bytes, w->plan_size, &dec, &d), VEER_OK, "%s", d.message);
    veer_v1_Plan *m = calloc(1, sizeof *m);
    cr_assert_eq(veer__wire_decode(veer_v1_Plan_fields, m, w->plan_bytes, w->plan_size, "plan", &d), VEER_OK);
    cr_expect_gt(m->profile.jerk_window_count, 0, "the plan carries no jerk window");
    check_against(w->plan, dec, &w->sc.limits);
    free(m);
    veer_plan_destroy(dec);
    demo_free(w);
    free(w);
}

/* A jerk-limited plan made on the move: its first stretch is shaped too
 * (read half its window ahead, which the cart derives from start_sdot and
 * the window), and the decoded plan starts at the cart's speed with no
 * acceleration and keeps the tolerances. */
Test(wire_plan, jerk_limited_on_the_move, .timeout = 120) {
    scenario sc = mecanum_scenario();
    sc.limits.body_jerk = 4.0; /* m/s^3 */
    sc.limits.body_accel = 1.0;
    sc.route.has_start_twist = 1;
    sc.route.start_twist[0] = 0.6;
    sc.route.waypoint_count = 0;
    sc.route.leg_count = 0;
    veer_leg l = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&sc.route, &l), VEER_OK);
    veer_waypoint a = veer_default_waypoint(3.0, 1.5);
    a.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&sc.route, &a), VEER_OK);
    wire_demo *w = malloc(sizeof *w);
    demo_over_wire(w, sc, 0);
    veer_plan *dec = NULL;
    veer_diag d;
    cr_assert_eq(veer_plan_decode_pb(w->plan_bytes, w->plan_size, &dec, &d), VEER_OK, "%s", d.message);
    veer_v1_Plan *m = calloc(1, sizeof *m);
    cr_assert_eq(veer__wire_decode(veer_v1_Plan_fields, m, w->plan_bytes, w->plan_size, "plan", &d), VEER_OK);
    cr_assert_gt(m->profile.jerk_window_count, 0, "the plan carries no jerk window");
    cr_expect_gt(m->profile.jerk_window[0], 0.0, "the moving start's stretch has no window");
    veer_sample s0;
    cr_assert_eq(veer_plan_sample(dec, 0.0, &s0), VEER_OK);
    cr_expect(fabs(s0.twist_body[0] - 0.6) < 1e-3, "the decoded plan starts at %g m/s", s0.twist_body[0]);
    cr_expect(hypot(s0.accel_world[0], s0.accel_world[1]) < 1e-2, "the decoded plan starts with %g m/s^2",
              hypot(s0.accel_world[0], s0.accel_world[1]));
    /* the knots' sdot is quantized (Profile.sdot_step), so the decoded hold may differ from v0 a little */
    cr_expect(hypot(s0.pose[0] - sc.route.start_x, s0.pose[1] - sc.route.start_y) < 1e-6, "starts at (%.9f, %.9f)",
              s0.pose[0], s0.pose[1]);
    veer_wire_figures f = check_against(w->plan, dec, &w->sc.limits);
    cr_expect_leq(f.duration, 5e-3, "durations differ by %.4f s", f.duration);
    /* the law itself, every millisecond: the cart reads the window as the planner does */
    double dv = 0.0, du = 0.0;
    for (double t = 0.0; t < veer_plan_duration(w->plan); t += 1e-3) {
        veer_sample pa, pb;
        cr_assert_eq(veer_plan_sample(w->plan, t, &pa), VEER_OK);
        cr_assert_eq(veer_plan_sample(dec, t, &pb), VEER_OK);
        dv = fmax(dv, fabs(pa.sdot - pb.sdot));
        du = fmax(du, fabs(pa.sddot - pb.sddot));
    }
    printf("jerk-limited plan on the move over the wire: pose %.3f mm, sdot %.2g, sddot %.2g, duration %.2g s\n",
           1e3 * f.position, dv, du, f.duration);
    cr_expect_leq(dv, 5e-3, "sdot differs by %g", dv);
    cr_expect_leq(du, 0.05, "sddot differs by %g", du);
    free(m);
    veer_plan_destroy(dec);
    demo_free(w);
    free(w);
}

/* Reply contents: legs, per grid point s, sdot and binding limit, as in memory. */
Test(wire_plan, reply_carries_grid_and_legs) {
    wire_demo *w = malloc(sizeof *w);
    demo_over_wire(w, demo_scenario(), 0);
    int n = veer_plan_grid_count(w->plan);
    veer_v1_PlanReply *rep = calloc(1, sizeof *rep);
    column cs = new_column((size_t)n, 0), cv = new_column((size_t)n, 0), ck = new_column((size_t)n, 1),
           cm = new_column((size_t)n, 2);
    rep->grid_s.funcs.decode = rep->grid_sdot.funcs.decode = read_column;
    rep->binding_kind.funcs.decode = rep->binding_module.funcs.decode = read_column;
    rep->grid_s.arg = &cs, rep->grid_sdot.arg = &cv, rep->binding_kind.arg = &ck, rep->binding_module.arg = &cm;
    pb_istream_t in = pb_istream_from_buffer(w->reply, w->reply_size);
    cr_assert(pb_decode(&in, veer_v1_PlanReply_fields, rep), "%s", PB_GET_ERROR(&in));
    cr_expect_eq(rep->schema_version, 1u);
    cr_expect_eq(rep->library_version, (uint32_t)veer_version());
    cr_expect_str_eq(rep->plan.cart_id, "K4");
    cr_expect_eq(rep->plan.content_hash.size, 32);
    cr_assert_eq(cs.n, (size_t)n);
    cr_assert_eq(cv.n, (size_t)n);
    cr_assert_eq(ck.n, (size_t)n);
    cr_assert_eq(cm.n, (size_t)n);
    for (int k = 0; k < n; k++) {
        double s, sdot;
        veer_limit_id id;
        cr_assert_eq(veer_plan_grid(w->plan, k, &s, &sdot, &id), VEER_OK);
        cr_expect_eq(cs.v[k], s);
        cr_expect_eq(cv.v[k], sdot);
        cr_expect_eq(ck.iv[k], id.kind);
        cr_expect_eq(cm.iv[k], id.kind == VEER_LIMIT_NONE ? -1 : id.module);
    }
    cr_assert_eq((int)rep->legs_count, veer_plan_leg_count(w->plan));
    for (int l = 0; l < (int)rep->legs_count; l++) {
        veer_leg_summary ls;
        cr_assert_eq(veer_plan_leg(w->plan, l, &ls), VEER_OK);
        cr_expect_eq(rep->legs[l].duration, ls.duration);
        cr_expect_eq(rep->legs[l].start, ls.start);
        cr_expect_eq(rep->legs[l].s_end, ls.s_end);
    }
    /* The reply's duration is the planner's (as its legs and grid); the
     * plan it carries states the compact profile's, within 1e-4 of it (0.3
     * ms on the demo's 14.4 s: the profile's quantization). */
    cr_expect_eq(rep->duration, veer_plan_duration(w->plan));
    cr_expect(fabs(rep->plan.duration - rep->duration) < 1e-4 * rep->duration, "%.9f vs %.9f", rep->plan.duration,
              rep->duration);
    free_column(&cs), free_column(&cv), free_column(&ck), free_column(&cm);
    free(rep);
    demo_free(w);
    free(w);
}

/* The setpoint table decodes to veer_plan_table's rows of the decoded plan. */
typedef struct {
    column c[4];
} module_cols;

static bool read_module(pb_istream_t *in, const pb_field_t *field, void **arg) {
    (void)field;
    module_cols **next = *arg;
    veer_v1_ModuleColumns mc = {0};
    mc.steer.funcs.decode = mc.steer_rate.funcs.decode = read_column;
    mc.wheel_rate.funcs.decode = mc.wheel_accel.funcs.decode = read_column;
    mc.steer.arg = &(*next)->c[0], mc.steer_rate.arg = &(*next)->c[1];
    mc.wheel_rate.arg = &(*next)->c[2], mc.wheel_accel.arg = &(*next)->c[3];
    (*next)++;
    return pb_decode(in, veer_v1_ModuleColumns_fields, &mc);
}

Test(wire_plan, setpoint_table_matches_the_plan_table) {
    wire_demo *w = malloc(sizeof *w);
    demo_over_wire(w, demo_scenario(), 0);
    size_t need = 0;
    cr_assert_eq(veer_plan_table_pb(w->plan_bytes, w->plan_size, 50.0, NULL, 0, &need), VEER_ERR_BUFFER);
    uint8_t *buf = malloc(need + 16);
    memset(buf, 0xA5, need + 16);
    size_t got = 0;
    cr_assert_eq(veer_plan_table_pb(w->plan_bytes, w->plan_size, 50.0, buf, need - 1, &got), VEER_ERR_BUFFER);
    cr_expect_eq(got, need);
    for (size_t i = 0; i < need + 16; i++) cr_assert_eq(buf[i], 0xA5, "byte %zu written on a too-small buffer", i);
    cr_assert_eq(veer_plan_table_pb(w->plan_bytes, w->plan_size, 50.0, buf, need, &got), VEER_OK);
    cr_expect_eq(got, need);
    cr_expect_eq(buf[need], 0xA5, "wrote past the table");

    veer_plan *dec = NULL;
    veer_diag d;
    cr_assert_eq(veer_plan_decode_pb(w->plan_bytes, w->plan_size, &dec, &d), VEER_OK, "%s", d.message);
    size_t rows = 0;
    cr_assert_eq(veer_plan_table(dec, 50.0, NULL, 0, &rows), VEER_ERR_BUFFER);
    veer_sample *ref = malloc(rows * sizeof *ref);
    cr_assert_eq(veer_plan_table(dec, 50.0, ref, rows, &rows), VEER_OK);

    veer_v1_SetpointTable *tb = calloc(1, sizeof *tb);
    column col[9];
    for (int c = 0; c < 9; c++) col[c] = new_column(rows, c < 7 ? 0 : 1);
    pb_callback_t *cb[9] = {&tb->t, &tb->x, &tb->y, &tb->yaw, &tb->vx, &tb->vy, &tb->wz, &tb->phase, &tb->leg};
    for (int c = 0; c < 9; c++) cb[c]->funcs.decode = read_column, cb[c]->arg = &col[c];
    module_cols mods[VEER_MAX_MODULES + 1], *next = mods;
    for (int i = 0; i <= VEER_MAX_MODULES; i++)
        for (int c = 0; c < 4; c++) mods[i].c[c] = new_column(rows, 0);
    tb->modules.funcs.decode = read_module;
    tb->modules.arg = &next;
    pb_istream_t in = pb_istream_from_buffer(buf, got);
    cr_assert(pb_decode(&in, veer_v1_SetpointTable_fields, tb), "%s", PB_GET_ERROR(&in));
    cr_expect_eq(tb->schema_version, 1u);
    cr_expect_eq(tb->rate_hz, 50.0);
    cr_expect_eq(tb->row_count, (uint32_t)rows);
    cr_expect_eq(tb->plan_hash.size, 32);
    cr_assert_eq(next - mods, 4);
    for (int c = 0; c < 9; c++) cr_assert_eq(col[c].n, rows, "column %d", c);
    for (size_t r = 0; r < rows; r++) {
        const veer_sample *o = &ref[r];
        const double v[7] = {o->t, o->pose[0], o->pose[1], o->pose[2], o->twist_body[0], o->twist_body[1],
                             o->twist_body[2]};
        for (int c = 0; c < 7; c++) cr_assert_eq(col[c].v[r], v[c], "row %zu column %d", r, c);
        cr_assert_eq(col[7].iv[r], o->phase);
        cr_assert_eq(col[8].iv[r], o->leg);
        for (int i = 0; i < 4; i++) {
            cr_assert_eq(mods[i].c[0].v[r], o->modules[i].steer);
            cr_assert_eq(mods[i].c[1].v[r], o->modules[i].steer_rate);
            cr_assert_eq(mods[i].c[2].v[r], o->modules[i].wheel_rate);
            cr_assert_eq(mods[i].c[3].v[r], o->modules[i].wheel_accel);
        }
    }
    cr_expect_eq(veer_plan_table_pb(w->plan_bytes, w->plan_size, (double)NAN, buf, need, &got), VEER_ERR_VALUE);
    cr_expect_eq(veer_plan_table_pb(w->plan_bytes, w->plan_size, -5.0, buf, need, &got), VEER_ERR_VALUE);
    for (int c = 0; c < 9; c++) free_column(&col[c]);
    for (int i = 0; i <= VEER_MAX_MODULES; i++)
        for (int c = 0; c < 4; c++) free_column(&mods[i].c[c]);
    free(tb);
    free(ref);
    free(buf);
    veer_plan_destroy(dec);
    demo_free(w);
    free(w);
}

/* ---- buffers, workspaces, allocation --------------------------------------- */

Test(wire_buffers, too_small_gives_the_size_and_writes_nothing) {
    wire_demo *w = malloc(sizeof *w);
    demo_over_wire(w, demo_scenario(), 0);
    uint8_t *buf = malloc(w->reply_size + 64);
    memset(buf, 0x5A, w->reply_size + 64);
    size_t got = 0;
    cr_assert_eq(veer_plan_request_pb(w->request, w->request_size, buf, w->reply_size - 1, &got), VEER_ERR_BUFFER);
    cr_expect_eq(got, w->reply_size);
    for (size_t i = 0; i < w->reply_size + 64; i++) cr_assert_eq(buf[i], 0x5A, "reply byte %zu written", i);
    cr_assert_eq(veer_plan_request_pb(w->request, w->request_size, NULL, 0, &got), VEER_ERR_BUFFER);
    cr_expect_eq(got, w->reply_size);
    cr_assert_eq(veer_plan_request_pb(w->request, w->request_size, buf, w->reply_size, &got), VEER_OK);
    cr_expect(memcmp(buf, w->reply, w->reply_size) == 0, "the same request gave a different reply");
    cr_expect_eq(veer_plan_request_pb(w->request, w->request_size, buf, w->reply_size, NULL), VEER_ERR_NULL);
    cr_expect_leq(w->reply_size, veer_plan_reply_size_bound(veer_plan_grid_count(w->plan)));

    memset(buf, 0x5A, w->reply_size + 64);
    veer_diag d;
    size_t plan_need = 0;
    cr_assert_eq(veer_plan_encode_pb(w->plan, NULL, 0, &plan_need, &d), VEER_ERR_BUFFER);
    cr_assert_eq(veer_plan_encode_pb(w->plan, buf, plan_need - 1, &got, &d), VEER_ERR_BUFFER);
    cr_expect_eq(got, plan_need);
    for (size_t i = 0; i < w->reply_size + 64; i++) cr_assert_eq(buf[i], 0x5A, "plan byte %zu written", i);
    cr_assert_eq(veer_plan_encode_pb(w->plan, buf, plan_need, &got, &d), VEER_OK);
    cr_expect_eq(buf[plan_need], 0x5A);
    free(buf);
    demo_free(w);
    free(w);
}

Test(wire_buffers, workspace_rules) {
    wire_demo *w = malloc(sizeof *w);
    demo_over_wire(w, demo_scenario(), 0);
    size_t ws = veer_plan_workspace_size();
    double *work = malloc(ws + 16);
    const veer_plan *p = (const veer_plan *)work; /* must become NULL on failure */
    veer_diag d;
    cr_expect_eq(veer_plan_load_pb(w->plan_bytes, w->plan_size, work, ws - 1, &p, &d), VEER_ERR_VALUE);
    cr_expect_null(p);
    cr_expect_eq(veer_plan_load_pb(w->plan_bytes, w->plan_size, (char *)work + 1, ws, &p, &d), VEER_ERR_VALUE);
    cr_assert_eq(veer_plan_load_pb(w->plan_bytes, w->plan_size, work, ws, &p, &d), VEER_OK, "%s", d.message);
    cr_expect_eq(veer_plan_module_count(p), 4);
    cr_expect_eq(veer_plan_leg_count(p), 2);
    cr_expect(fabs(veer_plan_duration(p) - veer_plan_duration(w->plan)) < 2e-3);
    printf("wire: plan workspace %zu bytes\n", ws);
    free(work);
    demo_free(w);
    free(w);
}

static size_t alloc_count, alloc_live;
static void *count_alloc(size_t size, void *ctx) {
    (void)ctx;
    alloc_count++;
    alloc_live += size;
    return malloc(size);
}
static void count_free(void *p, size_t size, void *ctx) {
    (void)ctx;
    if (p) alloc_live -= size;
    free(p);
}

/* An allocator whose fresh memory is full of a pattern, not zero. */
static void *dirty_alloc(size_t size, void *ctx) {
    (void)ctx;
    void *p = malloc(size);
    if (p) memset(p, 0xA5, size);
    return p;
}
static void dirty_free(void *p, size_t size, void *ctx) {
    (void)ctx;
    (void)size;
    free(p);
}

/* One plan of sc at grid_points made, encoded, decoded (heap) and encoded
 * again, and loaded into a workspace whose bytes start as fill: the bytes
 * of both encodings and samples of the loaded plan. */
typedef struct {
    uint8_t *bytes, *again;
    size_t size, again_size;
    veer_sample samples[8];
} fresh_run;

static void fresh_memory_run(const scenario *sc, int grid_points, int fill, fresh_run *r) {
    veer_diag d;
    veer_plan_options opt = veer_default_plan_options();
    opt.grid_points = grid_points;
    veer_plan *p = NULL, *dec = NULL;
    cr_assert_eq(veer_plan_create(&sc->drive, &sc->limits, &sc->route, &opt, &p, &d), VEER_OK, "%s", d.message);
    cr_assert_eq(veer_plan_encode_pb(p, NULL, 0, &r->size, NULL), VEER_ERR_BUFFER);
    r->bytes = malloc(r->size);
    cr_assert_eq(veer_plan_encode_pb(p, r->bytes, r->size, &r->size, &d), VEER_OK, "grid %d: %s", grid_points, d.message);
    cr_assert_eq(veer_plan_decode_pb(r->bytes, r->size, &dec, &d), VEER_OK, "%s", d.message);
    cr_assert_eq(veer_plan_encode_pb(dec, NULL, 0, &r->again_size, NULL), VEER_ERR_BUFFER);
    r->again = malloc(r->again_size);
    cr_assert_eq(veer_plan_encode_pb(dec, r->again, r->again_size, &r->again_size, &d), VEER_OK, "%s", d.message);
    size_t ws = veer_plan_workspace_size();
    void *work = aligned_alloc(16, (ws + 15) & ~(size_t)15);
    memset(work, fill, ws);
    const veer_plan *lp = NULL;
    cr_assert_eq(veer_plan_load_pb(r->bytes, r->size, work, ws, &lp, &d), VEER_OK, "%s", d.message);
    for (int i = 0; i < 8; i++)
        cr_assert_eq(veer_plan_sample(lp, veer_plan_duration(lp) * i / 7.0, &r->samples[i]), VEER_OK);
    free(work);
    veer_plan_destroy(dec);
    veer_plan_destroy(p);
}

/* A plan's arrays live behind its struct (plan and decoded plan alike):
 * the planner, the encoder's trial decodes, the heap decoder and a cart's
 * workspace must give the same bytes whatever the memory held before. */
Test(wire_buffers, plans_do_not_depend_on_what_fresh_memory_holds, .timeout = 120) {
    scenario sc = demo_scenario();
    static const int grids[] = {1000, 4000};
    for (int g = 0; g < 2; g++) {
        fresh_run clean, dirty;
        fresh_memory_run(&sc, grids[g], 0, &clean);
        cr_assert_eq(veer_set_allocator(dirty_alloc, dirty_free, NULL), VEER_OK);
        fresh_memory_run(&sc, grids[g], 0xA5, &dirty);
        cr_assert_eq(veer_set_allocator(NULL, NULL, NULL), VEER_OK);
        cr_expect(clean.size == dirty.size && memcmp(clean.bytes, dirty.bytes, clean.size) == 0,
                  "grid %d: the encoded plan depends on fresh memory", grids[g]);
        cr_expect(clean.again_size == dirty.again_size && memcmp(clean.again, dirty.again, clean.again_size) == 0,
                  "grid %d: the re-encoded decoded plan depends on fresh memory", grids[g]);
        for (int i = 0; i < 8; i++) {
            const veer_sample *a = &clean.samples[i], *b = &dirty.samples[i];
            int same = a->phase == b->phase && a->leg == b->leg && a->s == b->s && a->sdot == b->sdot &&
                       a->sddot == b->sddot && a->module_count == b->module_count;
            for (int k = 0; k < 3; k++) same = same && a->pose[k] == b->pose[k] && a->twist_body[k] == b->twist_body[k];
            for (int m = 0; same && m < a->module_count; m++)
                same = a->modules[m].steer == b->modules[m].steer && a->modules[m].wheel_rate == b->modules[m].wheel_rate;
            cr_expect(same, "grid %d, sample %d: the loaded plan depends on what its workspace held", grids[g], i);
        }
        free(clean.bytes), free(clean.again), free(dirty.bytes), free(dirty.again);
    }
}

Test(wire_buffers, sampling_plan_bytes_allocates_nothing_and_nothing_leaks) {
    wire_demo *w = malloc(sizeof *w);
    demo_over_wire(w, demo_scenario(), 0);
    cr_assert_eq(veer_set_allocator(count_alloc, count_free, NULL), VEER_OK);
    alloc_count = alloc_live = 0;
    veer_sample s;
    cr_expect_eq(veer_plan_sample_pb(w->plan_bytes, w->plan_size, 3.0, &s), VEER_OK);
    cr_expect_eq(alloc_count, 0u, "the cart-side path allocated");
    veer_plan *dec = NULL;
    cr_expect_eq(veer_plan_decode_pb(w->plan_bytes, w->plan_size, &dec, NULL), VEER_OK);
    veer_plan_destroy(dec);
    size_t got = 0;
    uint8_t *buf = malloc(w->reply_size);
    cr_expect_eq(veer_plan_request_pb(w->request, w->request_size, buf, w->reply_size, &got), VEER_OK);
    cr_expect_eq(veer_plan_request_pb(protoc_request, 10, buf, w->reply_size, &got), VEER_ERR_DECODE);
    cr_expect_eq(alloc_live, 0u, "%zu bytes not released", alloc_live);
    cr_assert_eq(veer_set_allocator(NULL, NULL, NULL), VEER_OK);
    free(buf);
    demo_free(w);
    free(w);
}

/* ---- untrusted input ----------------------------------------------------------- */

/* Decodes a reply and checks it names the status the call returned. */
static void reply_names(const uint8_t *rep, size_t n, veer_status st) {
    veer_v1_PlanReply *r = calloc(1, sizeof *r);
    pb_istream_t in = pb_istream_from_buffer(rep, n);
    cr_assert(pb_decode(&in, veer_v1_PlanReply_fields, r), "the reply does not decode: %s", PB_GET_ERROR(&in));
    cr_assert_eq((int)r->status, veer__wire_status_to_pb(st));
    cr_assert(r->has_diagnostic);
    if (st != VEER_OK) cr_assert_gt(strlen(r->diagnostic.message), 0u, "no message for %s", veer_status_name(st));
    cr_assert_eq(r->schema_version, 1u);
    free(r);
}

Test(wire_untrusted, error_replies_name_status_and_where) {
    scenario sc = demo_scenario();
    sc.limits.modules[1].wheel_accel = 0.0; /* a zero limit: infeasible */
    size_t n = 0, rn = 0;
    uint8_t *req = request_bytes(&sc, 0, NULL, &n);
    veer_status st;
    uint8_t *rep = run_request(req, n, &rn, &st);
    cr_expect(st == VEER_ERR_INFEASIBLE || st == VEER_ERR_VALUE, "%s", veer_status_name(st));
    reply_names(rep, rn, st);
    free(req), free(rep);

    veer_v1_PlanRequest *r = calloc(1, sizeof *r);
    r->schema_version = 2;
    uint8_t buf[64];
    pb_ostream_t os = pb_ostream_from_buffer(buf, sizeof buf);
    cr_assert(pb_encode(&os, veer_v1_PlanRequest_fields, r));
    rep = run_request(buf, os.bytes_written, &rn, &st);
    cr_expect_eq(st, VEER_ERR_VERSION);
    reply_names(rep, rn, st);
    free(rep);
    rep = run_request(NULL, 0, &rn, &st); /* an empty message */
    cr_expect_eq(st, VEER_ERR_VALUE);
    reply_names(rep, rn, st);
    free(rep);
    rep = run_request(NULL, 5, &rn, &st);
    cr_expect_eq(st, VEER_ERR_NULL);
    reply_names(rep, rn, st);
    free(rep);
    free(r);
}

/* Raw protobuf writer for messages nanopb's encoder would refuse. */
static size_t put_tag_len(uint8_t *p, int field, size_t len) {
    size_t n = 0;
    p[n++] = (uint8_t)(field << 3 | 2);
    do {
        p[n] = (uint8_t)(len & 0x7F);
        len >>= 7;
        if (len) p[n] |= 0x80;
        n++;
    } while (len);
    return n;
}

Test(wire_untrusted, over_capacity_lists_are_refused) {
    /* A route with 33 legs (capacity 32), 9 drive modules (8), 65 waypoints (64), a 100-byte cart id (63). */
    static uint8_t buf[8192];
    const uint8_t leg[] = {0x08, 0x02}; /* Leg { kind: LEG_KIND_SPIN } */
    const uint8_t module[] = {0x09, 0, 0, 0, 0, 0, 0, 0xf0, 0x3f}; /* ModuleDef { x: 1 } */
    const uint8_t wpt[] = {0x09, 0, 0, 0, 0, 0, 0, 0xf0, 0x3f};    /* Waypoint { x: 1 } */
    struct {
        int outer, inner, count;
        const uint8_t *item;
        size_t item_size;
    } cases[] = {{4, 5, 33, leg, sizeof leg}, {2, 2, 9, module, sizeof module}, {4, 6, 65, wpt, sizeof wpt}};
    for (int c = 0; c < 3; c++) {
        uint8_t inner[4096];
        size_t n = 0;
        for (int i = 0; i < cases[c].count; i++) {
            n += put_tag_len(inner + n, cases[c].inner, cases[c].item_size);
            memcpy(inner + n, cases[c].item, cases[c].item_size);
            n += cases[c].item_size;
        }
        size_t m = put_tag_len(buf, cases[c].outer, n);
        memcpy(buf + m, inner, n);
        m += n;
        size_t rn;
        veer_status st;
        uint8_t *rep = run_request(buf, m, &rn, &st);
        cr_expect_eq(st, VEER_ERR_CAPACITY, "case %d: %s", c, veer_status_name(st));
        reply_names(rep, rn, st);
        free(rep);
    }
    size_t m = put_tag_len(buf, 6, 100);
    memset(buf + m, 'K', 100);
    size_t rn;
    veer_status st;
    uint8_t *rep = run_request(buf, m + 100, &rn, &st);
    cr_expect_eq(st, VEER_ERR_CAPACITY);
    reply_names(rep, rn, st);
    free(rep);
}

Test(wire_untrusted, truncated_plans_and_requests, .timeout = 300) {
    wire_demo *w = malloc(sizeof *w);
    demo_over_wire(w, demo_scenario(), 0);
    veer_sample s, fresh;
    memset(&fresh, 0x77, sizeof fresh);
    /* Every proper prefix of a plan is refused (the content hash covers it all) and leaves out untouched. */
    for (size_t n = 0; n < w->plan_size; n++) {
        s = fresh;
        veer_status st = veer_plan_sample_pb(w->plan_bytes, n, 1.0, &s);
        cr_assert_neq(st, VEER_OK, "a plan cut to %zu of %zu bytes was accepted", n, w->plan_size);
        cr_assert(known_status(st));
        cr_assert(memcmp(&s, &fresh, sizeof s) == 0, "output written for a plan cut to %zu bytes", n);
    }
    /* Every prefix of a request gets a reply that names its status. */
    size_t cap = veer_plan_reply_size_bound(50000);
    uint8_t *rep = malloc(cap);
    for (size_t n = 0; n < w->request_size; n++) {
        size_t rn = 0;
        veer_status st = veer_plan_request_pb(w->request, n, rep, cap, &rn);
        cr_assert(known_status(st) && st != VEER_ERR_BUFFER);
        reply_names(rep, rn, st);
    }
    free(rep);
    demo_free(w);
    free(w);
}

Test(wire_untrusted, bit_flips_in_a_plan_are_refused, .timeout = 300) {
    wire_demo *w = malloc(sizeof *w);
    demo_over_wire(w, demo_scenario(), 0);
    size_t ws = veer_plan_workspace_size();
    double *work = malloc(ws);
    uint8_t *b = malloc(w->plan_size);
    /* A change is either refused or leaves the plan's content as it was: protobuf reads any
     * non-zero varint as true, so 0x01 -> 0x03 in a bool field is the same plan (hash and all). */
    const veer_plan *ref = NULL;
    double *ref_work = malloc(ws);
    cr_assert_eq(veer_plan_load_pb(w->plan_bytes, w->plan_size, ref_work, ws, &ref, NULL), VEER_OK);
    int refused = 0, total = 0, same = 0;
    for (size_t i = 0; i < w->plan_size; i++)
        for (int bit = 0; bit < 8; bit++) {
            memcpy(b, w->plan_bytes, w->plan_size);
            b[i] ^= (uint8_t)(1u << bit);
            const veer_plan *p = NULL;
            veer_diag d;
            veer_status st = veer_plan_load_pb(b, w->plan_size, work, ws, &p, &d);
            cr_assert(known_status(st));
            total++;
            if (st != VEER_OK) {
                refused++;
                cr_assert_null(p);
                cr_assert_gt(strlen(d.message), 0u);
                continue;
            }
            same++;
            cr_assert_eq(veer_plan_duration(p), veer_plan_duration(ref));
            for (double t = 0.0; t < veer_plan_duration(ref); t += 0.5) {
                veer_sample a, c;
                cr_assert_eq(veer_plan_sample(p, t, &a), VEER_OK);
                cr_assert_eq(veer_plan_sample(ref, t, &c), VEER_OK);
                cr_assert(memcmp(&a, &c, sizeof a) == 0, "byte %zu bit %d changed the plan unnoticed", i, bit);
            }
        }
    cr_expect_eq(refused + same, total);
    cr_expect_leq(same, 16, "%d of %d single-bit changes were accepted", same, total);
    printf("wire: %d of %d single-bit changes refused, %d left the plan as it was\n", refused, total, same);
    free(ref_work);
    free(b);
    free(work);
    demo_free(w);
    free(w);
}

Test(wire_untrusted, random_garbage_fixed_seed, .timeout = 300) {
    wire_demo *w = malloc(sizeof *w);
    demo_over_wire(w, demo_scenario(), 0);
    rng_state = 0x9E3779B97F4A7C15ull;
    size_t cap = veer_plan_reply_size_bound(50000);
    uint8_t *rep = malloc(cap), *g = malloc(4096);
    size_t ws = veer_plan_workspace_size();
    double *work = malloc(ws);
    /* VEER_GARBAGE_ROUNDS (environment) scales the rounds down for slow
     * runs (valgrind); the default is the full 3000. */
    const char *env = getenv("VEER_GARBAGE_ROUNDS");
    int rounds = env && atoi(env) > 0 ? atoi(env) : 3000;
    for (int round = 0; round < rounds; round++) {
        size_t n = (size_t)(rng() % 600);
        int mode = round % 3;
        if (mode == 0) { /* pure noise */
            for (size_t i = 0; i < n; i++) g[i] = (uint8_t)rng();
        } else { /* a valid message with a few bytes replaced */
            const uint8_t *src = mode == 1 ? w->plan_bytes : w->request;
            size_t len = mode == 1 ? w->plan_size : w->request_size;
            n = len;
            memcpy(g, src, n);
            for (int k = 0; k < 1 + (int)(rng() % 4); k++) g[rng() % n] = (uint8_t)rng();
        }
        const veer_plan *p = NULL;
        veer_diag d;
        veer_status st = veer_plan_load_pb(g, n, work, ws, &p, &d);
        cr_assert(known_status(st));
        if (st != VEER_OK) cr_assert_null(p);
        veer_sample s;
        st = veer_plan_sample_pb(g, n, 2.0, &s);
        cr_assert(known_status(st));
        size_t tn = 0;
        st = veer_plan_table_pb(g, n, 10.0, NULL, 0, &tn);
        cr_assert(known_status(st));
        /* planning is slower: requests every round, plans now and then
         * (round % 30 == 1 is a mode-1 round: == 0 never was, so no plan
         * bytes reached veer_plan_request_pb) */
        if (mode != 1 || round % 30 == 1) {
            size_t rn = 0;
            st = veer_plan_request_pb(g, n, rep, cap, &rn);
            cr_assert(known_status(st) && st != VEER_ERR_BUFFER);
            reply_names(rep, rn, st);
        }
    }
    free(work);
    free(rep);
    free(g);
    demo_free(w);
    free(w);
}

Test(wire_untrusted, version_and_path_model_mismatch) {
    wire_demo *w = malloc(sizeof *w);
    demo_over_wire(w, demo_scenario(), 0);
    veer_v1_Plan *m = calloc(1, sizeof *m);
    veer_diag d;
    cr_assert_eq(veer__wire_decode(veer_v1_Plan_fields, m, w->plan_bytes, w->plan_size, "plan", &d), VEER_OK);
    uint8_t h[32], buf[4096];
    size_t n;
    for (int c = 0; c < 2; c++) {
        veer_v1_Plan *x = malloc(sizeof *x);
        memcpy(x, m, sizeof *x);
        if (c == 0) x->schema_version = 2;
        else x->path_model = 99;
        cr_assert_eq(veer__wire_plan_hash(x, h), VEER_OK); /* a consistent hash: only the version is wrong */
        memcpy(x->content_hash.bytes, h, 32);
        cr_assert_eq(veer__wire_encode(veer_v1_Plan_fields, x, buf, sizeof buf, &n, &d), VEER_OK);
        veer_plan *p = NULL;
        cr_expect_eq(veer_plan_decode_pb(buf, n, &p, &d), VEER_ERR_VERSION);
        cr_expect_null(p);
        free(x);
    }
    /* An altered value with the old hash is refused. */
    m->route.waypoints[0].x += 0.5;
    cr_assert_eq(veer__wire_encode(veer_v1_Plan_fields, m, buf, sizeof buf, &n, &d), VEER_OK);
    veer_plan *p = NULL;
    cr_expect_eq(veer_plan_decode_pb(buf, n, &p, &d), VEER_ERR_DECODE);
    cr_expect(diag_says(&d, "plan"), "%s", d.message);
    free(m);
    demo_free(w);
    free(w);
}
