/* The limits real carts have and scripted timing: traction, motor curves,
 * timed stops and duration targets, modules out of service, re-planning on
 * the move. Scenarios are invented test data; each check names its source. */
#include <criterion/criterion.h>
#include <math.h>
#include <veer/veer.h>
#include "plan_check.h"
#include "kestrel_demo.h"

#define PI 3.14159265358979323846
#define G0 9.80665 /* standard gravity, m/s^2 (3rd CGPM, 1901) */

static veer_route line(double D, double dwell) {
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(D, 0.0);
    w.stop = 1;
    w.dwell = dwell;
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    return r;
}

static veer_plan *must_plan(const veer_drive_def *d, const veer_limits *l, const veer_route *r,
                            const veer_plan_options *o) {
    veer_plan *p = NULL;
    veer_diag diag;
    veer_status st = veer_plan_create(d, l, r, o, &p, &diag);
    cr_assert_eq(st, VEER_OK, "%s: %s", veer_status_name(st), diag.message);
    return p;
}

/* World acceleration of the contact point of a module at body offset (x, y):
 * a + alpha k x r - w^2 r (rigid-body kinematics). */
static double contact_accel(const veer_sample *s, double x, double y) {
    double c = cos(s->pose[2]), sn = sin(s->pose[2]);
    double rx = c * x - sn * y, ry = sn * x + c * y, w = s->twist_world[2], al = s->accel_world[2];
    return hypot(s->accel_world[0] - al * ry - w * w * rx, s->accel_world[1] + al * rx - w * w * ry);
}

/* Uniform circular motion needs v^2 / R <= mu g (any physics text). With the
 * heading held every module shares the body's acceleration, so the planned
 * cruise on a long arc is sqrt(mu g R). */
Test(real_limits, traction_on_a_long_arc) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    const double mu = 0.8, R = 10.0;
    for (int i = 0; i < 4; i++) l.modules[i].traction_mu = mu;
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg orbit = veer_default_leg(VEER_LEG_PIVOT);
    orbit.pivot_x = 0.0;
    orbit.pivot_y = R;
    orbit.angle = 1.5 * PI;
    orbit.hold_yaw = 1;
    cr_assert_eq(veer_route_add_leg(&r, &orbit), VEER_OK);
    veer_plan *p = must_plan(&d, &l, &r, NULL);
    double want = sqrt(mu * G0 * R);
    veer_sample s;
    cr_assert_eq(veer_plan_sample(p, 0.5 * veer_plan_duration(p), &s), VEER_OK);
    double v = hypot(s.twist_world[0], s.twist_world[1]);
    cr_assert(fabs(v - want) <= 0.01 * want, "arc speed %.4f m/s, sqrt(mu g R) %.4f m/s", v, want);
    cr_assert_float_eq(s.pose[2], 0.0, 1e-12, "heading held");
    /* every millisecond: no contact point beyond mu g */
    for (double t = 0.0; t <= veer_plan_duration(p); t += 1e-3) {
        cr_assert_eq(veer_plan_sample(p, t, &s), VEER_OK);
        for (int i = 0; i < 4; i++) {
            double a = contact_accel(&s, d.modules[i].x, d.modules[i].y);
            cr_assert(a <= mu * G0 * 1.01, "t %.3f module %d: %.4f m/s^2 > mu g", t, i, a);
        }
    }
    veer_plan_destroy(p);
}

/* A DC motor's torque-speed line: driving in the direction the wheel turns,
 * the acceleration available falls from stall at rest to zero at free speed
 * (any electric machines text). Dense sampling: no module beyond its curve. */
