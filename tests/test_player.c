/* The player: plans arrive over the link, arm only when they fit the cart,
 * run on START, stop under control on STOP, on a local request and on link
 * loss, and stay stopped. Odometry through the drive's forward kinematics,
 * uniform-deceleration braking and the given route's end are the references.
 * SPDX-License-Identifier: MIT */
#include <criterion/criterion.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <veer/veer.h>
#include <veer/link.h>
#include <veer/player.h>
#include <veer/wire.h>
#include "wire_internal.h"
#include "veer/v1/link.pb.h"
#include "plan_check.h"
#include "diag_text.h"

#define PI 3.14159265358979323846
#define RATE 50.0 /* Hz, the control rate */

/* ---- the cart and its plans --------------------------------------------- */

static veer_link_def cart_link(uint32_t cart, uint8_t seed) {
    veer_link_def d = veer_default_link_def();
    d.cart = cart;
    for (int i = 0; i < VEER_LINK_KEY_BYTES; i++) d.key[i] = (uint8_t)(seed ^ (13 * i + 1));
    return d;
}

static veer_limits cart_limits(void) {
    veer_limits l = veer_default_limits();
    for (int i = 0; i < 4; i++) {
        l.modules[i].wheel_rate = 20.0; /* rad/s */
        l.modules[i].wheel_accel = 10.0;
        l.modules[i].steer_rate = 3.0;
    }
    l.body_speed = 1.5;
    l.body_accel = 1.0;
    return l;
}

static veer_player_def cart_def(void) {
    veer_player_def d = veer_default_player_def();
    d.link = cart_link(4, 0x5a);
    d.drive = veer_default_drive_def(VEER_DRIVE_STEERED);
    d.limits = cart_limits();
    strcpy(d.cart_name, "test-range/cart-4");
    d.link_timeout = 0.5;
    return d;
}

/* From (0, 0) facing +x: a rounded corner at (3, 0), a stop at (3, 2). */
static veer_route corner_route(void) {
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint a = veer_default_waypoint(3.0, 0.0), b = veer_default_waypoint(3.0, 2.0);
    cr_assert_eq(veer_route_add_waypoint(&r, &a), VEER_OK);
    cr_assert_eq(veer_route_add_waypoint(&r, &b), VEER_OK);
    return r;
}

/* Straight along +x for D metres. */
static veer_route line_route(double D) {
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(D, 0.0);
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    return r;
}

typedef struct {
    uint8_t *bytes;
    size_t size;
} blob;

/* Raw bytes of top-level length-delimited field `number` of a message. */
static int field_bytes(const uint8_t *buf, size_t n, uint32_t number, const uint8_t **out, size_t *len) {
    pb_istream_t in = pb_istream_from_buffer(buf, n);
    pb_wire_type_t wt;
    uint32_t tag;
    bool eof;
    int found = 0;
    while (pb_decode_tag(&in, &wt, &tag, &eof)) {
        if (tag == number && wt == PB_WT_STRING) {
            uint32_t k;
            cr_assert(pb_decode_varint32(&in, &k));
            *out = buf + (n - in.bytes_left);
            *len = k;
            found = 1;
            cr_assert(pb_read(&in, NULL, k));
        } else {
            cr_assert(pb_skip_field(&in, wt));
        }
    }
    return found;
}

/* Plans a route for a drive and limits and encodes it as Plan bytes:
 * without a cart name through veer_plan_encode_pb, with one through a
 * PlanRequest and veer_plan_request_pb (the plan is the reply's field 5). */
static blob plan_bytes(const veer_drive_def *d, const veer_limits *l, const veer_route *r, const char *name) {
    blob b;
    b.bytes = malloc(VEER_LINK_MAX_PLAN_BYTES);
    veer_diag diag;
    if (!name) {
        veer_plan *p = NULL;
        cr_assert_eq(veer_plan_create(d, l, r, NULL, &p, &diag), VEER_OK, "%s", diag.message);
        cr_assert_eq(veer_plan_encode_pb(p, b.bytes, VEER_LINK_MAX_PLAN_BYTES, &b.size, &diag), VEER_OK, "%s",
                     diag.message);
        veer_plan_destroy(p);
        return b;
    }
    veer_v1_PlanRequest *req = calloc(1, sizeof *req);
    int M = veer_drive_module_count(d);
    req->has_drive = req->has_limits = req->has_route = true;
    veer__wire_drive_to_pb(d, &req->drive);
    veer__wire_limits_to_pb(l, M, &req->limits);
    veer__wire_route_to_pb(r, M, &req->route);
    strcpy(req->cart_id, name);
    static uint8_t reqb[veer_v1_PlanRequest_size];
    pb_ostream_t os = pb_ostream_from_buffer(reqb, sizeof reqb);
    cr_assert(pb_encode(&os, veer_v1_PlanRequest_fields, req));
    free(req);
    size_t cap = veer_plan_reply_size_bound(1000), n = 0;
    uint8_t *rep = malloc(cap);
    cr_assert_eq(veer_plan_request_pb(reqb, os.bytes_written, rep, cap, &n), VEER_OK);
    const uint8_t *plan;
    size_t len;
    cr_assert(field_bytes(rep, n, 5, &plan, &len), "the reply holds no plan");
    memcpy(b.bytes, plan, len);
    b.size = len;
    free(rep);
    return b;
}

static veer_player *new_player(const veer_player_def *def, void **mem) {
    size_t n = (veer_player_size_for(def) + 15) / 16 * 16;
    *mem = aligned_alloc(16, n);
    cr_assert_not_null(*mem);
    veer_player *p = NULL;
    veer_diag diag;
    cr_assert_eq(veer_player_init(*mem, n, def, &p, &diag), VEER_OK, "%s", diag.message);
    return p;
}

/* Counting allocator: the player must never call it. Only calls while
 * `counting` is set count (the ground side's sender may allocate). */
static size_t alloc_calls;
static int counting;
static void *count_alloc(size_t size, void *ctx) {
    (void)ctx;
    alloc_calls += counting;
    return malloc(size);
}
static void count_free(void *ptr, size_t size, void *ctx) {
    (void)size, (void)ctx;
    free(ptr);
}

/* Sends a sealed plan frame by frame; returns the event of the last frame. */
static veer_player_event send_plan(veer_player *p, const veer_link_def *link, uint64_t id, blob b, double now) {
    int was = counting;
    counting = 0; /* the ground side */
    veer_link_sender *s = NULL;
    cr_assert_eq(veer_link_sender_create(link, id, b.bytes, b.size, &s, NULL), VEER_OK);
    int count = veer_link_sender_chunk_count(s);
    uint8_t(*f)[VEER_LINK_FRAME_MAX] = malloc((size_t)count * VEER_LINK_FRAME_MAX);
    size_t *n = malloc((size_t)count * sizeof *n);
    for (int i = 0; i < count; i++) cr_assert_eq(veer_link_sender_frame(s, i, f[i], VEER_LINK_FRAME_MAX, &n[i]), VEER_OK);
    veer_link_sender_destroy(s);
    counting = was; /* the cart side */
    veer_player_event ev;
    memset(&ev, 0, sizeof ev);
    for (int i = 0; i < count; i++) cr_assert_eq(veer_player_frame(p, f[i], n[i], now, &ev), VEER_OK);
    free(f);
    free(n);
    return ev;
}

static uint64_t seq_counter = 1;
static veer_player_event command(veer_player *p, const veer_link_def *link, int kind, uint64_t plan_id, double now) {
    uint8_t f[VEER_LINK_FRAME_MAX];
    size_t n;
    cr_assert_eq(veer_link_command_frame(link, seq_counter++, kind, plan_id, f, sizeof f, &n), VEER_OK);
    veer_player_event ev;
    cr_assert_eq(veer_player_frame(p, f, n, now, &ev), VEER_OK);
    return ev;
}

static veer_link_report status(const veer_player *p) {
    veer_link_report r;
    cr_assert_eq(veer_player_status(p, &r), VEER_OK);
    return r;
}

/* Odometry: integrates the module setpoints of one control period through
 * the drive's forward kinematics, the motor controllers following each
 * module's rate and acceleration (steer + steer_rate tau, wheel_rate +
 * wheel_accel tau), in ten sub-steps with the yaw at each sub-step's middle. */
