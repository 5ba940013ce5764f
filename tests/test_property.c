/* Property suite: random carts on random routes (fixed seeds), at least 2000
 * of them, planned and sampled every millisecond.
 *
 * For every case: the status is VEER_OK or a named refusal of the route
 * (ERR_INFEASIBLE, ERR_GEOMETRY) with a message; a plan has no NaN or
 * infinity in any sample; every limit holds within 1 %, checked by
 * veer_plan_check_limits and, independently, from the samples with formulas
 * of our own (sources beside each); steer angles are continuous (the angle
 * differenced over 1 ms respects the steer-rate limit, which the generator
 * always sets); the pose's time derivative is the sampled twist. For a
 * share of the plans, the cart side (veer_plan_load_pb, veer_plan_sample_pb,
 * the player) runs under a counting allocator and must not allocate.
 *
 * Half of the routes that start with a held-heading line start on the
 * move (a start twist along the line), as re-planning while driving does.
 *
 * The generator (splitmix64, fixed seeds) invents carts and routes; it only
 * makes requests a careful user could make (limits > 0, modules apart,
 * routes that say what they mean), so that a refusal other than the named
 * ones is a finding. VEER_PROPERTY_CASES (environment) scales the number of
 * cases down for slow runs (valgrind); the default is the full 2000+.
 * SPDX-License-Identifier: MIT */
#include <criterion/criterion.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <veer/veer.h>
#include <veer/link.h>
#include <veer/player.h>
#include <veer/wire.h>

#include "random_case.h"

/* ---- counting allocator around the cart side ----------------------------- */

static long alloc_calls;
static void *count_alloc(size_t size, void *ctx) {
    (void)ctx;
    alloc_calls++;
    return malloc(size);
}
static void count_free(void *ptr, size_t size, void *ctx) {
    (void)size, (void)ctx;
    free(ptr);
}

static double player_mem[1 << 19]; /* 4 MiB, aligned for double */
static double plan_work[1 << 17];  /* 1 MiB */
static uint8_t plan_bytes[VEER_LINK_MAX_PLAN_BYTES];

/* Encodes the plan (ground side), then on the cart side with the counting
 * allocator: loads it, samples it every millisecond and through
 * veer_plan_sample_pb, and runs it through a player at 50 Hz from START to
 * its end. Returns the allocations the cart side made. */
static long cart_side_allocations(const veer_plan *plan, const case_def *c, int index) {
    size_t n = 0;
    veer_diag diag;
    veer_status st = veer_plan_encode_pb(plan, plan_bytes, sizeof plan_bytes, &n, &diag);
    cr_assert_eq(st, VEER_OK, "case %d: encode: %s: %s", index, veer_status_name(st), diag.message);
    cr_assert(veer_plan_workspace_size() <= sizeof plan_work);
    cr_assert(veer_player_size() <= sizeof player_mem);
    veer_player_def def = veer_default_player_def();
    def.link.cart = 3;
    for (int i = 0; i < VEER_LINK_KEY_BYTES; i++) def.link.key[i] = (uint8_t)(0x3c + 11 * i);
    def.drive = c->drive;
    def.limits = c->limits;
    veer_link_sender *tx = NULL;
    cr_assert_eq(veer_link_sender_create(&def.link, (uint64_t)index + 1, plan_bytes, n, &tx, &diag), VEER_OK, "%s",
                 diag.message);
    uint8_t frames[64][VEER_LINK_FRAME_MAX];
    size_t sizes[64];
    int count = veer_link_sender_chunk_count(tx);
    cr_assert(count >= 1 && count <= 64, "case %d: %d chunks", index, count);
    for (int k = 0; k < count; k++)
        cr_assert_eq(veer_link_sender_frame(tx, k, frames[k], sizeof frames[k], &sizes[k]), VEER_OK);
    uint8_t start[VEER_LINK_FRAME_MAX];
    size_t start_size = 0;
    cr_assert_eq(veer_link_command_frame(&def.link, 1, VEER_LINK_COMMAND_START, (uint64_t)index + 1, start,
                                         sizeof start, &start_size),
                 VEER_OK);
    veer_link_sender_destroy(tx);

    cr_assert_eq(veer_set_allocator(count_alloc, count_free, NULL), VEER_OK);
    alloc_calls = 0;
    const veer_plan *p = NULL;
    st = veer_plan_load_pb(plan_bytes, n, plan_work, sizeof plan_work, &p, &diag);
    int ok = st == VEER_OK;
    double T = ok ? veer_plan_duration(p) : 0.0;
    veer_sample s;
    int bad = 0;
    for (double t = 0.0; ok && t <= T; t += DT) bad += veer_plan_sample(p, t, &s) != VEER_OK || !sample_finite(&s);
    for (int k = 0; ok && k <= 4; k++) bad += veer_plan_sample_pb(plan_bytes, n, T * k / 4.0, &s) != VEER_OK;
    veer_player *pl = NULL;
    int armed = 0, ran = 0;
    if (veer_player_init(player_mem, sizeof player_mem, &def, &pl, &diag) == VEER_OK) {
        double now = 0.0;
        veer_player_event ev;
        for (int k = 0; k < count; k++) {
            bad += veer_player_frame(pl, frames[k], sizes[k], now, &ev) != VEER_OK;
            armed |= ev.armed;
        }
        bad += veer_player_frame(pl, start, start_size, now, &ev) != VEER_OK;
        ran = ev.started;
        /* The plan runs to its end within the link timeout only if it is
         * short; heartbeats are not needed for the property, so the run
         * stops at the plan's end or at link loss, both controlled. */
        for (int k = 0; k < 50 * 600 && now < T + 2.0; k++) {
            now += 0.02;
            bad += veer_player_step(pl, now, &s) != VEER_OK || !sample_finite(&s);
        }
    }
    long calls = alloc_calls;
    cr_assert_eq(veer_set_allocator(NULL, NULL, NULL), VEER_OK);
    cr_assert(ok, "case %d: the cart cannot load its plan: %s: %s", index, veer_status_name(st), diag.message);
    cr_assert_eq(bad, 0, "case %d: %d cart-side calls failed or gave non-finite values", index, bad);
    cr_assert(armed && ran, "case %d: the player did not arm (%d) or start (%d) the plan", index, armed, ran);
    return calls;
}