Test(real_limits, motor_curve_holds_everywhere) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_MECANUM);
    veer_limits l = veer_default_limits();
    const double A = 40.0, wf = 30.0;
    for (int i = 0; i < 4; i++) {
        l.modules[i].motor_stall_accel = A;
        l.modules[i].motor_free_rate = wf;
    }
    l.yaw_rate = 1.0;
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    leg.heading = VEER_HEADING_BLEND;
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(6.0, 0.0);
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    w = veer_default_waypoint(8.0, 4.0);
    w.stop = 1;
    w.has_yaw = 1;
    w.yaw = 0.8;
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    veer_plan *p = must_plan(&d, &l, &r, NULL);
    double worst = 0.0, peak = 0.0;
    veer_sample s;
    for (double t = 0.0; t <= veer_plan_duration(p); t += 1e-3) {
        cr_assert_eq(veer_plan_sample(p, t, &s), VEER_OK);
        for (int i = 0; i < 4; i++) {
            double rate = s.modules[i].wheel_rate, acc = s.modules[i].wheel_accel;
            double driving = rate >= 0.0 ? acc : -acc; /* along the turning direction */
            double avail = A * (1.0 - fabs(rate) / wf);
            worst = fmax(worst, driving - avail);
            peak = fmax(peak, fabs(rate));
            cr_assert(fabs(acc) <= A * 1.01, "braking beyond stall");
        }
    }
    cr_assert(worst <= 0.01 * A, "a module exceeds its motor curve by %.4f rad/s^2", worst);
    cr_assert(peak <= wf * 1.001 && peak > 0.5 * wf, "peak wheel rate %.3f of free rate %.3f", peak, wf);
    veer_plan_destroy(p);
}

/* A timed stop: the fastest plan (7 s: Lynch & Park 9.2 trapezoid for D 10,
 * v 2, a 1) is slowed by a speed cap so the cart arrives at 9 s to within a
 * 50 Hz control period, still accelerating at its limit. */
Test(real_limits, timed_stop_is_met) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    l.body_speed = 2.0;
    l.body_accel = 1.0;
    veer_route r = line(10.0, 1.5);
    r.waypoints[0].timed = 1;
    r.waypoints[0].arrival = 9.0;
    veer_plan *p = must_plan(&d, &l, &r, NULL);
    veer_leg_summary ls;
    cr_assert_eq(veer_plan_leg(p, 0, &ls), VEER_OK);
    double arrival = ls.duration - ls.dwell_time;
    cr_assert(fabs(arrival - 9.0) < 0.02, "arrives at %.4f s", arrival);
    /* a cap v on the trapezoid: 10/v + v = 9 -> v = (9 - sqrt(41)) / 2 */
    double v = (9.0 - sqrt(41.0)) / 2.0, top = 0.0, acc = 0.0;
    veer_sample s;
    for (double t = 0.0; t < veer_plan_duration(p); t += 1e-3) {
        cr_assert_eq(veer_plan_sample(p, t, &s), VEER_OK);
        top = fmax(top, s.sdot);
        acc = fmax(acc, fabs(s.accel_world[0]));
    }
    cr_assert(fabs(top - v) < 0.005 * v, "cap %.4f, closed form %.4f", top, v);
    cr_assert(acc > 0.99, "still accelerates briskly (%.3f m/s^2)", acc);
    cr_assert_float_eq(veer_plan_duration(p), 10.5, 0.02);
    veer_plan_destroy(p);
}

Test(real_limits, impossible_timed_stop_reports_lateness) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    l.body_speed = 2.0;
    l.body_accel = 1.0;
    veer_route r = line(10.0, 0.0);
    r.waypoints[0].timed = 1;
    r.waypoints[0].arrival = 6.0;
    veer_plan *p = NULL;
    veer_diag diag;
    cr_assert_eq(veer_plan_create(&d, &l, &r, NULL, &p, &diag), VEER_ERR_LATE);
    cr_assert_null(p);
    cr_assert(fabs(diag.value - 1.0) < 0.005, "late by %.4f s, the trapezoid says 1 s", diag.value);
    cr_assert_eq(diag.limit.kind, VEER_LIMIT_BODY_SPEED, "blames %d", diag.limit.kind);
    cr_assert_eq(diag.waypoint, 0);
    cr_assert(strstr(diag.message, "too early") != NULL, "%s", diag.message);
    /* a pass-through waypoint cannot be timed */
    veer_route r2 = line(10.0, 0.0);
    veer_waypoint w = veer_default_waypoint(5.0, 0.0);
    w.timed = 1;
    w.arrival = 3.0;
    r2.waypoints[1] = r2.waypoints[0];
    r2.waypoints[0] = w;
    r2.waypoint_count = 2;
    r2.legs[0].waypoint_count = 2;
    cr_assert_eq(veer_plan_create(&d, &l, &r2, NULL, &p, &diag), VEER_ERR_VALUE);
}