static void odometry(const veer_drive_def *d, const veer_sample *o, double dt, double pose[3]) {
    const int K = 10;
    double h = dt / K;
    for (int j = 0; j < K; j++) {
        double tau = (j + 0.5) * h, steer[VEER_MAX_MODULES], wheel[VEER_MAX_MODULES], tw[3];
        for (int i = 0; i < o->module_count; i++) {
            steer[i] = o->modules[i].steer + o->modules[i].steer_rate * tau;
            wheel[i] = o->modules[i].wheel_rate + o->modules[i].wheel_accel * tau;
        }
        cr_assert_eq(veer_drive_forward(d, steer, wheel, tw), VEER_OK);
        double yaw = pose[2] + 0.5 * tw[2] * h;
        pose[0] += (tw[0] * cos(yaw) - tw[1] * sin(yaw)) * h;
        pose[1] += (tw[0] * sin(yaw) + tw[1] * cos(yaw)) * h;
        pose[2] += tw[2] * h;
    }
}

/* Every module setpoint within the cart's limits (tolerance: the message
 * interface's 0.5 % of a limit, wire_internal.h). */
static void within_limits(const veer_limits *l, const veer_sample *o, const char *when) {
    cr_assert(pc_finite_sample(o), "%s: not finite", when);
    for (int i = 0; i < o->module_count; i++) {
        const veer_module_limits *m = &l->modules[i];
        cr_assert(fabs(o->modules[i].wheel_rate) <= m->wheel_rate * 1.005, "%s: wheel_rate[%d] %g", when, i,
                  o->modules[i].wheel_rate);
        cr_assert(fabs(o->modules[i].wheel_accel) <= m->wheel_accel * 1.005, "%s: wheel_accel[%d] %g", when, i,
                  o->modules[i].wheel_accel);
        cr_assert(fabs(o->modules[i].steer_rate) <= m->steer_rate * 1.005, "%s: steer_rate[%d] %g", when, i,
                  o->modules[i].steer_rate);
    }
}

static double angle_diff(double a, double b) { return fabs(remainder(a - b, 2.0 * PI)); }

/* ---- a whole run -------------------------------------------------------- */

/* Armed over the link, started, stepped at 50 Hz with heartbeats: the
 * odometry of the player's own setpoints ends at the route's last waypoint
 * (3, 2) with the start heading, within 1 cm and 0.5 degree; every setpoint
 * is within the limits; the player ends STOPPED at END_OF_PLAN and never
 * moves again; no allocation on the way. */
Test(player, runs_to_the_route_end) {
    veer_player_def def = cart_def();
    void *mem;
    veer_player *p = new_player(&def, &mem);
    veer_route r = corner_route();
    blob b = plan_bytes(&def.drive, &def.limits, &r, def.cart_name);
    alloc_calls = 0;
    counting = 1;
    cr_assert_eq(veer_set_allocator(count_alloc, count_free, NULL), VEER_OK);
    double now = 100.0; /* the cart's clock does not start at zero */
    veer_player_event ev = send_plan(p, &def.link, 1, b, now);
    cr_assert(ev.armed, "%s", veer_link_reason_name(ev.reason));
    cr_assert_eq(status(p).state, VEER_PLAYER_ARMED);
    ev = command(p, &def.link, VEER_LINK_COMMAND_START, 1, now);
    cr_assert(ev.started);
    double pose[3] = {0.0, 0.0, 0.0}, dt = 1.0 / RATE;
    veer_sample o;
    int k = 0;
    for (; k < 100000; k++) {
        now = 100.0 + k * dt;
        if (k % 10 == 0) command(p, &def.link, VEER_LINK_COMMAND_HEARTBEAT, 0, now);
        cr_assert_eq(veer_player_step(p, now, &o), VEER_OK);
        within_limits(&def.limits, &o, "run");
        if (status(p).state != VEER_PLAYER_RUNNING) break;
        odometry(&def.drive, &o, dt, pose);
    }
    cr_assert_eq(veer_set_allocator(NULL, NULL, NULL), VEER_OK);
    cr_assert_eq(alloc_calls, 0u, "the player allocated");
    veer_link_report rep = status(p);
    cr_assert_eq(rep.state, VEER_PLAYER_STOPPED);
    cr_assert_eq(rep.stop_reason, VEER_STOP_END_OF_PLAN);
    double duration = veer_plan_duration(veer_player_plan(p));
    cr_assert(fabs(k * dt - duration) <= dt + 1e-9, "ended at %g s, plan %g s", k * dt, duration);
    /* the route's end: (3, 2), yaw 0 (HOLD keeps the start heading) */
    double err = hypot(pose[0] - 3.0, pose[1] - 2.0);
    cr_log_info("odometry end error %.2e m, yaw %.2e rad", err, angle_diff(pose[2], 0.0));
    cr_assert(err < 0.01, "odometry ends at (%.4f, %.4f), %.4f m from (3, 2)", pose[0], pose[1], err);
    cr_assert(angle_diff(pose[2], 0.0) < 0.5 * PI / 180.0, "yaw %.5f", pose[2]);
    cr_assert(hypot(rep.pose[0] - 3.0, rep.pose[1] - 2.0) < 2e-3, "reported pose");
    /* stays stopped: heartbeats, time and a START of the same plan change nothing */
    for (int j = 0; j < 200; j++) {
        now += dt;
        if (j % 10 == 0) command(p, &def.link, VEER_LINK_COMMAND_HEARTBEAT, 0, now);
        cr_assert_eq(veer_player_step(p, now, &o), VEER_OK);
        for (int i = 0; i < o.module_count; i++) cr_assert_eq(o.modules[i].wheel_rate, 0.0);
    }
    ev = command(p, &def.link, VEER_LINK_COMMAND_START, 1, now);
    cr_assert_eq(ev.reason, VEER_LINK_STATE);
    cr_assert(!ev.started);
    cr_assert_eq(status(p).state, VEER_PLAYER_STOPPED);
    free(b.bytes);
    free(mem);
}

/* ---- controlled stops --------------------------------------------------- */

/* On a 10 m line with 1.5 m/s and 1 m/s^2 (wheel limits far away) the cart
 * cruises at 1.5 m/s from s = 1.125 m to 8.875 m. A STOP at t = 4 s brakes
 * uniformly: v^2 / (2a) = 1.125 m in v / a = 1.5 s (uniform deceleration,
 * any physics text), within the inscribed acceleration polygon's cos(pi/32)
 * (0.5 %) and one control period. The player's stop is the ground side's
 * (veer_plan_stop_info on the same plan) to 1e-6 m. */
