/* Controlled stop along the path: braking distance and time against uniform
 * deceleration, limits held while braking, immediate stop at rest. */
#include <criterion/criterion.h>
#include <math.h>
#include <veer/veer.h>
#include "plan_check.h"

static veer_plan *line_plan(veer_drive_kind kind, double D, double v, double a) {
    veer_drive_def d = veer_default_drive_def(kind);
    veer_limits l = veer_default_limits();
    l.body_speed = v;
    l.body_accel = a;
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(D, 0.0);
    w.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    veer_plan *p = NULL;
    cr_assert_eq(veer_plan_create(&d, &l, &r, NULL, &p, NULL), VEER_OK);
    return p;
}

/* Uniform deceleration a from speed v stops in v^2 / (2a) and v / a (any
 * physics text). At t = 4 s on the 7 s trapezoid (D 10, v 2, a 1) the cart
 * cruises at 2 m/s at s = 6 m. */
Test(stop, straight_line_braking_distance) {
    veer_plan *p = line_plan(VEER_DRIVE_STEERED, 10.0, 2.0, 1.0);
    veer_stop_info in;
    cr_assert_eq(veer_plan_stop_info(p, 4.0, &in), VEER_OK);
    cr_assert_float_eq(in.sdot_start, 2.0, 1e-2);
    double v = in.sdot_start;
    cr_assert(fabs((in.s_end - in.s_start) - v * v / 2.0) < 2e-3, "distance %.5f, v^2/2a %.5f",
              in.s_end - in.s_start, v * v / 2.0);
    cr_assert(fabs(in.duration - v / 1.0) < 2e-3, "duration %.5f, v/a %.5f", in.duration, v);
    /* sampled: speed falls linearly, acceleration within the limit, rest at the end */
    veer_sample s;
    for (double tau = 0.0; tau <= in.duration + 0.5; tau += 1e-3) {
        cr_assert_eq(veer_plan_stop_sample(p, 4.0, tau, &s), VEER_OK);
        cr_assert(pc_finite_sample(&s));
        double acc = hypot(s.accel_world[0], s.accel_world[1]);
        cr_assert(acc <= 1.0 * 1.01, "tau %g: accel %g", tau, acc);
        if (tau < in.duration - 0.01) cr_assert(fabs(s.sdot - (v - tau)) < 2e-3, "tau %g sdot %g", tau, s.sdot);
    }
    cr_assert_eq(s.phase, VEER_PHASE_DONE);
    cr_assert_float_eq(s.pose[0], in.s_end, 1e-9);
    cr_assert_float_eq(s.sdot, 0.0, 0.0);
    veer_plan_destroy(p);
}

/* Stopping never goes past the path's own rest, and a stop while standing
 * (before the start, at the end) is immediate. */
Test(stop, at_rest_and_near_the_end) {
    veer_plan *p = line_plan(VEER_DRIVE_MECANUM, 10.0, 2.0, 1.0);
    veer_stop_info in;
    cr_assert_eq(veer_plan_stop_info(p, 0.0, &in), VEER_OK);
    cr_assert_float_eq(in.duration, 0.0, 1e-12);
    cr_assert_float_eq(in.s_end, 0.0, 1e-12);
    cr_assert_eq(veer_plan_stop_info(p, 100.0, &in), VEER_OK);
    cr_assert_float_eq(in.s_end, 10.0, 1e-9);
    cr_assert_eq(veer_plan_stop_info(p, 6.5, &in), VEER_OK);
    cr_assert(in.s_end <= 10.0 + 1e-12);
    cr_assert(in.duration <= 0.5 + 2e-3, "braking already: %g", in.duration);
    veer_sample s;
    cr_assert_eq(veer_plan_stop_sample(p, 6.5, 3.0, &s), VEER_OK);
    cr_assert_eq(s.phase, VEER_PHASE_DONE);
    cr_assert_eq(veer_plan_stop_info(p, (double)NAN, &in), VEER_ERR_VALUE);
    cr_assert_eq(veer_plan_stop_info(NULL, 1.0, &in), VEER_ERR_NULL);
    cr_assert_eq(veer_plan_stop_sample(p, 1.0, (double)NAN, &s), VEER_ERR_VALUE);
    veer_plan_destroy(p);
}

/* Braking on a curve with module limits: every limit holds while stopping,
 * from every 0.37 s of the plan, sampled every 5 ms. */
Test(stop, limits_hold_while_braking_on_curves) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    for (int i = 0; i < 4; i++) {
        l.modules[i].wheel_rate = 25.0;
        l.modules[i].wheel_accel = 30.0;
        l.modules[i].steer_rate = 4.0;
    }
    l.body_speed = 2.0;
    l.body_accel = 1.5;
    l.yaw_rate = 1.0;
    l.yaw_accel = 2.0;
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    leg.heading = VEER_HEADING_TANGENT;
    leg.corner_tolerance = 0.5;
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(4.0, 0.0);
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    w = veer_default_waypoint(6.0, 3.0);
    w.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    veer_plan *p = NULL;
    cr_assert_eq(veer_plan_create(&d, &l, &r, NULL, &p, NULL), VEER_OK);
    for (double t0 = 0.0; t0 < veer_plan_duration(p); t0 += 0.37) {
        veer_stop_info in;
        cr_assert_eq(veer_plan_stop_info(p, t0, &in), VEER_OK);
        veer_sample prev = {0}, s;
        for (double tau = 0.0; tau <= in.duration + 0.01; tau += 5e-3) {
            cr_assert_eq(veer_plan_stop_sample(p, t0, tau, &s), VEER_OK);
            cr_assert(pc_finite_sample(&s));
            cr_assert(hypot(s.accel_world[0], s.accel_world[1]) <= l.body_accel * 1.01);
            cr_assert(fabs(s.accel_world[2]) <= l.yaw_accel * 1.01, "yaw accel %g", s.accel_world[2]);
            cr_assert(fabs(s.twist_world[2]) <= l.yaw_rate * 1.01);
            for (int i = 0; i < 4; i++) {
                cr_assert(fabs(s.modules[i].wheel_accel) <= l.modules[i].wheel_accel * 1.01, "t0 %g tau %g", t0,
                          tau);
                cr_assert(fabs(s.modules[i].steer_rate) <= l.modules[i].steer_rate * 1.01);
                if (tau > 0.0)
                    cr_assert(fabs(s.modules[i].steer - prev.modules[i].steer) < 0.1, "steer jump while braking");
            }
            prev = s;
        }
    }
    veer_plan_destroy(p);
}
