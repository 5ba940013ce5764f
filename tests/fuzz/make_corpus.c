/* Writes the seed corpora of the fuzz targets from invented scenarios:
 *   make_corpus DIR   ->  DIR/fuzz_plan_request/, DIR/fuzz_plan_decode/,
 *                         DIR/fuzz_link_receiver/
 * Requests and plans for the four drive kinds (the demo's cart K4 and three
 * made-up carts on a made-up lane) on small grids, and link scripts in the
 * format fuzz_link_receiver.c reads. The committed corpus in
 * tests/fuzz/corpus was written by this program.
 * SPDX-License-Identifier: MIT */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <veer/link.h>
#include "kestrel_demo.h"
#include "wire_internal.h"

static const char *root;

static void put(const char *target, const char *name, const uint8_t *b, size_t n) {
    char path[512];
    snprintf(path, sizeof path, "%s/%s", root, target);
    if (mkdir(path, 0777) != 0 && errno != EEXIST) {
        perror(path);
        exit(1);
    }
    snprintf(path, sizeof path, "%s/%s/%s", root, target, name);
    FILE *f = fopen(path, "wb");
    if (!f || fwrite(b, 1, n, f) != n || fclose(f) != 0) {
        perror(path);
        exit(1);
    }
}

typedef struct {
    const char *name;
    veer_drive_def d;
    veer_limits l;
    veer_route r;
} scenario;

static void limits_all(veer_limits *l, int n, double rate, double acc, double steer) {
    for (int i = 0; i < n; i++) {
        l->modules[i].wheel_rate = rate;
        l->modules[i].wheel_accel = acc;
        l->modules[i].steer_rate = steer;
    }
}

static void add_wp(veer_route *r, double x, double y, int stop) {
    veer_waypoint w = veer_default_waypoint(x, y);
    w.stop = stop;
    if (veer_route_add_waypoint(r, &w) != VEER_OK) exit(2);
}

static int scenarios(scenario *s) {
    int n = 0;
    s[n].name = "kestrel_demo";
    if (kestrel_demo(&s[n].d, &s[n].l, &s[n].r) != VEER_OK) exit(2);
    n++;

    /* Mecanum cart on a dog-leg, heading held. */
    s[n].name = "mecanum_dogleg";
    s[n].d = veer_default_drive_def(VEER_DRIVE_MECANUM);
    s[n].l = veer_default_limits();
    limits_all(&s[n].l, 4, 18.0, 12.0, VEER_UNLIMITED);
    s[n].l.body_speed = 1.2;
    s[n].r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg t = veer_default_leg(VEER_LEG_TRAVEL);
    if (veer_route_add_leg(&s[n].r, &t) != VEER_OK) exit(2);
    add_wp(&s[n].r, 4.0, 0.0, 0);
    add_wp(&s[n].r, 5.0, 3.0, 1);
    n++;

    /* Omni cart: travel facing a point, then a spin. */
    s[n].name = "omni_toward_spin";
    s[n].d = veer_default_drive_def(VEER_DRIVE_OMNI);
    s[n].l = veer_default_limits();
    limits_all(&s[n].l, 3, 20.0, 15.0, VEER_UNLIMITED);
    s[n].l.yaw_rate = 1.0;
    s[n].r = veer_default_route(0.0, 0.0, atan2(10.0, 2.0));
    t = veer_default_leg(VEER_LEG_TRAVEL);
    t.heading = VEER_HEADING_TOWARD;
    t.toward_x = 2.0;
    t.toward_y = 10.0;
    if (veer_route_add_leg(&s[n].r, &t) != VEER_OK) exit(2);
    add_wp(&s[n].r, 3.0, 0.5, 0);
    add_wp(&s[n].r, 6.0, 0.0, 1);
    veer_leg spin = veer_default_leg(VEER_LEG_SPIN);
    spin.yaw = 0.0;
    if (veer_route_add_leg(&s[n].r, &spin) != VEER_OK) exit(2);
    n++;

    /* Skid-steer cart facing its travel, with a dwell and a pivot. */
    s[n].name = "skid_tangent_pivot";
    s[n].d = veer_default_drive_def(VEER_DRIVE_DIFFERENTIAL);
    s[n].d.skid_factor = 1.4;
    s[n].l = veer_default_limits();
    limits_all(&s[n].l, 2, 25.0, 20.0, VEER_UNLIMITED);
    s[n].l.body_accel = 1.5;
    s[n].r = veer_default_route(0.0, 0.0, 0.0);
    t = veer_default_leg(VEER_LEG_TRAVEL);
    t.heading = VEER_HEADING_TANGENT;
    t.dwell = 1.0;
    if (veer_route_add_leg(&s[n].r, &t) != VEER_OK) exit(2);
    add_wp(&s[n].r, 5.0, 0.0, 0);
    add_wp(&s[n].r, 8.0, 2.0, 1);
    veer_leg piv = veer_default_leg(VEER_LEG_PIVOT);
    /* About a point on the body's y axis (a differential drive cannot move sideways). */
    double h = atan2(2.0, 3.0);
    piv.pivot_x = 8.0 - 1.2 * sin(h);
    piv.pivot_y = 2.0 + 1.2 * cos(h);
    piv.angle = 0.6;
    if (veer_route_add_leg(&s[n].r, &piv) != VEER_OK) exit(2);
    n++;
    return n;
}