Test(player, stop_command_brakes_like_the_range_checks) {
    veer_player_def def = cart_def();
    for (int i = 0; i < 4; i++) def.limits.modules[i].wheel_rate = 50.0, def.limits.modules[i].wheel_accel = 100.0;
    void *mem;
    veer_player *p = new_player(&def, &mem);
    veer_route r = line_route(10.0);
    blob b = plan_bytes(&def.drive, &def.limits, &r, NULL);
    cr_assert(send_plan(p, &def.link, 3, b, 0.0).armed);
    cr_assert(command(p, &def.link, VEER_LINK_COMMAND_START, 3, 0.0).started);
    double dt = 1.0 / RATE, now = 0.0;
    veer_sample o;
    for (int k = 0; k <= 200; k++) { /* up to t = 4 s */
        now = k * dt;
        if (k % 10 == 0) command(p, &def.link, VEER_LINK_COMMAND_HEARTBEAT, 0, now);
        cr_assert_eq(veer_player_step(p, now, &o), VEER_OK);
    }
    cr_assert(fabs(o.sdot - 1.5) < 1e-2, "cruising at %g m/s", o.sdot);
    double s0 = o.s, v0 = o.sdot;
    veer_player_event ev = command(p, &def.link, VEER_LINK_COMMAND_STOP, 0, now);
    cr_assert(ev.stopped);
    veer_link_report rep = status(p);
    cr_assert_eq(rep.state, VEER_PLAYER_STOPPING);
    cr_assert_eq(rep.stop_reason, VEER_STOP_COMMAND);
    double t_stop = now, prev_s = s0, prev_v = v0;
    int k = 0;
    for (; k < 1000 && status(p).state == VEER_PLAYER_STOPPING; k++) {
        now += dt;
        if (k % 10 == 0) command(p, &def.link, VEER_LINK_COMMAND_HEARTBEAT, 0, now);
        cr_assert_eq(veer_player_step(p, now, &o), VEER_OK);
        within_limits(&def.limits, &o, "stop");
        cr_assert(o.s >= prev_s - 1e-12 && o.sdot <= prev_v + 1e-12, "the stop goes forward and slows down");
        /* never harder than the body's acceleration limit allows */
        cr_assert(hypot(o.accel_world[0], o.accel_world[1]) <= def.limits.body_accel * 1.005);
        prev_s = o.s, prev_v = o.sdot;
    }
    rep = status(p);
    cr_assert_eq(rep.state, VEER_PLAYER_STOPPED);
    double a = def.limits.body_accel;
    cr_assert(fabs((o.s - s0) - v0 * v0 / (2 * a)) < 0.006 * v0 * v0 / (2 * a) + 1e-3, "distance %.5f, v^2/2a %.5f",
              o.s - s0, v0 * v0 / (2 * a));
    cr_assert(fabs((now - t_stop) - v0 / a) <= dt + 0.006 * v0 / a, "stop took %g s, v/a %g s", now - t_stop, v0 / a);
    cr_log_info("stop: %.5f m in %.3f s from %.4f m/s (v^2/2a %.5f m, v/a %.3f s)", o.s - s0, now - t_stop, v0,
                v0 * v0 / (2 * a), v0 / a);
    veer_stop_info in;
    cr_assert_eq(veer_plan_stop_info(veer_player_plan(p), t_stop, &in), VEER_OK);
    cr_assert(fabs(in.s_end - o.s) < 1e-6, "player %.9f, range checks %.9f", o.s, in.s_end);
    for (int i = 0; i < o.module_count; i++) cr_assert_eq(o.modules[i].wheel_rate, 0.0);
    free(b.bytes);
    free(mem);
}

/* Link loss while running: no authenticated frame for link_timeout, the
 * stop begins at the deadline (the braking the range checks compute for
 * that moment), every setpoint stays within the limits (also the wheel
 * rates' finite differences against wheel_accel), the reason is LINK_LOST,
 * and the player stays stopped when the link comes back; frames that are
 * not authentic (bad tag, replayed heartbeat, garbage) do not feed the
 * watchdog. */
Test(player, link_loss_stops_and_stays_stopped) {
    veer_player_def def = cart_def();
    void *mem;
    veer_player *p = new_player(&def, &mem);
    veer_route r = corner_route();
    blob b = plan_bytes(&def.drive, &def.limits, &r, NULL);
    cr_assert(send_plan(p, &def.link, 9, b, 0.0).armed);
    cr_assert(command(p, &def.link, VEER_LINK_COMMAND_START, 9, 0.0).started);
    double dt = 1.0 / RATE, now = 0.0, last_hb = 0.0;
    veer_sample o, prev;
    memset(&prev, 0, sizeof prev);
    uint8_t replay[VEER_LINK_FRAME_MAX];
    size_t replay_n = 0;
    veer_link_def forged = cart_link(4, 0x11);
    int k = 0;
    for (; k < 100000; k++) {
        now = k * dt;
        if (now <= 1.5 + 1e-9 && k % 10 == 0) {
            uint8_t f[VEER_LINK_FRAME_MAX];
            size_t n;
            cr_assert_eq(veer_link_command_frame(&def.link, seq_counter++, VEER_LINK_COMMAND_HEARTBEAT, 0, f,
                                                 sizeof f, &n), VEER_OK);
            veer_player_event ev;
            cr_assert_eq(veer_player_frame(p, f, n, now, &ev), VEER_OK);
            memcpy(replay, f, n), replay_n = n;
            last_hb = now;
        } else if (now > 1.5 && k % 5 == 0) { /* only frames that must not count */
            veer_player_event ev;
            cr_assert_eq(veer_player_frame(p, replay, replay_n, now, &ev), VEER_OK);
            cr_assert_eq(ev.reason, VEER_LINK_COMMAND_REPLAY);
            uint8_t f[VEER_LINK_FRAME_MAX];
            size_t n;
            cr_assert_eq(veer_link_command_frame(&forged, seq_counter++, VEER_LINK_COMMAND_HEARTBEAT, 0, f,
                                                 sizeof f, &n), VEER_OK);
            cr_assert_eq(veer_player_frame(p, f, n, now, &ev), VEER_OK);
            cr_assert_eq(ev.reason, VEER_LINK_FRAME_TAG);
            cr_assert_eq(veer_player_frame(p, (const uint8_t *)"noise", 5, now, &ev), VEER_OK);
        }
        cr_assert_eq(veer_player_step(p, now, &o), VEER_OK);
        within_limits(&def.limits, &o, "run or stop");
        if (k > 0)
            for (int i = 0; i < o.module_count; i++) /* finite differences of what the wheels were told */
                cr_assert(fabs(o.modules[i].wheel_rate - prev.modules[i].wheel_rate) <=
                              def.limits.modules[i].wheel_accel * dt * 1.02 + 1e-9,
                          "t %g: wheel %d changes by %g in one period", now, i,
                          o.modules[i].wheel_rate - prev.modules[i].wheel_rate);
        prev = o;
        if (status(p).state == VEER_PLAYER_STOPPED) break;
    }
    veer_link_report rep = status(p);
    cr_assert_eq(rep.state, VEER_PLAYER_STOPPED);
    cr_assert_eq(rep.stop_reason, VEER_STOP_LINK_LOST);
    double deadline = last_hb + def.link_timeout;
    cr_assert(deadline < veer_plan_duration(veer_player_plan(p)), "the test must lose the link mid-run");
    veer_stop_info in;
    cr_assert_eq(veer_plan_stop_info(veer_player_plan(p), deadline, &in), VEER_OK);
    cr_assert(in.sdot_start > 0.1, "moving when the link went: %g", in.sdot_start);
    cr_assert(fabs(in.s_end - rep.s) < 1e-6, "stopped at s %.7f, braking from the deadline gives %.7f", rep.s,
              in.s_end);
    cr_assert(now <= deadline + in.duration + dt + 1e-9, "stopped at %g, deadline %g + %g", now, deadline, in.duration);
    /* the link comes back: still stopped, nothing moves, START is refused */
    double x = rep.pose[0], y = rep.pose[1];
    for (int j = 0; j < 300; j++) {
        now += dt;
        if (j % 10 == 0) command(p, &def.link, VEER_LINK_COMMAND_HEARTBEAT, 0, now);
        cr_assert_eq(veer_player_step(p, now, &o), VEER_OK);
        for (int i = 0; i < o.module_count; i++) cr_assert_eq(o.modules[i].wheel_rate, 0.0);
    }
    veer_player_event ev = command(p, &def.link, VEER_LINK_COMMAND_START, 9, now);
    cr_assert_eq(ev.reason, VEER_LINK_STATE);
    rep = status(p);
    cr_assert_eq(rep.state, VEER_PLAYER_STOPPED);
    cr_assert_eq(rep.stop_reason, VEER_STOP_LINK_LOST);
    cr_assert(rep.pose[0] == x && rep.pose[1] == y);
    /* a new plan arms (but does not move) */
    ev = send_plan(p, &def.link, 10, b, now);
    cr_assert(ev.armed);
    cr_assert_eq(veer_player_step(p, now + dt, &o), VEER_OK);
    cr_assert_eq(status(p).state, VEER_PLAYER_ARMED);
    for (int i = 0; i < o.module_count; i++) cr_assert_eq(o.modules[i].wheel_rate, 0.0);
    free(b.bytes);
    free(mem);
}

/* A stop while the modules re-steer (the body stands) is immediate: the
 * modules hold where they are. */