/* ---- the property runs -------------------------------------------------- */

typedef struct {
    int cases, ok, infeasible, geometry, cart_checked;
    int moving, moving_ok, moving_jerk; /* cases planned on the move; how many planned; with jerk limits */
    int over_check, over_dense, bad_kin, bad_pose; /* cases that broke a property */
    double worst, worst_check, kin_err, pose_err;
    int worst_case;
} tally;

static int cases_for(int full) {
    const char *e = getenv("VEER_PROPERTY_CASES");
    if (!e || !*e) return full;
    long total = strtol(e, NULL, 10); /* spread over the 2000 of the full run */
    if (total <= 0 || total >= 2000) return full;
    int n = (int)(full * total / 2000);
    return n < 1 ? 1 : n;
}

static const char *kind_name(veer_drive_kind k) {
    return k == VEER_DRIVE_STEERED ? "steered" : k == VEER_DRIVE_MECANUM ? "mecanum" : k == VEER_DRIVE_OMNI ? "omni"
                                                                                                          : "differential";
}

/* Plans and checks every case, then fails with a summary if any case broke
 * a property (so one run shows how many, and which: seed and case index
 * reproduce each). Statuses, NaNs and cart-side allocations fail at once. */
static void run_cases(veer_drive_kind kind, uint64_t seed, int full, tally *tl) {
    int n = cases_for(full), shown = 0;
    memset(tl, 0, sizeof *tl);
    for (int k = 0; k < n; k++) {
        rng r = {seed + 7919u * (uint64_t)k};
        case_def c;
        memset(&c, 0, sizeof c);
        random_cart(&r, kind, &c);
        cr_assert(random_route(&r, &c), "case %d: the generator overfilled the route", k);
        tl->cases++;
        tl->moving += c.moving;
        veer_plan *p = NULL;
        veer_diag diag;
        veer_status st = veer_plan_create(&c.drive, &c.limits, &c.route, &c.options, &p, &diag);
        if (st != VEER_OK) {
            cr_assert(st == VEER_ERR_INFEASIBLE || st == VEER_ERR_GEOMETRY,
                      "%s seed %#llx case %d: %s is not a named refusal of the route: %s", kind_name(kind),
                      (unsigned long long)seed, k, veer_status_name(st), diag.message);
            cr_assert(diag.message[0] != 0 && p == NULL, "case %d: refusal without a message", k);
            cr_assert(diag.leg >= 0 || diag.waypoint >= 0 || diag.limit.kind != VEER_LIMIT_NONE,
                      "case %d: refusal (%s) names no leg, waypoint or limit: %s", k, veer_status_name(st),
                      diag.message);
            if (st == VEER_ERR_INFEASIBLE) tl->infeasible++;
            else tl->geometry++;
            continue;
        }
        tl->ok++;
        tl->moving_ok += c.moving;
        tl->moving_jerk += c.moving && c.jerk;
        double T = veer_plan_duration(p);
        cr_assert(isfinite(T) && T > 0.0 && T < 3600.0, "case %d: duration %g", k, T);

        veer_check_report rep;
        cr_assert_eq(veer_plan_check_limits(p, DT, &rep), VEER_OK);
        cr_assert(isfinite(rep.worst), "case %d: veer_plan_check_limits gave %g", k, rep.worst);
        dense_result dr = dense_check(p, &c);
        cr_assert_eq(dr.nan, 0, "case %d: %d samples failed or had a NaN", k, dr.nan);
        cr_assert(dr.samples > 0);

        int broke = 0;
        char why[256] = "";
        if (rep.worst > 1.0 + TOL) {
            char name[48];
            (void)veer_limit_name(rep.limit, name, sizeof name);
            tl->over_check++;
            broke = 1;
            snprintf(why + strlen(why), sizeof why - strlen(why), " check_limits: %s %.4f at t=%.3f s;", name,
                     rep.worst, rep.t);
        }
        if (dr.limit.worst > 1.0 + TOL) {
            tl->over_dense++;
            broke = 1;
            snprintf(why + strlen(why), sizeof why - strlen(why), " samples: %s %.4f at t=%.3f s;", dr.limit.worst_name,
                     dr.limit.worst, dr.limit.worst_t);
        }
        /* Kinematics: the module setpoints are the textbook ones for the
         * sampled twist (1e-6 of the wheel-rate limit, or 1e-6 rad). */
        if (dr.kin_err >= 1e-6) {
            tl->bad_kin++;
            broke = 1;
            snprintf(why + strlen(why), sizeof why - strlen(why), " kinematics off by %.3g;", dr.kin_err);
        }
        /* Pose against twist, beyond the trapezoid rule's own error: 1e-4
         * (m/s or rad/s) leaves room for smooth jerk (h^2/12 * 1200 m/s^3). */
        if (dr.pose_err >= 1e-4) {
            tl->bad_pose++;
            broke = 1;
            snprintf(why + strlen(why), sizeof why - strlen(why), " pose/twist off by %.3g (axis %d, t=%.3f s);",
                     dr.pose_err, dr.pose_axis, dr.pose_t);
        }
        if (broke && shown++ < 12)
            cr_log_error("%s seed %#llx case %d (%.1f s, %d legs%s%s%s):%s", kind_name(kind),
                         (unsigned long long)seed, k, T, c.route.leg_count, c.jerk ? ", jerk" : "",
                         isfinite(c.limits.modules[0].traction_mu) ? ", traction" : "", c.moving ? ", moving" : "",
                         why);
        if (rep.worst > tl->worst_check) tl->worst_check = rep.worst;
        if (dr.limit.worst > tl->worst) {
            tl->worst = dr.limit.worst;
            tl->worst_case = k;
        }
        if (dr.kin_err > tl->kin_err) tl->kin_err = dr.kin_err;
        if (dr.pose_err > tl->pose_err) tl->pose_err = dr.pose_err;

        if (tl->ok % 10 == 1) {
            long calls = cart_side_allocations(p, &c, k);
            cr_assert_eq(calls, 0, "case %d: the cart side allocated %ld times", k, calls);
            tl->cart_checked++;
        }
        veer_plan_destroy(p);
    }
    /* A line for the log (cr_log_warn would make Criterion exit non-zero). */
    fprintf(stderr, "property: %s: %d cases, %d planned, %d infeasible, %d refused geometry; worst limit ratio %.4f (samples, "
                "case %d), %.4f (veer_plan_check_limits); kinematics %.2g, pose %.2g; cart side checked on %d plans; "
                "on the move: %d cases, %d planned, %d of them jerk-limited\n",
                kind_name(kind), tl->cases, tl->ok, tl->infeasible, tl->geometry, tl->worst, tl->worst_case,
                tl->worst_check, tl->kin_err, tl->pose_err, tl->cart_checked, tl->moving, tl->moving_ok,
                tl->moving_jerk);
    /* The generator makes routes a careful user would: most of them must
     * plan, or the property says little. A share of fewer than 10 cases
     * (memcheck's cut-down run, VEER_PROPERTY_CASES) says nothing either
     * way; the full run judges it. */
    if (tl->cases >= 10)
        cr_assert(tl->ok >= (tl->cases * 7) / 10, "only %d of %d random cases planned", tl->ok, tl->cases);
    cr_assert(tl->cart_checked >= 1);
    cr_expect(tl->over_check == 0 && tl->over_dense == 0,
              "%s: limits exceeded by more than 1 %% in %d of %d plans (veer_plan_check_limits) and %d (own "
              "checks); worst %.4f / %.4f",
              kind_name(kind), tl->over_check, tl->ok, tl->over_dense, tl->worst_check, tl->worst);
    cr_expect(tl->bad_kin == 0, "%s: setpoints disagree with the kinematics in %d plans (worst %.3g)", kind_name(kind),
              tl->bad_kin, tl->kin_err);
    cr_expect(tl->bad_pose == 0, "%s: pose does not integrate the twist in %d plans (worst %.3g)", kind_name(kind),
              tl->bad_pose, tl->pose_err);
}