/* Two timed stops and a whole-plan duration target. */
Test(real_limits, several_timed_stops_and_a_duration_target) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_OMNI);
    veer_limits l = veer_default_limits();
    l.body_speed = 2.0;
    l.body_accel = 1.0;
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint a = veer_default_waypoint(10.0, 0.0), b = veer_default_waypoint(10.0, 5.0);
    a.stop = b.stop = 1;
    a.dwell = 1.0;
    a.timed = b.timed = 1;
    a.arrival = 8.0;
    b.arrival = 16.0;
    cr_assert_eq(veer_route_add_waypoint(&r, &a), VEER_OK);
    cr_assert_eq(veer_route_add_waypoint(&r, &b), VEER_OK);
    veer_plan *p = must_plan(&d, &l, &r, NULL);
    cr_assert_float_eq(veer_plan_duration(p), 16.0, 0.02);
    veer_sample s;
    cr_assert_eq(veer_plan_sample(p, 8.0 + 0.5, &s), VEER_OK);
    cr_assert_eq(s.phase, VEER_PHASE_DWELL, "dwelling at the first stop from 8 s");
    cr_assert_eq(veer_plan_sample(p, 8.0 - 0.05, &s), VEER_OK);
    cr_assert_eq(s.phase, VEER_PHASE_MOVING);
    veer_plan_destroy(p);

    veer_plan_options o = veer_default_plan_options();
    o.duration_target = 12.0;
    veer_route one = line(10.0, 0.5);
    p = must_plan(&d, &l, &one, &o);
    cr_assert_float_eq(veer_plan_duration(p), 12.0, 0.02);
    veer_plan_destroy(p);
    o.duration_target = 5.0;
    veer_diag diag;
    cr_assert_eq(veer_plan_create(&d, &l, &one, &o, &p, &diag), VEER_ERR_LATE);
    cr_assert(fabs(diag.value - 2.5) < 0.02, "late by %g", diag.value); /* 7 + 0.5 - 5 */
}

/* Modules out of service. A steered cart re-plans on the rest; a skid-steer
 * cart with a side out is refused; a mecanum cart with its front-left wheel
 * off the floor keeps a single driven wheel on the front-right/rear-left
 * diagonal (45-degree rollers: a fact of the trade, common practice with no
 * source) and refuses a route that needs it. */
Test(real_limits, modules_out) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    d.modules[1].out = 1;
    veer_limits l = veer_default_limits();
    for (int i = 0; i < 4; i++) {
        l.modules[i].wheel_rate = 20.0;
        l.modules[i].wheel_accel = 25.0;
        l.modules[i].steer_rate = 4.0;
    }
    l.body_speed = 1.5;
    l.body_accel = 1.5;
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    leg.heading = VEER_HEADING_TOWARD;
    leg.toward_x = 0.0;
    leg.toward_y = -40.0;
    r.start_yaw = atan2(-40.0, 0.0);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(5.0, 1.0);
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    w = veer_default_waypoint(9.0, 0.0);
    w.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    veer_leg pv = veer_default_leg(VEER_LEG_PIVOT);
    pv.pivot_x = 10.0;
    pv.pivot_y = -1.0;
    pv.angle = -0.8;
    cr_assert_eq(veer_route_add_leg(&r, &pv), VEER_OK);
    veer_plan *p = must_plan(&d, &l, &r, NULL);
    assert_plan_within_limits(p, &d, &l, 0.01);
    veer_sample s;
    for (double t = 0.0; t <= veer_plan_duration(p); t += 0.05) {
        cr_assert_eq(veer_plan_sample(p, t, &s), VEER_OK);
        cr_assert_eq(s.modules[1].wheel_rate, 0.0, "the lifted module is not driven");
    }
    veer_plan_destroy(p);

    veer_drive_def skid = veer_default_drive_def(VEER_DRIVE_DIFFERENTIAL);
    skid.modules[0].out = 1;
    veer_diag diag;
    cr_assert_eq(veer_plan_create(&skid, &l, &r, NULL, &p, &diag), VEER_ERR_INFEASIBLE);
    cr_assert_eq(diag.limit.kind, VEER_LIMIT_MODULE_OUT);

    veer_drive_def mec = veer_default_drive_def(VEER_DRIVE_MECANUM);
    mec.modules[0].out = 1; /* front-left */
    int n = -1;
    const double fwd[3] = {1.0, 0.0, 0.0}, diag_fr[3] = {1.0, -1.0, 0.0}, diag_fl[3] = {1.0, 1.0, 0.0};
    cr_assert_eq(veer_drive_driven_wheels(&mec, fwd, &n), VEER_OK);
    cr_assert_eq(n, 3);
    cr_assert_eq(veer_drive_driven_wheels(&mec, diag_fr, &n), VEER_OK);
    cr_assert_eq(n, 1, "vx = -vy drives front-left and rear-right; one of them is out");
    cr_assert_eq(veer_drive_driven_wheels(&mec, diag_fl, &n), VEER_OK);
    cr_assert_eq(n, 2);
    veer_limits ml = veer_default_limits();
    ml.body_speed = 1.0;
    ml.body_accel = 1.0;
    veer_route dg = veer_default_route(0.0, 0.0, 0.0);
    veer_leg hold = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&dg, &hold), VEER_OK);
    w = veer_default_waypoint(3.0, -3.0); /* the lost diagonal */
    w.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&dg, &w), VEER_OK);
    cr_assert_eq(veer_plan_create(&mec, &ml, &dg, NULL, &p, &diag), VEER_ERR_INFEASIBLE);
    cr_assert_eq(diag.limit.kind, VEER_LIMIT_MODULE_OUT);
    cr_assert_eq(diag.leg, 0);
    dg.waypoints[0].y = 3.0; /* the other diagonal still has two driven wheels */
    p = must_plan(&mec, &ml, &dg, NULL);
    veer_plan_destroy(p);
}