Test(player, stop_while_resteering_is_immediate) {
    veer_player_def def = cart_def();
    void *mem;
    veer_player *p = new_player(&def, &mem);
    /* sideways first: the modules turn from 0 to 90 degrees before moving */
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(0.0, 3.0);
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    blob b = plan_bytes(&def.drive, &def.limits, &r, NULL);
    cr_assert(send_plan(p, &def.link, 1, b, 0.0).armed);
    veer_leg_summary ls;
    cr_assert_eq(veer_plan_leg(veer_player_plan(p), 0, &ls), VEER_OK);
    /* steer rate 3 rad/s: a quarter turn takes (pi/2) / 3 = 0.52 s */
    cr_assert(ls.resteer_time > 0.4, "re-steer %g s", ls.resteer_time);
    cr_assert(command(p, &def.link, VEER_LINK_COMMAND_START, 1, 0.0).started);
    veer_sample o;
    cr_assert_eq(veer_player_step(p, 0.2, &o), VEER_OK);
    cr_assert_eq(o.phase, VEER_PHASE_RESTEER);
    double held = o.modules[0].steer;
    cr_assert(fabs(held) > 0.1 && fabs(held) < PI / 2 - 0.1, "mid-turn %g", held);
    cr_assert_eq(veer_player_stop(p, 0.2), VEER_OK);
    veer_link_report rep = status(p);
    cr_assert_eq(rep.state, VEER_PLAYER_STOPPED);
    cr_assert_eq(rep.stop_reason, VEER_STOP_LOCAL);
    cr_assert_eq(veer_player_step(p, 0.3, &o), VEER_OK);
    cr_assert(fabs(o.modules[0].steer - held) < 1e-12);
    cr_assert_eq(o.modules[0].steer_rate, 0.0);
    free(b.bytes);
    free(mem);
}

/* ---- refusals ----------------------------------------------------------- */

static void nothing_armed(const veer_player *p, const char *what) {
    veer_link_report rep = status(p);
    cr_assert_eq(rep.state, VEER_PLAYER_IDLE, "%s: state %s", what, veer_player_state_name(rep.state));
    cr_assert_null(veer_player_plan(p), "%s", what);
    cr_assert_eq(rep.accepted_plan_id, 0u, "%s", what);
}

/* Each refusal has its reason and arms nothing: another drive, other
 * limits, another cart's name, bytes that are no plan, a plan for another
 * cart, a replay after a restart, a truncated frame. */
Test(player, refusals_arm_nothing) {
    veer_player_def def = cart_def();
    veer_route r = corner_route();
    struct {
        const char *what;
        int reason;
    } cases[] = {{"drive", VEER_LINK_DRIVE},     {"limits", VEER_LINK_LIMITS},   {"name", VEER_LINK_CART_NAME},
                 {"garbage", VEER_LINK_DECODE},  {"other cart", VEER_LINK_OTHER_CART},
                 {"replay", VEER_LINK_REPLAY},   {"truncated", VEER_LINK_TRUNCATED}};
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        veer_player_def pd = def;
        if (!strcmp(cases[c].what, "replay")) pd.accepted_plan_id = 50; /* accepted before a restart */
        void *mem;
        veer_player *p = new_player(&pd, &mem);
        veer_drive_def d = def.drive;
        veer_limits l = def.limits;
        const char *name = def.cart_name;
        veer_link_def link = def.link;
        uint64_t id = 20;
        if (!strcmp(cases[c].what, "drive")) d.modules[0].x += 0.01;
        if (!strcmp(cases[c].what, "limits")) l.modules[2].wheel_accel = 9.5;
        if (!strcmp(cases[c].what, "name")) name = "test-range/cart-5";
        if (!strcmp(cases[c].what, "other cart")) link = cart_link(5, 0x5b);
        blob b = plan_bytes(&d, &l, &r, name);
        if (!strcmp(cases[c].what, "garbage")) memset(b.bytes + b.size / 2, 0xff, 16);
        veer_player_event ev;
        if (!strcmp(cases[c].what, "truncated")) {
            veer_link_sender *s;
            cr_assert_eq(veer_link_sender_create(&link, id, b.bytes, b.size, &s, NULL), VEER_OK);
            int count = veer_link_sender_chunk_count(s);
            for (int i = 0; i < count; i++) {
                uint8_t f[VEER_LINK_FRAME_MAX];
                size_t n;
                cr_assert_eq(veer_link_sender_frame(s, i, f, sizeof f, &n), VEER_OK);
                if (i == count - 1) n -= 3; /* the last one cut short */
                cr_assert_eq(veer_player_frame(p, f, n, 0.0, &ev), VEER_OK);
            }
            veer_link_sender_destroy(s);
        } else {
            ev = send_plan(p, &link, id, b, 0.0);
        }
        cr_assert_eq(ev.reason, cases[c].reason, "%s: %s, expected %s", cases[c].what,
                     veer_link_reason_name(ev.reason), veer_link_reason_name(cases[c].reason));
        cr_assert(!ev.armed);
        if (!strcmp(cases[c].what, "replay")) {
            veer_link_report rep = status(p);
            cr_assert_eq(rep.state, VEER_PLAYER_IDLE);
            cr_assert_null(veer_player_plan(p));
        } else {
            nothing_armed(p, cases[c].what);
        }
        cr_assert_eq(status(p).last_rejection, cases[c].reason, "%s: the report names it", cases[c].what);
        /* START finds nothing to start */
        cr_assert_eq(command(p, &def.link, VEER_LINK_COMMAND_START, id, 0.0).reason, VEER_LINK_STATE);
        free(b.bytes);
        free(mem);
    }
}

/* "The same limits" is the canonical encoding's: a limit that does not
 * apply to the drive kind (steer rate on a mecanum cart) does not count,
 * the order of unset and set fields does not either. */
Test(player, same_means_canonical) {
    veer_player_def def = cart_def();
    def.drive = veer_default_drive_def(VEER_DRIVE_MECANUM);
    for (int i = 0; i < 4; i++) def.limits.modules[i].steer_rate = VEER_UNLIMITED;
    void *mem;
    veer_player *p = new_player(&def, &mem);
    veer_limits l = def.limits;
    for (int i = 0; i < 4; i++) l.modules[i].steer_rate = 1.0 + i; /* meaningless for mecanum */
    veer_route r = corner_route();
    blob b = plan_bytes(&def.drive, &l, &r, NULL);
    veer_player_event ev = send_plan(p, &def.link, 2, b, 0.0);
    cr_assert(ev.armed, "%s", veer_link_reason_name(ev.reason));
    free(b.bytes);
    free(mem);
}

/* The switch is atomic: a newer plan replaces the armed one; a plan that
 * fails its checks leaves the armed plan exactly as it was; no plan is
 * armed while the cart runs. */
