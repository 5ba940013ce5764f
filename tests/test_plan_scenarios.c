/* Scenario suite: plans for every drive kind and leg kind, sampled every
 * millisecond: every limit within 1 %, no NaN, steer angles continuous
 * (the angle differenced in time respects the steer-rate limit), and the
 * module setpoints agree with the drive's own forward kinematics.
 * The scenarios are invented test data. */
#include <criterion/criterion.h>
#include <math.h>
#include <stdlib.h>
#include <veer/veer.h>
#include "plan_check.h"

#define PI 3.14159265358979323846

static void set_modules(veer_limits *l, int n, double rate, double accel, double steer) {
    for (int i = 0; i < n; i++) {
        l->modules[i].wheel_rate = rate;
        l->modules[i].wheel_accel = accel;
        l->modules[i].steer_rate = steer;
    }
}

static void travel(veer_route *r, veer_heading_kind h, double tol) {
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    leg.heading = h;
    leg.corner_tolerance = tol;
    cr_assert_eq(veer_route_add_leg(r, &leg), VEER_OK);
}

static void wp(veer_route *r, double x, double y, int stop) {
    veer_waypoint w = veer_default_waypoint(x, y);
    w.stop = stop;
    cr_assert_eq(veer_route_add_waypoint(r, &w), VEER_OK);
}

/* Forward kinematics of the sampled setpoints must give back the sampled
 * body twist (rigid body; least squares where over-actuated). */
static void check_forward(const veer_plan *p, const veer_drive_def *d) {
    int M = veer_plan_module_count(p);
    for (double t = 0.0; t <= veer_plan_duration(p); t += 0.0137) {
        veer_sample s;
        cr_assert_eq(veer_plan_sample(p, t, &s), VEER_OK);
        if (s.phase != VEER_PHASE_MOVING) continue;
        double steer[VEER_MAX_MODULES], rate[VEER_MAX_MODULES], tw[3];
        for (int i = 0; i < M; i++) {
            steer[i] = s.modules[i].steer;
            rate[i] = s.modules[i].wheel_rate;
        }
        cr_assert_eq(veer_drive_forward(d, steer, rate, tw), VEER_OK);
        double scale = 1.0 + fabs(s.twist_body[0]) + fabs(s.twist_body[1]) + fabs(s.twist_body[2]);
        for (int a = 0; a < 3; a++)
            cr_assert(fabs(tw[a] - s.twist_body[a]) < 1e-6 * scale, "t=%g axis %d: forward %g, sampled %g", t, a,
                      tw[a], s.twist_body[a]);
    }
}

static veer_plan *plan_and_check(const veer_drive_def *d, const veer_limits *l, const veer_route *r) {
    veer_plan *p = NULL;
    veer_diag diag;
    veer_status st = veer_plan_create(d, l, r, NULL, &p, &diag);
    cr_assert_eq(st, VEER_OK, "plan failed: %s: %s", veer_status_name(st), diag.message);
    assert_plan_within_limits(p, d, l, 0.01);
    check_forward(p, d);
    return p;
}

/* The demo's kind of route: cross a lane facing a point, stop, pivot out. */
Test(scenarios, steered_toward_then_pivot) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    set_modules(&l, 4, 25.0, 30.0, 4.0);
    for (int i = 0; i < 4; i++) {
        l.modules[i].steer_min = -1.5 * PI;
        l.modules[i].steer_max = 1.5 * PI;
    }
    l.body_speed = 2.2;
    l.body_accel = 2.0;
    l.yaw_rate = 1.5;
    l.yaw_accel = 3.0;
    veer_route r = veer_default_route(-12.0, 0.5, atan2(-40.5, 12.0));
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    leg.heading = VEER_HEADING_TOWARD;
    leg.toward_x = 0.0;
    leg.toward_y = -40.0;
    leg.corner_tolerance = 0.4;
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    wp(&r, -6.0, 2.0, 0);
    wp(&r, 1.0, 2.0, 0);
    wp(&r, 6.5, 0.0, 1);
    veer_leg pv = veer_default_leg(VEER_LEG_PIVOT);
    pv.pivot_x = 8.5;
    pv.pivot_y = -0.5;
    pv.angle = -0.9;
    cr_assert_eq(veer_route_add_leg(&r, &pv), VEER_OK);
    veer_plan *p = plan_and_check(&d, &l, &r);
    /* toward heading: the body faces the point all along the first leg (geometry) */
    veer_leg_summary ls;
    cr_assert_eq(veer_plan_leg(p, 0, &ls), VEER_OK);
    for (double t = ls.start; t < ls.start + ls.duration; t += 0.05) {
        veer_sample s;
        cr_assert_eq(veer_plan_sample(p, t, &s), VEER_OK);
        double want = atan2(-40.0 - s.pose[1], 0.0 - s.pose[0]);
        double err = remainder(s.pose[2] - want, 2.0 * PI);
        cr_assert(fabs(err) < 0.09, "t=%g yaw %g, facing %g", t, s.pose[2], want); /* 5-degree start fade */
    }
    veer_plan_destroy(p);
}

