/* Plan suite: durations against closed forms, dense sampling of every limit,
 * rigid-body facts on spins and pivots, bad input. */
#include <criterion/criterion.h>
#include <math.h>
#include <stdlib.h>
#include <veer/veer.h>
#include <veer/wire.h>
#include "plan_check.h"
#include "plan_internal.h"

#define PI 3.14159265358979323846

static veer_drive_def steered4(void) { return veer_default_drive_def(VEER_DRIVE_STEERED); }

static veer_route line_route(double D) {
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint wp = veer_default_waypoint(D, 0.0);
    wp.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&r, &wp), VEER_OK);
    return r;
}

static veer_plan *plan_ok(const veer_drive_def *d, const veer_limits *l, const veer_route *r) {
    veer_plan *p = NULL;
    veer_diag diag;
    veer_status st = veer_plan_create(d, l, r, NULL, &p, &diag);
    cr_assert_eq(st, VEER_OK, "plan failed: %s: %s", veer_status_name(st), diag.message);
    cr_assert_not_null(p);
    return p;
}

/* Closed-form rest-to-rest time on a line: T = D/v + v/a when D >= v^2/a,
 * else 2 sqrt(D/a) (trapezoidal / triangular profile; Lynch & Park, Modern
 * Robotics, 9.2). */
static double trapezoid_time(double D, double v, double a) { return D >= v * v / a ? D / v + v / a : 2.0 * sqrt(D / a); }

static void check_line(veer_drive_kind kind, double D, double v, double a, double expect) {
    veer_drive_def d = veer_default_drive_def(kind);
    veer_limits l = veer_default_limits();
    l.body_speed = v;
    l.body_accel = a;
    veer_route r = line_route(D);
    veer_plan *p = plan_ok(&d, &l, &r);
    double T = veer_plan_duration(p);
    cr_assert_float_eq(trapezoid_time(D, v, a), expect, 1e-12);
    cr_assert(fabs(T - expect) <= 0.005 * expect, "kind %d D=%g: duration %.5f s, closed form %.5f s", kind, D, T,
              expect);
    assert_plan_within_limits(p, &d, &l, 0.01);
    veer_plan_destroy(p);
}

Test(plan, trapezoid_D10_v2_a1_is_7s) {
    check_line(VEER_DRIVE_STEERED, 10.0, 2.0, 1.0, 7.0);
    check_line(VEER_DRIVE_MECANUM, 10.0, 2.0, 1.0, 7.0);
    check_line(VEER_DRIVE_OMNI, 10.0, 2.0, 1.0, 7.0);
    check_line(VEER_DRIVE_DIFFERENTIAL, 10.0, 2.0, 1.0, 7.0);
}

Test(plan, triangle_D1_v2_a1_is_2s) {
    check_line(VEER_DRIVE_STEERED, 1.0, 2.0, 1.0, 2.0);
    check_line(VEER_DRIVE_MECANUM, 1.0, 2.0, 1.0, 2.0);
}

/* Wheel limits alone on a line: tread speed W r and acceleration A r, the
 * same closed form (Lynch & Park 9.2). */
Test(plan, wheel_limits_on_a_line) {
    veer_drive_def d = steered4();
    veer_limits l = veer_default_limits();
    for (int i = 0; i < 4; i++) {
        l.modules[i].wheel_rate = 15.0;  /* 1.5 m/s at r = 0.1 */
        l.modules[i].wheel_accel = 8.0;  /* 0.8 m/s^2 */
    }
    veer_route r = line_route(6.0);
    veer_plan *p = plan_ok(&d, &l, &r);
    double expect = trapezoid_time(6.0, 1.5, 0.8);
    cr_assert(fabs(veer_plan_duration(p) - expect) <= 0.005 * expect, "%.5f vs %.5f", veer_plan_duration(p), expect);
    assert_plan_within_limits(p, &d, &l, 0.01);
    veer_plan_destroy(p);
}

/* Spin in place: a trapezoid in yaw, theta/w + w/alpha (Lynch & Park 9.2),
 * and every module perpendicular to the line from the body centre
 * (rigid-body fact). */
Test(plan, spin_in_place) {
    veer_drive_def d = steered4();
    veer_limits l = veer_default_limits();
    l.yaw_rate = 1.0;
    l.yaw_accel = 2.0;
    veer_route r = veer_default_route(1.0, 2.0, 0.0);
    veer_leg spin = veer_default_leg(VEER_LEG_SPIN);
    spin.yaw = 2.0;
    cr_assert_eq(veer_route_add_leg(&r, &spin), VEER_OK);
    veer_plan *p = plan_ok(&d, &l, &r);
    veer_leg_summary ls;
    cr_assert_eq(veer_plan_leg(p, 0, &ls), VEER_OK);
    double moving = ls.duration - ls.resteer_time - ls.dwell_time;
    double expect = trapezoid_time(2.0, 1.0, 2.0);
    cr_assert(fabs(moving - expect) <= 0.005 * expect, "spin %.5f vs %.5f", moving, expect);
    for (double t = ls.resteer_time + 0.05; t < veer_plan_duration(p) - 0.05; t += 0.1) {
        veer_sample s;
        cr_assert_eq(veer_plan_sample(p, t, &s), VEER_OK);
        cr_assert_float_eq(s.pose[0], 1.0, 1e-9);
        cr_assert_float_eq(s.pose[1], 2.0, 1e-9);
        for (int i = 0; i < 4; i++) {
            double dot = cos(s.modules[i].steer) * d.modules[i].x + sin(s.modules[i].steer) * d.modules[i].y;
            cr_assert(fabs(dot) < 1e-6, "module %d not perpendicular at t=%g (dot %g)", i, t, dot);
        }
    }
    assert_plan_within_limits(p, &d, &l, 0.01);
    veer_plan_destroy(p);
}