Test(player, atomic_switch_and_busy) {
    veer_player_def def = cart_def();
    def.link_timeout = 5.0;
    void *mem;
    veer_player *p = new_player(&def, &mem);
    veer_route ra = corner_route(), rb = line_route(4.0);
    blob a = plan_bytes(&def.drive, &def.limits, &ra, NULL), bb = plan_bytes(&def.drive, &def.limits, &rb, NULL);
    veer_limits bad = def.limits;
    bad.body_speed = 1.4;
    blob c = plan_bytes(&def.drive, &bad, &rb, NULL);
    cr_assert(send_plan(p, &def.link, 1, a, 0.0).armed);
    cr_assert(send_plan(p, &def.link, 2, bb, 0.0).armed);
    const veer_plan *armed = veer_player_plan(p);
    veer_sample before, after;
    cr_assert_eq(veer_plan_sample(armed, 1.0, &before), VEER_OK);
    cr_assert(fabs(veer_plan_length(armed) - 4.0) < 1e-9, "plan B is armed");
    /* The player's plan keeps no route (rebuilt from the bytes into scratch): it cannot be encoded. */
    size_t enc = 0;
    veer_diag ed;
    cr_assert_eq(veer_plan_encode_pb(armed, NULL, 0, &enc, &ed), VEER_ERR_STATE);
    cr_assert(diag_says(&ed, "keeps no route"), "%s", ed.message);
    veer_player_event ev = send_plan(p, &def.link, 3, c, 0.0);
    cr_assert_eq(ev.reason, VEER_LINK_LIMITS);
    cr_assert_eq(veer_player_plan(p), armed);
    cr_assert_eq(veer_plan_sample(armed, 1.0, &after), VEER_OK);
    cr_assert(memcmp(&before, &after, sizeof before) == 0, "the armed plan changed");
    /* The player keeps one decoded plan: a refused plan is decoded over it
     * and the armed plan decoded again from its bytes. A plan that breaks off
     * in the middle of its profile (garbage there) and one that decodes whole
     * but names another cart leave it the same, bit for bit. */
    blob g = plan_bytes(&def.drive, &def.limits, &ra, NULL);
    memset(g.bytes + g.size - 12, 0xff, 12);
    blob named = plan_bytes(&def.drive, &def.limits, &ra, "test-range/cart-9");
    ev = send_plan(p, &def.link, 5, g, 0.0);
    cr_assert_eq(ev.reason, VEER_LINK_DECODE, "%s", veer_link_reason_name(ev.reason));
    cr_assert_eq(veer_player_plan(p), armed);
    cr_assert_eq(veer_plan_sample(armed, 1.0, &after), VEER_OK);
    cr_assert(memcmp(&before, &after, sizeof before) == 0, "a plan that did not decode changed the armed one");
    ev = send_plan(p, &def.link, 6, named, 0.0);
    cr_assert_eq(ev.reason, VEER_LINK_CART_NAME, "%s", veer_link_reason_name(ev.reason));
    cr_assert_eq(veer_plan_sample(veer_player_plan(p), 1.0, &after), VEER_OK);
    cr_assert(memcmp(&before, &after, sizeof before) == 0, "a plan for another cart changed the armed one");
    cr_assert_eq(status(p).state, VEER_PLAYER_ARMED);
    free(g.bytes), free(named.bytes);
    veer_link_report rep = status(p);
    cr_assert_eq(rep.state, VEER_PLAYER_ARMED);
    cr_assert_eq(rep.plan_id, 2u);
    cr_assert_eq(rep.accepted_plan_id, 2u);
    /* START names the armed plan only */
    cr_assert_eq(command(p, &def.link, VEER_LINK_COMMAND_START, 1, 0.0).reason, VEER_LINK_NOT_ARMED);
    cr_assert(command(p, &def.link, VEER_LINK_COMMAND_START, 2, 0.0).started);
    veer_sample o;
    cr_assert_eq(veer_player_step(p, 1.0, &o), VEER_OK);
    ev = send_plan(p, &def.link, 4, a, 1.0);
    cr_assert_eq(ev.reason, VEER_LINK_BUSY);
    cr_assert_eq(veer_player_plan(p), armed);
    cr_assert_eq(status(p).state, VEER_PLAYER_RUNNING);
    cr_assert_eq(veer_player_step(p, 1.02, &o), VEER_OK);
    cr_assert_eq(veer_plan_sample(armed, 1.02, &after), VEER_OK);
    cr_assert(fabs(o.pose[0] - after.pose[0]) < 1e-12, "the run goes on");
    free(a.bytes), free(bb.bytes), free(c.bytes);
    free(mem);
}

/* Commands that do not fit the state, a STOP of an armed plan (dropped for
 * good), bad clocks and bad definitions: clear statuses, nothing changes. */
Test(player, commands_clocks_and_definitions) {
    veer_player_def def = cart_def();
    void *mem;
    veer_player *p = new_player(&def, &mem);
    cr_assert_eq(command(p, &def.link, VEER_LINK_COMMAND_START, 1, 1.0).reason, VEER_LINK_STATE);
    veer_route r = corner_route();
    blob b = plan_bytes(&def.drive, &def.limits, &r, NULL);
    cr_assert(send_plan(p, &def.link, 1, b, 1.0).armed);
    veer_sample o;
    /* NAN and INFINITY are float constants (C11 7.12): the casts say the promotion is meant. */
    cr_assert_eq(veer_player_step(p, (double)NAN, &o), VEER_ERR_VALUE);
    cr_assert_eq(veer_player_step(p, 0.5, &o), VEER_ERR_VALUE, "the clock went back");
    uint8_t f[8] = {0};
    veer_player_event ev;
    cr_assert_eq(veer_player_frame(p, f, sizeof f, (double)INFINITY, &ev), VEER_ERR_VALUE);
    cr_assert_eq(veer_player_frame(NULL, f, sizeof f, 2.0, &ev), VEER_ERR_NULL);
    cr_assert_eq(veer_player_step(p, 2.0, NULL), VEER_ERR_NULL);
    cr_assert_eq(status(p).state, VEER_PLAYER_ARMED);
    cr_assert(command(p, &def.link, VEER_LINK_COMMAND_STOP, 0, 2.0).stopped);
    veer_link_report rep = status(p);
    cr_assert_eq(rep.state, VEER_PLAYER_STOPPED);
    cr_assert_eq(rep.stop_reason, VEER_STOP_COMMAND);
    cr_assert_eq(command(p, &def.link, VEER_LINK_COMMAND_START, 1, 2.0).reason, VEER_LINK_STATE);
    /* definitions */
    veer_diag diag;
    veer_player *q = (veer_player *)&def;
    veer_player_def bad = def;
    bad.link_timeout = 0.0;
    cr_assert_eq(veer_player_init(mem, veer_player_size(), &bad, &q, &diag), VEER_ERR_VALUE);
    cr_assert_null(q);
    cr_assert(diag_says(&diag, "link_timeout"));
    bad = def;
    bad.limits.body_speed = -1.0;
    cr_assert_eq(veer_player_init(mem, veer_player_size(), &bad, &q, &diag), VEER_ERR_VALUE);
    bad = def;
    memset(bad.cart_name, 'x', sizeof bad.cart_name);
    cr_assert_eq(veer_player_init(mem, veer_player_size(), &bad, &q, &diag), VEER_ERR_VALUE);
    bad = def;
    memset(bad.link.key, 0, sizeof bad.link.key);
    cr_assert_eq(veer_player_init(mem, veer_player_size(), &bad, &q, &diag), VEER_ERR_VALUE);
    cr_assert_eq(veer_player_init(mem, 100, &def, &q, &diag), VEER_ERR_VALUE);
    cr_assert_str_eq(veer_player_state_name(VEER_PLAYER_STOPPING), "STOPPING");
    cr_assert_str_eq(veer_stop_reason_name(VEER_STOP_LINK_LOST), "LINK_LOST");
    cr_assert_str_eq(veer_stop_reason_name(42), "UNKNOWN");
    free(b.bytes);
    free(mem);
}

/* The report: its PlayerReport bytes decode (nanopb) to the player's
 * state, and its tagged frame parses on the ground side. */
Test(player, report_message) {
    veer_player_def def = cart_def();
    def.link_timeout = 5.0;
    void *mem;
    veer_player *p = new_player(&def, &mem);
    veer_route r = corner_route();
    blob b = plan_bytes(&def.drive, &def.limits, &r, NULL);
    cr_assert(send_plan(p, &def.link, 77, b, 0.0).armed);
    cr_assert(command(p, &def.link, VEER_LINK_COMMAND_START, 77, 0.0).started);
    veer_sample o;
    cr_assert_eq(veer_player_step(p, 1.5, &o), VEER_OK);
    uint8_t buf[512];
    size_t n;
    cr_assert_eq(veer_player_report_pb(p, buf, 4, &n), VEER_ERR_BUFFER);
    cr_assert_eq(veer_player_report_pb(p, buf, sizeof buf, &n), VEER_OK);
    veer_v1_PlayerReport m;
    pb_istream_t in = pb_istream_from_buffer(buf, n);
    cr_assert(pb_decode(&in, veer_v1_PlayerReport_fields, &m));
    cr_assert_eq((int)m.state, VEER_PLAYER_RUNNING);
    cr_assert_eq(m.plan_id, 77u);
    cr_assert_float_eq(m.t, 1.5, 1e-12);
    cr_assert_float_eq(m.s, o.s, 1e-12);
    cr_assert_float_eq(m.x, o.pose[0], 1e-12);
    cr_assert_eq(m.accepted_plan_id, 77u);
    cr_assert_eq(veer_player_report_frame(p, buf, sizeof buf, &n), VEER_OK);
    cr_assert(n <= (size_t)def.link.frame_size);
    veer_link_message msg;
    int why;
    cr_assert_eq(veer_link_parse(&def.link, buf, n, &msg, &why), VEER_OK, "%s", veer_link_reason_name(why));
    cr_assert_eq(msg.kind, VEER_LINK_KIND_REPORT);
    cr_assert_eq(msg.report.state, VEER_PLAYER_RUNNING);
    cr_assert_eq(msg.report.report_seq, 1u);
    cr_assert_float_eq(msg.report.pose[1], o.pose[1], 1e-12);
    /* another key does not read it */
    veer_link_def other = cart_link(4, 0x01);
    cr_assert_eq(veer_link_parse(&other, buf, n, &msg, &why), VEER_ERR_DECODE);
    cr_assert_eq(why, VEER_LINK_FRAME_TAG);
    free(b.bytes);
    free(mem);
}