/* Re-planning on the move: from a cart cruising at 2 m/s a route that
 * continues along the motion starts at that speed; one that turns away, or
 * leaves no room to stop (v^2 / 2a = 2 m needed), is refused and says so. */
Test(real_limits, replanning_on_the_move) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    l.body_speed = 2.0;
    l.body_accel = 1.0;
    veer_route r0 = line(10.0, 0.0);
    veer_plan *p0 = must_plan(&d, &l, &r0, NULL);
    veer_sample now;
    cr_assert_eq(veer_plan_sample(p0, 4.0, &now), VEER_OK);
    cr_assert_float_eq(now.twist_body[0], 2.0, 0.01);

    veer_route r = veer_default_route(now.pose[0], now.pose[1], now.pose[2]);
    r.has_start_twist = 1;
    for (int a = 0; a < 3; a++) r.start_twist[a] = now.twist_body[a];
    r.has_start_steer = 1;
    for (int i = 0; i < 4; i++) r.start_steer[i] = now.modules[i].steer;
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(14.0, 0.0);
    w.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    veer_plan *p = must_plan(&d, &l, &r, NULL);
    veer_sample s;
    cr_assert_eq(veer_plan_sample(p, 0.0, &s), VEER_OK);
    cr_assert_eq(s.phase, VEER_PHASE_MOVING, "no re-steer, no stop");
    cr_assert_float_eq(s.twist_body[0], now.twist_body[0], 1e-6);
    /* the rest of the way at the same limits: 8 m from 2 m/s = 8/2 + 2/(2*1) = 5 s (uniform motion, then
     * uniform deceleration; any physics text) */
    cr_assert(fabs(veer_plan_duration(p) - 5.0) < 0.025, "duration %.4f", veer_plan_duration(p));
    assert_plan_within_limits(p, &d, &l, 0.01);
    veer_plan_destroy(p);

    veer_diag diag;
    r.waypoints[0].y = 4.0; /* turns away from the motion */
    cr_assert_eq(veer_plan_create(&d, &l, &r, NULL, &p, &diag), VEER_ERR_INFEASIBLE);
    cr_assert_eq(diag.limit.kind, VEER_LIMIT_START_STATE);
    r.waypoints[0].y = 0.0;
    r.waypoints[0].x = now.pose[0] + 1.0; /* 1 m to stop from 2 m/s at 1 m/s^2 */
    cr_assert_eq(veer_plan_create(&d, &l, &r, NULL, &p, &diag), VEER_ERR_INFEASIBLE);
    cr_assert_eq(diag.limit.kind, VEER_LIMIT_START_STATE);
    cr_assert(strstr(diag.message, "room to stop") != NULL, "%s", diag.message);
    veer_plan_destroy(p0);
}