/* Pivot about a world point: every module perpendicular to the line from
 * the pivot (rigid-body fact); the body origin stays on its circle. */
Test(plan, pivot_about_point) {
    veer_drive_def d = steered4();
    veer_limits l = veer_default_limits();
    l.body_speed = 1.0;
    l.body_accel = 1.0;
    l.yaw_rate = 1.0;
    l.yaw_accel = 1.0;
    for (int i = 0; i < 4; i++) l.modules[i].steer_rate = 3.0;
    veer_route r = veer_default_route(0.0, 0.0, 0.3);
    veer_leg pv = veer_default_leg(VEER_LEG_PIVOT);
    pv.pivot_x = 1.5;
    pv.pivot_y = -0.5;
    pv.angle = -1.2;
    cr_assert_eq(veer_route_add_leg(&r, &pv), VEER_OK);
    veer_plan *p = plan_ok(&d, &l, &r);
    double R = hypot(1.5, -0.5);
    veer_leg_summary ls;
    cr_assert_eq(veer_plan_leg(p, 0, &ls), VEER_OK);
    for (double t = ls.resteer_time + 0.05; t < veer_plan_duration(p) - 0.05; t += 0.1) {
        veer_sample s;
        cr_assert_eq(veer_plan_sample(p, t, &s), VEER_OK);
        cr_assert_float_eq(hypot(s.pose[0] - 1.5, s.pose[1] + 0.5), R, 1e-9);
        double c = cos(s.pose[2]), sn = sin(s.pose[2]);
        double px = c * (1.5 - s.pose[0]) + sn * (-0.5 - s.pose[1]);
        double py = -sn * (1.5 - s.pose[0]) + c * (-0.5 - s.pose[1]);
        for (int i = 0; i < 4; i++) {
            double rx = d.modules[i].x - px, ry = d.modules[i].y - py;
            double dot = (cos(s.modules[i].steer) * rx + sin(s.modules[i].steer) * ry) / hypot(rx, ry);
            cr_assert(fabs(dot) < 1e-6, "module %d not perpendicular at t=%g (%g)", i, t, dot);
        }
    }
    assert_plan_within_limits(p, &d, &l, 0.01);
    veer_plan_destroy(p);
}

/* A stop at a right-angle corner with the heading held: two trapezoids and a
 * re-steer phase of (pi/2) / steer_rate (Lynch & Park 9.2 for each line). */
Test(plan, resteer_phase_at_a_stop) {
    veer_drive_def d = steered4();
    veer_limits l = veer_default_limits();
    l.body_speed = 2.0;
    l.body_accel = 1.0;
    for (int i = 0; i < 4; i++) l.modules[i].steer_rate = 2.0;
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint a = veer_default_waypoint(4.0, 0.0), b = veer_default_waypoint(4.0, 4.0);
    a.stop = 1;
    a.dwell = 0.5;
    b.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&r, &a), VEER_OK);
    cr_assert_eq(veer_route_add_waypoint(&r, &b), VEER_OK);
    veer_plan *p = plan_ok(&d, &l, &r);
    double expect = 2.0 * trapezoid_time(4.0, 2.0, 1.0) + 0.5 + (PI / 2.0) / 2.0;
    cr_assert(fabs(veer_plan_duration(p) - expect) <= 0.005 * expect, "%.5f vs %.5f", veer_plan_duration(p), expect);
    veer_leg_summary ls;
    cr_assert_eq(veer_plan_leg(p, 0, &ls), VEER_OK);
    /* the plan keeps its steer angles as floats (2^-24 relative: 1e-7 rad at
     * pi/2), so the re-steer of pi/2 rad at 2 rad/s is pi/4 s within 1e-7 s */
    cr_assert_float_eq(ls.resteer_time, PI / 4.0, 1e-7);
    cr_assert_float_eq(ls.dwell_time, 0.5, 1e-12);
    /* during the dwell nothing moves; during the re-steer the body stands */
    veer_sample s;
    cr_assert_eq(veer_plan_sample(p, 4.2, &s), VEER_OK);
    cr_assert_eq(s.phase, VEER_PHASE_DWELL);
    cr_assert_eq(veer_plan_sample(p, 4.5 + 0.3, &s), VEER_OK);
    cr_assert_eq(s.phase, VEER_PHASE_RESTEER);
    cr_assert_float_eq(s.pose[0], 4.0, 1e-9);
    cr_assert_float_eq(fabs(s.modules[0].steer_rate), 2.0, 1e-9);
    assert_plan_within_limits(p, &d, &l, 0.01);
    veer_plan_destroy(p);
}