/* Random frames at a running player: never a crash, never a change of
 * plan or state, the run goes on to the end (fixed seed). */
Test(player, random_frames_while_running) {
    veer_player_def def = cart_def();
    void *mem;
    veer_player *p = new_player(&def, &mem);
    veer_route r = corner_route();
    blob b = plan_bytes(&def.drive, &def.limits, &r, NULL);
    cr_assert(send_plan(p, &def.link, 5, b, 0.0).armed);
    cr_assert(command(p, &def.link, VEER_LINK_COMMAND_START, 5, 0.0).started);
    uint64_t x = 0x9E3779B97F4A7C15ull;
    double dt = 1.0 / RATE;
    veer_sample o;
    for (int k = 0; k < 250; k++) {
        double now = k * dt;
        if (k % 10 == 0) command(p, &def.link, VEER_LINK_COMMAND_HEARTBEAT, 0, now);
        for (int j = 0; j < 20; j++) {
            uint8_t f[300];
            x ^= x << 13, x ^= x >> 7, x ^= x << 17; /* xorshift64 (Marsaglia 2003) */
            size_t n = x % sizeof f;
            for (size_t i = 0; i < n; i++) {
                x ^= x << 13, x ^= x >> 7, x ^= x << 17;
                f[i] = (uint8_t)x;
            }
            veer_player_event ev;
            cr_assert_eq(veer_player_frame(p, f, n, now, &ev), VEER_OK);
            cr_assert(!ev.armed && !ev.started && !ev.stopped);
        }
        cr_assert_eq(veer_player_step(p, now, &o), VEER_OK);
        cr_assert(pc_finite_sample(&o));
        int st = status(p).state;
        cr_assert(st == VEER_PLAYER_RUNNING || st == VEER_PLAYER_STOPPED);
    }
    cr_assert_eq(status(p).plan_id, 5u);
    free(b.bytes);
    free(mem);
}

/* A cart's configuration from CartConfig bytes: what a nanopb encoder wrote
 * comes back field by field; garbage gets a named status. */
Test(player, definition_from_cart_config) {
    veer_player_def want = cart_def();
    veer_v1_CartConfig m;
    memset(&m, 0, sizeof m);
    m.cart = 4;
    strcpy(m.cart_name, want.cart_name);
    m.has_drive = m.has_limits = true;
    veer__wire_drive_to_pb(&want.drive, &m.drive);
    veer__wire_limits_to_pb(&want.limits, 4, &m.limits);
    m.has_link_timeout = true;
    m.link_timeout = 0.75;
    m.has_frame_size = true;
    m.frame_size = 200;
    m.has_max_plan_bytes = m.has_max_knots = m.has_max_waypoints = m.has_max_legs = true;
    m.max_plan_bytes = 2048;
    m.max_knots = 300;
    m.max_waypoints = 12;
    m.max_legs = 5;
    uint8_t buf[veer_v1_CartConfig_size];
    pb_ostream_t os = pb_ostream_from_buffer(buf, sizeof buf);
    cr_assert(pb_encode(&os, veer_v1_CartConfig_fields, &m));
    veer_player_def got;
    veer_diag diag;
    cr_assert_eq(veer_player_def_from_pb(buf, os.bytes_written, &got, &diag), VEER_OK, "%s", diag.message);
    cr_assert_eq(got.link.cart, 4u);
    cr_assert_eq(got.link.frame_size, 200);
    cr_assert_eq(got.link.max_plan_bytes, 2048u);
    cr_assert_eq(got.max_knots, 300u);
    cr_assert_eq(got.max_waypoints, 12u);
    cr_assert_eq(got.max_legs, 5u);
    cr_assert_float_eq(got.link_timeout, 0.75, 0.0);
    cr_assert_str_eq(got.cart_name, want.cart_name);
    cr_assert(memcmp(&got.drive, &want.drive, sizeof got.drive) == 0);
    cr_assert_float_eq(got.limits.modules[3].wheel_accel, 10.0, 0.0);
    cr_assert_float_eq(got.limits.body_speed, 1.5, 0.0);
    for (int i = 0; i < VEER_LINK_KEY_BYTES; i++) cr_assert_eq(got.link.key[i], 0, "no key in a config");
    /* with the key set it makes a player */
    got.link.key[0] = 1;
    void *mem;
    veer_player *p = new_player(&got, &mem);
    cr_assert_not_null(p);
    free(mem);
    veer_player_def untouched = want;
    cr_assert_eq(veer_player_def_from_pb((const uint8_t *)"\xff\xff\xff", 3, &untouched, &diag), VEER_ERR_DECODE);
    cr_assert(memcmp(&untouched, &want, sizeof want) == 0);
    m.has_drive = false;
    os = pb_ostream_from_buffer(buf, sizeof buf);
    cr_assert(pb_encode(&os, veer_v1_CartConfig_fields, &m));
    cr_assert_eq(veer_player_def_from_pb(buf, os.bytes_written, &untouched, &diag), VEER_ERR_VALUE);
    cr_assert(diag_says(&diag, "drive"));
}

/* Regression (tests/fuzz/findings/fuzz_link_receiver/report_frame_64): at
 * the smallest frame size a link accepts, a running player's report frame
 * still fits, with counters at their widest (10-byte varints). */
Test(player, report_fits_the_smallest_frame) {
    veer_player_def def = cart_def();
    def.link.frame_size = VEER_LINK_FRAME_MIN;
    def.link_timeout = 60.0;
    void *mem;
    veer_player *p = new_player(&def, &mem);
    veer_route r = corner_route();
    blob b = plan_bytes(&def.drive, &def.limits, &r, NULL);
    uint64_t id = UINT64_MAX;
    cr_assert(send_plan(p, &def.link, id, b, 0.0).armed);
    uint8_t f[VEER_LINK_FRAME_MAX];
    size_t n;
    veer_player_event ev;
    cr_assert_eq(veer_link_command_frame(&def.link, UINT64_MAX - 1, VEER_LINK_COMMAND_START, id, f, sizeof f, &n),
                 VEER_OK);
    cr_assert_eq(veer_player_frame(p, f, n, 0.0, &ev), VEER_OK);
    cr_assert(ev.started);
    veer_sample o;
    cr_assert_eq(veer_player_step(p, 2.345678, &o), VEER_OK);
    for (int k = 0; k < 3; k++) {
        cr_assert_eq(veer_player_report_frame(p, f, sizeof f, &n), VEER_OK);
        cr_assert(n <= (size_t)VEER_LINK_FRAME_MIN, "%zu bytes", n);
    }
    veer_link_message m;
    cr_assert_eq(veer_link_parse(&def.link, f, n, &m, NULL), VEER_OK);
    cr_assert_eq(m.report.plan_id, UINT64_MAX);
    cr_assert_eq(m.report.command_seq, UINT64_MAX - 1);
    /* a smaller frame size is refused when the player is set up */
    def.link.frame_size = VEER_LINK_FRAME_MIN - 1;
    veer_player *q;
    cr_assert_eq(veer_player_init(mem, veer_player_size(), &def, &q, NULL), VEER_ERR_VALUE);
    free(b.bytes);
    free(mem);
}

/* ---- capacity ------------------------------------------------------------ */

/* The knots a Plan message's profile gives (Profile.knot_count). */
static int plan_knots(blob b) {
    veer_v1_Plan *m = calloc(1, sizeof *m);
    pb_istream_t in = pb_istream_from_buffer(b.bytes, b.size);
    cr_assert(pb_decode(&in, veer_v1_Plan_fields, m));
    int n = (int)m->profile.knot_count;
    free(m);
    return n;
}

/* Starts the plans armed on pf and ps (plan 1) at now and plays them to
 * their end, heartbeats every 10 ticks: every setpoint bit for bit the
 * same, ps ending at the end of its plan. Returns the ticks played. */