static veer_v1_PlanRequest req;
static uint8_t buf[1 << 16];

int main(int argc, char **argv) {
    if (argc != 2) {
        fprintf(stderr, "usage: %s DIR\n", argv[0]);
        return 2;
    }
    root = argv[1];
    scenario s[8];
    int n = scenarios(s);
    veer_diag diag;
    uint8_t plan0[VEER_LINK_MAX_PLAN_BYTES];
    size_t plan0_size = 0;
    for (int k = 0; k < n; k++) {
        int M = veer_drive_module_count(&s[k].d);
        veer_plan_options o = veer_default_plan_options();
        o.grid_points = 300;
        memset(&req, 0, sizeof req);
        req.schema_version = VEER_WIRE_SCHEMA_VERSION;
        req.has_drive = req.has_limits = req.has_route = req.has_options = true;
        veer__wire_drive_to_pb(&s[k].d, &req.drive);
        veer__wire_limits_to_pb(&s[k].l, M, &req.limits);
        veer__wire_route_to_pb(&s[k].r, M, &req.route);
        veer__wire_options_to_pb(&o, &req.options);
        snprintf(req.cart_id, sizeof req.cart_id, "corpus/%s", s[k].name);
        size_t size = 0;
        if (veer__wire_encode(veer_v1_PlanRequest_fields, &req, buf, sizeof buf, &size, &diag) != VEER_OK) {
            fprintf(stderr, "%s: %s\n", s[k].name, diag.message);
            return 1;
        }
        put("fuzz_plan_request", s[k].name, buf, size);

        veer_plan *p = NULL;
        if (veer_plan_create(&s[k].d, &s[k].l, &s[k].r, &o, &p, &diag) != VEER_OK) {
            fprintf(stderr, "%s: %s\n", s[k].name, diag.message);
            return 1;
        }
        if (veer_plan_encode_pb(p, buf, sizeof buf, &size, &diag) != VEER_OK) {
            fprintf(stderr, "%s: %s\n", s[k].name, diag.message);
            return 1;
        }
        veer_plan_destroy(p);
        put("fuzz_plan_decode", s[k].name, buf, size);
        if (k == 0) memcpy(plan0, buf, plan0_size = size);
    }
    /* Edge cases for the request decoder: empty, wrong schema version. */
    put("fuzz_plan_request", "empty", buf, 0);
    const uint8_t version99[] = {0x08, 0x63};
    put("fuzz_plan_request", "version99", version99, sizeof version99);

    /* Link scripts (fuzz_link_receiver.c): frame-size selector, then ops. */
    /* 1: the demo plan in order, START, ticks with heartbeats, reports. */
    uint8_t run_demo[128] = {0, 2, 0, 0, 0, 0, 3, 1, 2};
    size_t m = 9;
    for (int k = 0; k < 22; k++) { /* 0.8 s of ticks, then a heartbeat: 17.6 s */
        const uint8_t beat[] = {4, 39, 3, 1, 1};
        memcpy(run_demo + m, beat, sizeof beat);
        m += sizeof beat;
    }
    run_demo[m++] = 7;
    put("fuzz_link_receiver", "demo_start", run_demo, m);
    /* 2: the spin plan reversed with drops and repeats, START, STOP mid-way. */
    const uint8_t stop_mid[] = {0, 2, 1, 0, 0x43, 0, 3, 1, 2, 4, 20, 3, 1, 3, 4, 30, 7};
    put("fuzz_link_receiver", "spin_stop", stop_mid, sizeof stop_mid);
    /* 3: an altered plan, a damaged chunk, a local stop, link loss. */
    const uint8_t bad[] = {1, 2, 2, 0x10, 0x00, 0x33, 0, 0x05, 0x85, 0, 0, 6, 5, 0xd0, 0x07, 7};
    put("fuzz_link_receiver", "altered", bad, sizeof bad);
    /* 4: arbitrary bytes sealed as a plan: the first 200 bytes of the demo plan. */
    uint8_t sealed[16 + 200];
    m = 0;
    sealed[m++] = 0;
    sealed[m++] = 2;
    sealed[m++] = 3;
    sealed[m++] = 200;
    sealed[m++] = 0;
    memcpy(sealed + m, plan0, 200);
    m += 200;
    sealed[m++] = 0; /* plan counter step */
    sealed[m++] = 0; /* chunk order */
    sealed[m++] = 0; /* no damage */
    put("fuzz_link_receiver", "sealed_bytes", sealed, m);
    /* 5: the first chunk frame of the demo plan as a raw frame, and a raw body. */
    veer_link_def def = veer_default_link_def();
    def.cart = 41;
    for (int i = 0; i < VEER_LINK_KEY_BYTES; i++) def.key[i] = (uint8_t)(0xa5 ^ (7 * i + 3));
    veer_link_sender *tx = NULL;
    if (veer_link_sender_create(&def, 1, plan0, plan0_size, &tx, &diag) != VEER_OK) {
        fprintf(stderr, "sender: %s\n", diag.message);
        return 1;
    }
    uint8_t frame[VEER_LINK_FRAME_MAX];
    size_t fn = 0;
    if (veer_link_sender_frame(tx, 0, frame, sizeof frame, &fn) != VEER_OK) return 1;
    veer_link_sender_destroy(tx);
    uint8_t raw[8 + VEER_LINK_FRAME_MAX];
    m = 0;
    raw[m++] = 0;
    raw[m++] = 0;
    raw[m++] = (uint8_t)fn;
    raw[m++] = (uint8_t)(fn >> 8);
    memcpy(raw + m, frame, fn);
    m += fn;
    put("fuzz_link_receiver", "raw_chunk", raw, m);
    /* A command body (seq 1, HEARTBEAT) with its tag made right: op 1 with the tag bit. */
    const uint8_t body[] = {0x08, 41, 0x1a, 0x04, 0x08, 0x01, 0x10, 0x01};
    m = 0;
    raw[m++] = 0;
    raw[m++] = 1 | 8;
    raw[m++] = sizeof body;
    raw[m++] = 0;
    memcpy(raw + m, body, sizeof body);
    m += sizeof body;
    raw[m++] = 4;
    raw[m++] = 10;
    put("fuzz_link_receiver", "tagged_body", raw, m);
    printf("corpus written to %s\n", root);
    return 0;
}