Test(scenarios, mecanum_blend_heading_with_corners) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_MECANUM);
    veer_limits l = veer_default_limits();
    set_modules(&l, 4, 20.0, 25.0, VEER_UNLIMITED);
    l.body_speed = 1.8;
    l.yaw_rate = 1.0;
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    leg.heading = VEER_HEADING_BLEND;
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(3.0, 0.0);
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    w = veer_default_waypoint(3.0, 3.0);
    w.has_yaw = 1;
    w.yaw = 1.2;
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    w = veer_default_waypoint(0.0, 4.0);
    w.has_yaw = 1;
    w.yaw = -0.5;
    w.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    veer_plan *p = plan_and_check(&d, &l, &r);
    veer_plan_destroy(p);
}

Test(scenarios, omni_tangent_heading) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_OMNI);
    veer_limits l = veer_default_limits();
    set_modules(&l, 3, 18.0, 30.0, VEER_UNLIMITED);
    l.body_accel = 1.5;
    l.yaw_accel = 4.0;
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    travel(&r, VEER_HEADING_TANGENT, 0.3);
    wp(&r, 4.0, 0.0, 0);
    wp(&r, 6.0, 3.0, 0);
    wp(&r, 9.0, 3.0, 1);
    veer_plan *p = plan_and_check(&d, &l, &r);
    veer_plan_destroy(p);
}

Test(scenarios, skid_steer_tangent_and_spin) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_DIFFERENTIAL);
    d.skid_factor = 1.4;
    veer_limits l = veer_default_limits();
    set_modules(&l, 2, 15.0, 20.0, VEER_UNLIMITED);
    l.body_speed = 1.2;
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    travel(&r, VEER_HEADING_TANGENT, 0.5);
    wp(&r, 5.0, 0.0, 0);
    wp(&r, 7.0, 2.0, 1);
    veer_leg spin = veer_default_leg(VEER_LEG_SPIN);
    spin.yaw = PI;
    cr_assert_eq(veer_route_add_leg(&r, &spin), VEER_OK);
    travel(&r, VEER_HEADING_TANGENT, 0.5);
    wp(&r, 3.0, 2.0, 1);
    veer_plan *p = plan_and_check(&d, &l, &r);
    veer_plan_destroy(p);
}

/* Turning while translating puts the instantaneous centre of rotation close
 * to the modules; the steer-rate limit must slow the body there and be the
 * binding limit on part of the path. */
Test(scenarios, steered_icr_near_a_module) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    set_modules(&l, 4, 30.0, 40.0, 2.0);
    l.body_speed = 1.5;
    l.body_accel = 2.0;
    l.yaw_rate = 3.0;
    l.yaw_accel = 6.0;
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    leg.heading = VEER_HEADING_BLEND;
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(1.2, 0.0);
    w.has_yaw = 1;
    w.yaw = 2.5; /* 2.5 rad over 1.2 m: ICR about 0.5 m from the centre */
    w.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    veer_plan *p = plan_and_check(&d, &l, &r);
    int steer_bound = 0;
    for (int k = 0; k < veer_plan_grid_count(p); k++) {
        veer_limit_id id;
        cr_assert_eq(veer_plan_grid(p, k, NULL, NULL, &id), VEER_OK);
        steer_bound += id.kind == VEER_LIMIT_STEER_RATE;
    }
    cr_assert(steer_bound > 0, "steer rate never binds");
    veer_plan_destroy(p);
}

/* Cabled modules (steer range +-270 degrees) driving around a square with the
 * heading held: the modules' angles sweep 90 degrees a corner.
 * One lap (360 degrees) fits only if the modules start reversed (at -180):
 * the re-steer phase takes that reverse choice, 180 degrees at 3 rad/s.
 * Two laps (720 degrees) do not fit: refused naming the steer range; with a
 * stop after the first lap the modules re-steer there and the plan fits. */