static int play_alike(veer_player *pf, const veer_link_def *lf, veer_player *ps, const veer_link_def *ls, double now) {
    cr_assert(command(pf, lf, VEER_LINK_COMMAND_START, 1, now).started);
    cr_assert(command(ps, ls, VEER_LINK_COMMAND_START, 1, now).started);
    double dt = 1.0 / RATE, T = veer_plan_duration(veer_player_plan(ps));
    int steps = 0;
    for (int k = 0; k * dt <= T + 0.5; k++, steps++) {
        double t = now + k * dt;
        if (k % 10 == 0) {
            command(pf, lf, VEER_LINK_COMMAND_HEARTBEAT, 0, t);
            command(ps, ls, VEER_LINK_COMMAND_HEARTBEAT, 0, t);
        }
        veer_sample a, c;
        cr_assert_eq(veer_player_step(pf, t, &a), VEER_OK);
        cr_assert_eq(veer_player_step(ps, t, &c), VEER_OK);
        cr_assert(memcmp(&a, &c, sizeof a) == 0, "setpoints differ at t = %g s", k * dt);
    }
    cr_assert_eq(status(ps).stop_reason, VEER_STOP_END_OF_PLAN);
    return steps;
}

/* A cart sized for its plans (plan bytes, knots, waypoints, legs, its own
 * module count) needs a fraction of the memory of one sized for any plan,
 * plays a plan that fits exactly as that one does (every setpoint equal, bit
 * for bit), and refuses a plan beyond any one capacity with reason CAPACITY,
 * keeping the armed plan. */
Test(player, capacity_sizes_memory_and_refuses_larger_plans) {
    veer_player_def full = cart_def();
    veer_route r = corner_route();
    blob b = plan_bytes(&full.drive, &full.limits, &r, full.cart_name);
    int knots = plan_knots(b);
    cr_assert(b.size > VEER_LINK_MIN_PLAN_BYTES && knots > 2, "%zu bytes, %d knots", b.size, knots);
    /* what the plan needs: the message's own knot count, the route's two waypoints and one leg */
    veer_plan_needs need;
    veer_diag diag;
    cr_assert_eq(veer_plan_needs_pb(b.bytes, b.size, &need, &diag), VEER_OK, "%s", diag.message);
    cr_assert(need.plan_bytes == b.size && need.knots == (uint32_t)knots && need.waypoints == 2 && need.legs == 1 &&
              need.modules == 4);
    veer_plan_needs untouched = need;
    cr_assert_eq(veer_plan_needs_pb(b.bytes, b.size - 1, &untouched, &diag), VEER_ERR_DECODE);
    cr_assert(memcmp(&untouched, &need, sizeof need) == 0);
    cr_assert_eq(veer_plan_needs_pb(b.bytes, b.size, NULL, &diag), VEER_ERR_NULL);
    veer_player_def small = full;
    small.link.max_plan_bytes = need.plan_bytes;
    small.max_knots = need.knots;
    small.max_waypoints = need.waypoints;
    small.max_legs = need.legs;
    size_t n_full = veer_player_size_for(&full), n_small = veer_player_size_for(&small);
    cr_log_info("player memory: any plan %zu B (8 modules: %zu B), this plan on 4 modules %zu B", n_full,
                veer_player_size(), n_small);
    cr_assert(n_small > 0 && n_small < n_full / 4 && n_full <= veer_player_size());
    /* sizes and bounds */
    cr_assert_eq(veer_player_size_for(NULL), 0u);
    veer_player_def bad = small;
    bad.max_knots = VEER_WIRE_MAX_KNOTS + 1;
    cr_assert_eq(veer_player_size_for(&bad), 0u);
    void *mem = aligned_alloc(16, (n_full + 15) / 16 * 16);
    veer_player *q = NULL;
    cr_assert_eq(veer_player_init(mem, n_full, &bad, &q, &diag), VEER_ERR_VALUE);
    cr_assert(diag_says(&diag, "max_knots") && !q);
    bad = small;
    bad.link.max_plan_bytes = VEER_LINK_MIN_PLAN_BYTES - 1;
    cr_assert_eq(veer_player_init(mem, n_full, &bad, &q, &diag), VEER_ERR_VALUE);
    cr_assert(diag_says(&diag, "max_plan_bytes"));
    cr_assert_eq(veer_player_init(mem, n_small - 1, &small, &q, &diag), VEER_ERR_VALUE);
    cr_assert(diag_says(&diag, "player memory") && !q);
    free(mem);
    /* a plan that fits plays as on the full cart */
    void *mf, *ms;
    veer_player *pf = new_player(&full, &mf), *ps = new_player(&small, &ms);
    double now = 10.0;
    cr_assert(send_plan(pf, &full.link, 1, b, now).armed);
    veer_player_event ev = send_plan(ps, &small.link, 1, b, now);
    cr_assert(ev.armed, "%s", veer_link_reason_name(ev.reason));
    cr_log_info("%d steps equal", play_alike(pf, &full.link, ps, &small.link, now));
    /* beyond one capacity: refused, the armed plan kept */
    veer_route r3 = corner_route();
    veer_waypoint w = veer_default_waypoint(5.0, 2.0);
    cr_assert_eq(veer_route_add_waypoint(&r3, &w), VEER_OK);
    blob more_wp = plan_bytes(&full.drive, &full.limits, &r3, full.cart_name);
    veer_route r4 = corner_route();
    veer_leg spin = veer_default_leg(VEER_LEG_SPIN);
    spin.yaw = 1.0;
    cr_assert_eq(veer_route_add_leg(&r4, &spin), VEER_OK);
    blob more_leg = plan_bytes(&full.drive, &full.limits, &r4, full.cart_name);
    struct {
        const char *what;
        blob plan;
        veer_player_def def;
    } cases[4];
    /* waypoints and legs beyond the cart's, everything else with room */
    veer_player_def roomy = small;
    roomy.link.max_plan_bytes = 0;
    roomy.max_knots = 0;
    cases[0].what = "more waypoints", cases[0].plan = more_wp, cases[0].def = roomy;
    cases[1].what = "more legs", cases[1].plan = more_leg, cases[1].def = roomy;
    /* the first plan, with one knot or one byte of room too few */
    cases[2].what = "more knots", cases[2].plan = b, cases[2].def = small;
    cases[2].def.max_knots = (uint32_t)knots - 1;
    cases[3].what = "more bytes", cases[3].plan = b, cases[3].def = small;
    cases[3].def.link.max_plan_bytes = (uint32_t)b.size - 1;
    for (int c = 0; c < 4; c++) {
        const veer_player_def *d = &cases[c].def;
        void *m2;
        veer_player *p2 = new_player(d, &m2);
        int armed_first = c < 2;
        veer_link_def ground = d->link; /* a ground station that does not know the cart's capacity */
        ground.max_plan_bytes = 0;
        if (armed_first) cr_assert(send_plan(p2, &ground, 5, b, 1.0).armed, "%s: the fitting plan arms", cases[c].what);
        ev = send_plan(p2, &ground, 6, cases[c].plan, 2.0);
        cr_assert(!ev.armed && ev.reason == VEER_LINK_CAPACITY, "%s: %s", cases[c].what,
                  veer_link_reason_name(ev.reason));
        veer_link_report rep = status(p2);
        cr_assert_eq(rep.last_rejection, VEER_LINK_CAPACITY, "%s: the report names it", cases[c].what);
        cr_assert_eq(rep.state, armed_first ? VEER_PLAYER_ARMED : VEER_PLAYER_IDLE, "%s: nothing changed",
                     cases[c].what);
        cr_assert_eq(rep.plan_id, armed_first ? 5u : 0u);
        veer_link_gaps g;
        cr_assert_eq(veer_link_receiver_gaps(veer_player_receiver(p2), &g), VEER_OK);
        cr_assert(g.complete && g.plan_id == 6 && g.verdict == VEER_LINK_CAPACITY,
                  "%s: the gap report tells the ground station", cases[c].what);
        free(m2);
    }
    free(more_wp.bytes);
    free(more_leg.bytes);
    free(b.bytes);
    free(mf);
    free(ms);
}

/* A route of that many waypoints (3, 0), (3, 2), (5, 2), ... in one travel
 * leg, then a spin to yaw 1 rad: 2 legs. */