/* Jerk: averaging a trapezoid's bang-bang acceleration (0 -> a -> 0 -> -a ->
 * 0) over a window tau bounds the jerk by a / tau (the S-curve construction;
 * any motion-control text), so a body jerk limit J costs tau = a / J: the
 * D 10, v 2, a 1 line takes 7 + 1/2 s with J = 2 m/s^3 (veer aims 3 % below
 * the jerk limit, so 7 + 0.5 / 0.97 s). */
Test(real_limits, jerk_limit_on_a_line) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    l.body_speed = 2.0;
    l.body_accel = 1.0;
    l.body_jerk = 2.0;
    veer_route r = line(10.0, 0.0);
    veer_plan *p = must_plan(&d, &l, &r, NULL);
    double want = 7.0 + 0.5 / 0.97;
    cr_assert(fabs(veer_plan_duration(p) - want) < 0.015, "duration %.4f s, S-curve %.4f s", veer_plan_duration(p), want);
    veer_check_report rep;
    cr_assert_eq(veer_plan_check_limits(p, 1e-3, &rep), VEER_OK);
    cr_assert(rep.worst <= 1.01, "worst %.4f (kind %d)", rep.worst, rep.limit.kind);
    assert_plan_within_limits(p, &d, &l, 0.01);
    veer_plan_destroy(p);
}

/* Jerk limits for the body and every wheel on a curvy route with module
 * limits: sampled jerk within 1 % and every other limit still held. */
Test(real_limits, jerk_limits_on_curves) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    for (int i = 0; i < 4; i++) {
        l.modules[i].wheel_rate = 25.0;
        l.modules[i].wheel_accel = 30.0;
        l.modules[i].steer_rate = 4.0;
        l.modules[i].wheel_jerk = 120.0;
    }
    l.body_speed = 2.0;
    l.body_accel = 1.5;
    l.yaw_rate = 1.0;
    l.yaw_accel = 2.0;
    l.body_jerk = 4.0;
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
    veer_plan *fast = NULL;
    veer_limits nj = l;
    nj.body_jerk = VEER_UNLIMITED;
    for (int i = 0; i < 4; i++) nj.modules[i].wheel_jerk = VEER_UNLIMITED;
    cr_assert_eq(veer_plan_create(&d, &nj, &r, NULL, &fast, NULL), VEER_OK);
    veer_plan *p = must_plan(&d, &l, &r, NULL);
    veer_check_report rep;
    cr_assert_eq(veer_plan_check_limits(p, 1e-3, &rep), VEER_OK);
    char name[48];
    veer_limit_name(rep.limit, name, sizeof name);
    cr_assert(rep.worst <= 1.01, "worst %.4f at %s, t %.3f", rep.worst, name, rep.t);
    assert_plan_within_limits(p, &d, &l, 0.01);
    cr_assert(veer_plan_duration(p) > veer_plan_duration(fast));
    cr_log_info("jerk limits cost %.3f s", veer_plan_duration(p) - veer_plan_duration(fast));
    veer_plan_destroy(p);
    veer_plan_destroy(fast);
}

/* The demo route (examples/kestrel_demo.h) with one of the four modules out:
 * the cart re-plans on the other three and completes it within every limit. */
Test(real_limits, demo_route_with_a_module_out) {
    veer_drive_def d;
    veer_limits l;
    veer_route r;
    cr_assert_eq(kestrel_demo(&d, &l, &r), VEER_OK);
    for (int out = 0; out < 4; out++) {
        veer_drive_def lame = d;
        lame.modules[out].out = 1;
        veer_plan *p = must_plan(&lame, &l, &r, NULL);
        veer_check_report rep;
        cr_assert_eq(veer_plan_check_limits(p, 1e-3, &rep), VEER_OK);
        cr_assert(rep.worst <= 1.01, "module %d out: worst %.4f", out, rep.worst);
        veer_sample s;
        cr_assert_eq(veer_plan_sample(p, veer_plan_duration(p), &s), VEER_OK);
        cr_assert_eq(s.phase, VEER_PHASE_DONE);
        veer_plan_destroy(p);
    }
}