/* 2000 cases in all: steered carts have the most freedom, so the most cases. */
Test(property, steered, .timeout = 1200) {
    tally t;
    run_cases(VEER_DRIVE_STEERED, 0x5eed0001u, 800, &t);
}

Test(property, mecanum, .timeout = 1200) {
    tally t;
    run_cases(VEER_DRIVE_MECANUM, 0x5eed0002u, 400, &t);
}

Test(property, omni, .timeout = 1200) {
    tally t;
    run_cases(VEER_DRIVE_OMNI, 0x5eed0003u, 400, &t);
}

Test(property, differential, .timeout = 1200) {
    tally t;
    run_cases(VEER_DRIVE_DIFFERENTIAL, 0x5eed0004u, 400, &t);
}

/* Re-planning on the move with jerk limits, on 120 more cases: the first
 * stretch holds the start speed for half the averaging window (plan.c), a
 * path the random runs take only a few times. */
Test(property, moving_jerk, .timeout = 1200) {
    tally t;
    force_moving_jerk = 1;
    run_cases(VEER_DRIVE_STEERED, 0x5eed0011u, 60, &t);
    if (t.cases >= 10) /* as in run_cases: a cut-down run is not judged */
        cr_expect(t.moving_jerk >= t.cases / 2, "only %d of %d steered cases planned on the move with jerk limits",
                  t.moving_jerk, t.cases);
    run_cases(VEER_DRIVE_MECANUM, 0x5eed0012u, 30, &t);
    run_cases(VEER_DRIVE_OMNI, 0x5eed0013u, 30, &t);
    force_moving_jerk = 0;
}