static veer_route turns_then_spin(int waypoints) {
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    for (int i = 0; i < waypoints; i++) {
        veer_waypoint w = veer_default_waypoint(3.0 + 2.0 * (double)(i / 2), 2.0 * (double)((i + 1) / 2));
        cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    }
    veer_leg spin = veer_default_leg(VEER_LEG_SPIN);
    spin.yaw = 1.0;
    cr_assert_eq(veer_route_add_leg(&r, &spin), VEER_OK);
    return r;
}

/* The player rebuilds a plan's route in scratch with room for only its
 * max_waypoints waypoints and max_legs legs: its memory shrinks by the
 * bytes of the waypoints and legs it has no room for (sizeof veer_waypoint
 * and veer_leg, to within the 16-byte rounding of the scratch), a plan that
 * fits plays as on a cart with room for any route (bit for bit), and one
 * waypoint more is refused with reason CAPACITY, the armed plan kept. */
Test(player, route_scratch_sized_by_capacity) {
    veer_player_def full = cart_def();
    veer_route r3 = turns_then_spin(3), r4 = turns_then_spin(4);
    blob b3 = plan_bytes(&full.drive, &full.limits, &r3, full.cart_name);
    blob b4 = plan_bytes(&full.drive, &full.limits, &r4, full.cart_name);
    veer_player_def small = full;
    small.max_waypoints = 3;
    small.max_legs = 2;
    /* memory: with few knots the route's scratch, not the grid, sizes the grid area of the workspace, so
     * the player's memory less its plan block (veer__wire_plan_grid_at) is the scratch */
    veer_player_def few = small;
    few.max_knots = 8;
    cr_assert(VEER__GRID_BYTES(8, 4, 0) < VEER__ALIGN16(sizeof(veer__plan_msgs)), "the grid is the smaller");
    struct {
        int waypoints, legs;
    } sz[3] = {{3, 2}, {VEER_MAX_WAYPOINTS, 2}, {3, VEER_MAX_LEGS}};
    long area[3];
    for (int i = 0; i < 3; i++) {
        veer_player_def d = few;
        d.max_waypoints = (uint32_t)sz[i].waypoints, d.max_legs = (uint32_t)sz[i].legs;
        veer__plan_cap cap = {8, sz[i].waypoints, sz[i].legs, 4, 0, 1};
        size_t n = veer_player_size_for(&d);
        cr_assert(n > 0);
        area[i] = (long)n - (long)veer__wire_plan_grid_at(&cap);
    }
    long wp_more = (long)(VEER_MAX_WAYPOINTS - 3) * (long)sizeof(veer_waypoint);
    long leg_more = (long)(VEER_MAX_LEGS - 2) * (long)sizeof(veer_leg);
    cr_log_info("player memory less its plan block: %ld B for 3 waypoints and 2 legs, %ld B for %d waypoints, "
                "%ld B for %d legs",
                area[0], area[1], VEER_MAX_WAYPOINTS, area[2], VEER_MAX_LEGS);
    cr_assert(labs(area[1] - area[0] - wp_more) < 16, "61 waypoints more: %ld B more, expected %ld +- 15",
              area[1] - area[0], wp_more);
    cr_assert(labs(area[2] - area[0] - leg_more) < 16, "30 legs more: %ld B more, expected %ld +- 15",
              area[2] - area[0], leg_more);
    /* the 3-waypoint, 2-leg plan plays as on a cart with room for any route */
    void *mf, *ms;
    veer_player *pf = new_player(&full, &mf), *ps = new_player(&small, &ms);
    double now = 3.0;
    cr_assert(send_plan(pf, &full.link, 1, b3, now).armed);
    veer_player_event ev = send_plan(ps, &small.link, 1, b3, now);
    cr_assert(ev.armed, "%s", veer_link_reason_name(ev.reason));
    /* one waypoint more: refused, the armed plan kept */
    ev = send_plan(ps, &small.link, 2, b4, now);
    cr_assert(!ev.armed && ev.reason == VEER_LINK_CAPACITY, "%s", veer_link_reason_name(ev.reason));
    veer_link_report rep = status(ps);
    cr_assert(rep.state == VEER_PLAYER_ARMED && rep.plan_id == 1u && rep.last_rejection == VEER_LINK_CAPACITY);
    void *ma;
    veer_player *pa = new_player(&full, &ma);
    cr_assert(send_plan(pa, &full.link, 2, b4, now).armed, "a cart with room for any route takes it");
    free(ma);
    play_alike(pf, &full.link, ps, &small.link, now);
    free(b3.bytes);
    free(b4.bytes);
    free(mf);
    free(ms);
}

/* A cart with fixed wheels (mecanum) keeps no steer angles at the knots: its
 * memory, sized for its plan, is smaller than a steered cart's by 4 bytes (a
 * float angle) per knot and module; it plays its plan as the decoded plan samples it (bit for
 * bit), and a plan for steered modules is refused (CAPACITY) leaving the armed
 * plan as it was. */
Test(player, fixed_wheels_keep_no_steer_angles) {
    veer_player_def mec = cart_def();
    mec.drive = veer_default_drive_def(VEER_DRIVE_MECANUM);
    veer_route r = corner_route();
    blob b = plan_bytes(&mec.drive, &mec.limits, &r, NULL);
    veer_plan_needs need;
    veer_diag diag;
    cr_assert_eq(veer_plan_needs_pb(b.bytes, b.size, &need, &diag), VEER_OK, "%s", diag.message);
    cr_assert_eq(need.modules, 4u);
    mec.link.max_plan_bytes = need.plan_bytes;
    mec.max_knots = need.knots;
    mec.max_waypoints = need.waypoints;
    mec.max_legs = need.legs;
    veer_player_def steered = mec;
    steered.drive = veer_default_drive_def(VEER_DRIVE_STEERED);
    size_t n_mec = veer_player_size_for(&mec), n_steered = veer_player_size_for(&steered);
    cr_log_info("player memory for a %u-knot plan on 4 modules: steered %zu B, mecanum %zu B", need.knots, n_steered,
                n_mec);
    cr_assert(n_mec > 0 && n_mec + (size_t)need.knots * 4 * sizeof(float) - 16 <= n_steered, "%zu, %zu", n_mec,
              n_steered);
    void *mem;
    veer_player *p = new_player(&mec, &mem);
    double now = 3.0;
    cr_assert(send_plan(p, &mec.link, 1, b, now).armed);
    veer_plan *ref = NULL;
    cr_assert_eq(veer_plan_decode_pb(b.bytes, b.size, &ref, &diag), VEER_OK, "%s", diag.message);
    cr_assert(command(p, &mec.link, VEER_LINK_COMMAND_START, 1, now).started);
    double dt = 1.0 / RATE, T = veer_plan_duration(ref);
    for (int k = 0; k * dt < T; k++) {
        double t = now + k * dt;
        if (k % 10 == 0) command(p, &mec.link, VEER_LINK_COMMAND_HEARTBEAT, 0, t);
        veer_sample a, c;
        cr_assert_eq(veer_player_step(p, t, &a), VEER_OK);
        cr_assert_eq(veer_plan_sample(ref, t - now, &c), VEER_OK); /* the player's plan time */
        cr_assert_eq(a.module_count, 4);
        for (int i = 0; i < 4; i++) {
            cr_assert(a.modules[i].wheel_rate == c.modules[i].wheel_rate && a.modules[i].steer == c.modules[i].steer,
                      "t %.3f module %d", k * dt, i);
            cr_assert_eq(a.modules[i].steer, 0.0, "mecanum wheels report steer 0 (drive.h)");
        }
    }
    veer_plan_destroy(ref);
    /* a plan for steered modules: refused, the stopped cart's last plan kept */
    veer_route rl = line_route(2.0);
    blob sb = plan_bytes(&steered.drive, &steered.limits, &rl, NULL);
    const veer_plan *last = veer_player_plan(p);
    double length = veer_plan_length(last);
    veer_player_event ev = send_plan(p, &mec.link, 2, sb, now + T + 1.0);
    cr_assert_eq(ev.reason, VEER_LINK_CAPACITY, "%s", veer_link_reason_name(ev.reason));
    cr_assert_eq(veer_player_plan(p), last);
    cr_assert_eq(veer_plan_length(last), length);
    free(sb.bytes);
    free(b.bytes);
    free(mem);
}