Test(scenarios, steer_range_of_cabled_modules) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    set_modules(&l, 4, 30.0, 40.0, 3.0);
    for (int i = 0; i < 4; i++) {
        l.modules[i].steer_min = -1.5 * PI;
        l.modules[i].steer_max = 1.5 * PI;
    }
    l.body_speed = 1.5;
    l.body_accel = 1.5;
    static const double lap[4][2] = {{3.0, 0.0}, {3.0, 3.0}, {0.0, 3.0}, {0.0, 0.0}};

    veer_route one = veer_default_route(0.0, 0.0, 0.0);
    travel(&one, VEER_HEADING_HOLD, 0.3);
    for (int k = 0; k < 4; k++) wp(&one, lap[k][0], lap[k][1], 0);
    wp(&one, 3.0, 0.0, 1);
    veer_plan *p = plan_and_check(&d, &l, &one);
    veer_leg_summary ls;
    cr_assert_eq(veer_plan_leg(p, 0, &ls), VEER_OK);
    /* the plan keeps its angles as floats: -pi within 2^-24 pi (2e-7 rad), 1e-7 s at 3 rad/s */
    cr_assert_float_eq(ls.resteer_time, PI / 3.0, 1e-7, "start re-steer %g s", ls.resteer_time);
    veer_sample s;
    cr_assert_eq(veer_plan_sample(p, ls.resteer_time + 0.5, &s), VEER_OK);
    cr_assert(s.modules[0].wheel_rate < 0.0, "wheel should run reversed");
    veer_plan_destroy(p);

    veer_route two = veer_default_route(0.0, 0.0, 0.0);
    travel(&two, VEER_HEADING_HOLD, 0.3);
    for (int k = 0; k < 8; k++) wp(&two, lap[k % 4][0], lap[k % 4][1], 0);
    wp(&two, 3.0, 0.0, 1);
    p = NULL;
    veer_diag diag;
    veer_status st = veer_plan_create(&d, &l, &two, NULL, &p, &diag);
    cr_assert_eq(st, VEER_ERR_INFEASIBLE, "got %s", veer_status_name(st));
    cr_assert_null(p);
    cr_assert_eq(diag.limit.kind, VEER_LIMIT_STEER_RANGE);
    cr_assert_eq(diag.leg, 0);
    cr_assert(diag.s > 0.0 && diag.message[0]);

    two.waypoints[3].stop = 1; /* back at (0, 0) after one lap: stop and re-steer */
    p = plan_and_check(&d, &l, &two);
    veer_plan_destroy(p);
}

/* A 50 Hz table: rows every 20 ms from 0 to the duration, identical to
 * sampling at those times. */
Test(scenarios, table_matches_samples) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    set_modules(&l, 4, 25.0, 30.0, 4.0);
    l.body_speed = 2.0;
    l.body_accel = 1.5;
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    travel(&r, VEER_HEADING_HOLD, 0.3);
    wp(&r, 2.0, 0.0, 0);
    wp(&r, 3.0, 1.5, 1);
    veer_plan *p = plan_and_check(&d, &l, &r);
    size_t n = 0;
    cr_assert_eq(veer_plan_table(p, 50.0, NULL, 0, &n), VEER_ERR_BUFFER);
    double T = veer_plan_duration(p);
    cr_assert(n >= (size_t)floor(T * 50.0) + 1 && n <= (size_t)floor(T * 50.0) + 2);
    veer_sample *rows = calloc(n, sizeof *rows);
    size_t got = 0;
    cr_assert_eq(veer_plan_table(p, 50.0, rows, n, &got), VEER_OK);
    cr_assert_eq(got, n);
    cr_assert_float_eq(rows[n - 1].t, T, 1e-12);
    for (size_t k = 0; k + 1 < n; k++) {
        cr_assert_float_eq(rows[k].t, k * 0.02, 1e-9);
        veer_sample s;
        cr_assert_eq(veer_plan_sample(p, rows[k].t, &s), VEER_OK);
        cr_assert_eq(memcmp(&s, &rows[k], sizeof s), 0, "row %zu differs from the sample", k);
    }
    free(rows);
    veer_plan_destroy(p);
}