/* The independent checks can fail: a plan sampled against tighter limits
 * than it was made for must show the excess, and a wrong wheel radius must
 * show in the kinematics. */
Test(property, checks_catch_violations) {
    rng r = {0xc0ffee};
    case_def c;
    memset(&c, 0, sizeof c);
    random_cart(&r, VEER_DRIVE_STEERED, &c);
    c.jerk = 0;
    c.limits.body_jerk = VEER_UNLIMITED;
    for (int i = 0; i < VEER_MAX_MODULES; i++) c.limits.modules[i].wheel_jerk = VEER_UNLIMITED;
    c.route = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&c.route, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(6.0, 0.0);
    cr_assert_eq(veer_route_add_waypoint(&c.route, &w), VEER_OK);
    c.options = veer_default_plan_options();
    veer_plan *p = NULL;
    veer_diag diag;
    cr_assert_eq(veer_plan_create(&c.drive, &c.limits, &c.route, &c.options, &p, &diag), VEER_OK, "%s", diag.message);
    dense_result dr = dense_check(p, &c);
    cr_assert(dr.limit.worst <= 1.0 + TOL && dr.limit.worst > 0.5);
    case_def tight = c;
    for (int i = 0; i < VEER_MAX_MODULES; i++) {
        tight.limits.modules[i].wheel_rate *= 0.9;
        tight.limits.modules[i].wheel_accel *= 0.9;
        tight.limits.modules[i].steer_rate *= 0.9;
    }
    tight.limits.body_speed *= 0.9;
    tight.limits.body_accel *= 0.9;
    tight.limits.yaw_rate *= 0.9;
    tight.limits.yaw_accel *= 0.9;
    dr = dense_check(p, &tight);
    cr_assert(dr.limit.worst > 1.0 + TOL, "10 %% tighter limits went unnoticed (%.4f)", dr.limit.worst);
    case_def wrong = c;
    wrong.drive.wheel_radius *= 1.01;
    dr = dense_check(p, &wrong);
    cr_assert(dr.kin_err > 1e-4, "a 1 %% wrong wheel radius went unnoticed (%g)", dr.kin_err);
    veer_plan_destroy(p);
}