/* Every sample's steer angle within the steer range (the 1e-9 rad the
 * planner's own check allows), and the angles join at every rest: a
 * segment's re-steer phase starts at the angle the last one's motion
 * stopped at and ends at the angle its motion starts at, exactly (the grid
 * keeps floats), as the samples on either side show. */
static void check_steer_joins(const veer_plan *p, const veer_limits *l, int M) {
    for (double t = 0.0; t <= veer_plan_duration(p); t += 0.001) {
        veer_sample s;
        cr_assert_eq(veer_plan_sample(p, t, &s), VEER_OK);
        for (int i = 0; i < M; i++)
            cr_assert(s.modules[i].steer <= l->modules[i].steer_max + 1e-9 &&
                          s.modules[i].steer >= l->modules[i].steer_min - 1e-9,
                      "module %d at t=%g: %.17g rad", i, t, s.modules[i].steer);
    }
    for (int j = 1; j < p->segment_count; j++) {
        const veer_plan_segment *sg = &p->segs[j];
        if (!(sg->resteer_time > 0.0)) continue;
        veer_sample stopped, begins, ends, moves;
        cr_assert_eq(veer_plan_sample(p, p->segs[j - 1].t_move + p->segs[j - 1].move_time, &stopped), VEER_OK);
        cr_assert_eq(veer_plan_sample(p, sg->t_resteer, &begins), VEER_OK);
        cr_assert_eq(veer_plan_sample(p, sg->t_move - 1e-12 * sg->resteer_time, &ends), VEER_OK);
        cr_assert_eq(veer_plan_sample(p, sg->t_move, &moves), VEER_OK);
        cr_assert_eq(begins.phase, VEER_PHASE_RESTEER, "segment %d", j);
        for (int i = 0; i < M; i++) {
            cr_assert_eq(begins.modules[i].steer, stopped.modules[i].steer, "segment %d module %d", j, i);
            cr_assert_float_eq(ends.modules[i].steer, moves.modules[i].steer, 1e-9, "segment %d module %d", j, i);
        }
    }
}

/* A steered cart whose modules turn through [-pi/2, pi/2] only, driving
 * sideways (heading 0, along +y: every module at atan2(1, 0) = pi/2, C99
 * 7.12.4.4) to a stop, on sideways again and then along +x. The angle at the
 * rests is the range's end, which the nearest float (1.5707963705062866)
 * exceeds: the plan must keep it inside, and the re-steer phases must join
 * the rests, on the planned plan and on the one decoded from its bytes. */
Test(plan, sideways_rest_at_the_steer_range_end) {
    veer_drive_def d = steered4();
    veer_limits l = veer_default_limits();
    l.body_speed = 1.0;
    l.body_accel = 1.0;
    for (int i = 0; i < 4; i++) {
        l.modules[i].steer_min = -PI / 2.0;
        l.modules[i].steer_max = PI / 2.0;
        l.modules[i].steer_rate = 2.0;
    }
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint a = veer_default_waypoint(0.0, 2.0), b = veer_default_waypoint(0.0, 3.0),
                  c = veer_default_waypoint(2.0, 3.0);
    a.stop = b.stop = c.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&r, &a), VEER_OK);
    cr_assert_eq(veer_route_add_waypoint(&r, &b), VEER_OK);
    cr_assert_eq(veer_route_add_waypoint(&r, &c), VEER_OK);
    veer_plan *p = plan_ok(&d, &l, &r);
    cr_assert_eq(p->segment_count, 3);
    /* at the first rest every module faces the range's end, within a float's rounding */
    veer_sample s;
    cr_assert_eq(veer_plan_sample(p, p->segs[1].t_resteer, &s), VEER_OK);
    for (int i = 0; i < 4; i++) {
        cr_assert(s.modules[i].steer <= PI / 2.0 && s.modules[i].steer > PI / 2.0 - 1e-6, "module %d: %.17g", i,
                  s.modules[i].steer);
        cr_assert_eq(veer__resteer_to(p, 1, i), veer__resteer_from(p, 1, i)); /* on sideways: no re-steer */
    }
    cr_assert_eq(p->segs[1].resteer_time, 0.0);
    cr_assert_float_eq(p->segs[2].resteer_time, (PI / 2.0) / 2.0, 1e-7); /* to 0 at 2 rad/s */
    check_steer_joins(p, &l, 4);
    assert_plan_within_limits(p, &d, &l, 0.01);
    uint8_t *bytes = malloc(65536);
    size_t size = 0;
    veer_diag diag;
    cr_assert_eq(veer_plan_encode_pb(p, bytes, 65536, &size, &diag), VEER_OK, "%s", diag.message);
    veer_plan *q = NULL;
    cr_assert_eq(veer_plan_decode_pb(bytes, size, &q, &diag), VEER_OK, "%s", diag.message);
    check_steer_joins(q, &l, 4);
    veer_plan_destroy(q);
    free(bytes);
    veer_plan_destroy(p);
}
