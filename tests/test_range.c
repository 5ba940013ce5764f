/* Range safety checks: polygon maths, the footprint sweep against keep-in and
 * keep-out areas, speed zones, the braking envelope and the separation of
 * several carts. Expected values come from elementary geometry (distances
 * between points and lines, the triangle inequality), the closed-form
 * trapezoidal profile, uniform deceleration and brute-force sampling done
 * here with the test's own polygon code. Scenarios are invented.
 * SPDX-License-Identifier: MIT */
#include <criterion/criterion.h>
#include <math.h>
#include <string.h>
#include <veer/veer.h>
#include <veer/range.h>

/* NAN and INFINITY are float constants under clang: doubles here (-Wdouble-promotion). */
#define T_NAN ((double)NAN)
#define T_INF ((double)INFINITY)

/* ---- helpers --------------------------------------------------------------- */

static veer_outline box(double x0, double y0, double x1, double y1) {
    veer_outline o = veer_default_outline();
    double xy[8] = {x0, y0, x1, y0, x1, y1, x0, y1};
    cr_assert_eq(veer_outline_set(&o, xy, 4, NULL), VEER_OK);
    return o;
}

static veer_outline poly(const double *xy, int n) {
    veer_outline o = veer_default_outline();
    veer_diag d;
    cr_assert_eq(veer_outline_set(&o, xy, n, &d), VEER_OK, "%s", d.message);
    return o;
}

static veer_range big_range(void) {
    veer_range r = veer_default_range();
    r.keep_in = box(-100.0, -100.0, 100.0, 100.0);
    return r;
}

static veer_plan *line_plan(double x0, double y0, double x1, double y1, double v, double a) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_MECANUM);
    veer_limits l = veer_default_limits();
    l.body_speed = v;
    l.body_accel = a;
    veer_route r = veer_default_route(x0, y0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(x1, y1);
    w.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    veer_plan *p = NULL;
    veer_diag diag;
    cr_assert_eq(veer_plan_create(&d, &l, &r, NULL, &p, &diag), VEER_OK, "%s", diag.message);
    return p;
}

/* The test's own polygon code (brute force, independent of src/range_geom.c). */
static double t_pseg(double px, double py, const double *a, const double *b) {
    double ex = b[0] - a[0], ey = b[1] - a[1];
    double t = ((px - a[0]) * ex + (py - a[1]) * ey) / (ex * ex + ey * ey);
    t = t < 0.0 ? 0.0 : t > 1.0 ? 1.0 : t;
    return hypot(px - a[0] - t * ex, py - a[1] - t * ey);
}
static int t_inside(const veer_outline *o, double x, double y) {
    int c = 0;
    for (int i = 0, j = o->count - 1; i < o->count; j = i++) {
        const double *a = o->points[j], *b = o->points[i];
        if ((a[1] > y) != (b[1] > y) && x < a[0] + (y - a[1]) * (b[0] - a[0]) / (b[1] - a[1])) c = !c;
    }
    return c;
}
static int t_cross(const double *a, const double *b, const double *c, const double *d) {
    double d1 = (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0]);
    double d2 = (b[0] - a[0]) * (d[1] - a[1]) - (b[1] - a[1]) * (d[0] - a[0]);
    double d3 = (d[0] - c[0]) * (a[1] - c[1]) - (d[1] - c[1]) * (a[0] - c[0]);
    double d4 = (d[0] - c[0]) * (b[1] - c[1]) - (d[1] - c[1]) * (b[0] - c[0]);
    return d1 * d2 <= 0.0 && d3 * d4 <= 0.0;
}
/* Distance between two areas, 0 when they overlap. */
static double t_gap(const veer_outline *a, const veer_outline *b) {
    double m = T_INF;
    for (int i = 0, j = a->count - 1; i < a->count; j = i++)
        for (int k = 0, l = b->count - 1; k < b->count; l = k++) {
            if (t_cross(a->points[j], a->points[i], b->points[l], b->points[k])) return 0.0;
            m = fmin(m, t_pseg(a->points[i][0], a->points[i][1], b->points[l], b->points[k]));
            m = fmin(m, t_pseg(b->points[k][0], b->points[k][1], a->points[j], a->points[i]));
        }
    if (t_inside(a, b->points[0][0], b->points[0][1]) || t_inside(b, a->points[0][0], a->points[0][1])) return 0.0;
    return m;
}
static veer_outline t_place(const veer_footprint *fp, const double pose[3]) {
    veer_outline o = fp->shape;
    double c = cos(pose[2]), s = sin(pose[2]);
    for (int i = 0; i < o.count; i++) {
        double x = fp->shape.points[i][0], y = fp->shape.points[i][1];
        o.points[i][0] = pose[0] + c * x - s * y;
        o.points[i][1] = pose[1] + s * x + c * y;
    }
    return o;
}

/* ---- polygon maths against elementary geometry ------------------------- */

Test(range_geom, containment_and_distances) {
    veer_outline sq = box(0.0, 0.0, 2.0, 1.0);
    int in = -1;
    cr_assert_eq(veer_outline_contains(&sq, 1.0, 0.5, &in), VEER_OK);
    cr_expect_eq(in, 1);
    cr_assert_eq(veer_outline_contains(&sq, 2.5, 0.5, &in), VEER_OK);
    cr_expect_eq(in, 0);
    cr_assert_eq(veer_outline_contains(&sq, 2.0, 0.3, &in), VEER_OK);
    cr_expect_eq(in, 1, "boundary counts as inside");
    double d;
    /* distance from a point to the nearest side (elementary geometry) */
    cr_assert_eq(veer_outline_point_distance(&sq, 1.0, 0.75, &d), VEER_OK);
    cr_expect_float_eq(d, 0.25, 1e-15);
    cr_assert_eq(veer_outline_point_distance(&sq, 5.0, 5.0, &d), VEER_OK);
    cr_expect_float_eq(d, 5.0, 1e-12, "3-4-5 triangle from the corner (2, 1)");
    /* non-convex: an L, the notch's corner at (1, 1) */
    const double L[] = {0, 0, 2, 0, 2, 1, 1, 1, 1, 2, 0, 2};
    veer_outline l = poly(L, 6);
    cr_assert_eq(veer_outline_contains(&l, 1.5, 1.5, &in), VEER_OK);
    cr_expect_eq(in, 0, "inside the notch is outside the L");
    cr_assert_eq(veer_outline_contains(&l, 0.5, 1.5, &in), VEER_OK);
    cr_expect_eq(in, 1);
    /* two boxes 3 m apart along x, 4 m along y: 5 m corner to corner */
    veer_outline far = box(5.0, 5.0, 6.0, 6.0);
    cr_assert_eq(veer_outline_distance(&sq, &far, &d), VEER_OK);
    cr_expect_float_eq(d, 5.0, 1e-12);
    veer_outline over = box(1.5, 0.5, 3.0, 3.0), inner = box(0.5, 0.25, 0.75, 0.5);
    cr_assert_eq(veer_outline_distance(&sq, &over, &d), VEER_OK);
    cr_expect_eq(d, 0.0);
    cr_assert_eq(veer_outline_distance(&sq, &inner, &d), VEER_OK);
    cr_expect_eq(d, 0.0, "one inside the other");
}

/* Signed clearance: distances and depths that follow from the distance of a
 * point to a line. */
Test(range_geom, clearance_and_depth) {
    veer_outline O = box(0.0, 0.0, 1.0, 1.0);
    double c;
    /* 0.3 m to the left of the keep-out */
    veer_outline F = box(-1.0, 0.2, -0.3, 0.6);
    cr_assert_eq(veer_outline_clearance(&F, &O, 0, &c), VEER_OK);
    cr_expect_float_eq(c, 0.3, 1e-12);
    /* reaching 0.2 m in through the left side: the deepest points, on x = 0.2,
     * are 0.2 m from that side and farther from the others */
    F = box(-0.5, 0.3, 0.2, 0.6);
    cr_assert_eq(veer_outline_clearance(&F, &O, 0, &c), VEER_OK);
    cr_expect_float_eq(c, -0.2, 1e-12);
    /* the keep-out's corner poking into the footprint's side: the footprint
     * edge x = 0.1 crosses the corner (0, 0) region; deepest point of the
     * footprint in the keep-out is on that edge at distance 0.1 from x = 0
     * while 0.1 or more from y = 0 */
    F = box(-1.0, -1.0, 0.1, 0.5);
    cr_assert_eq(veer_outline_clearance(&F, &O, 0, &c), VEER_OK);
    cr_expect_float_eq(c, -0.1, 1e-12);
    /* a small keep-out (0.2 m square) wholly under the footprint: the deepest
     * point is its centre, 0.1 m from every side (interior candidate) */
    veer_outline post = box(0.4, 0.4, 0.6, 0.6), cover = box(-1.0, -1.0, 2.0, 2.0);
    cr_assert_eq(veer_outline_clearance(&cover, &post, 0, &c), VEER_OK);
    cr_expect_float_eq(c, -0.1, 1e-12);
    /* an equilateral-ish case: a triangle keep-out wholly covered; its
     * inradius r = area / semi-perimeter; 3-4-5 right triangle: r = 1 */
    const double T[] = {0, 0, 4, 0, 0, 3};
    veer_outline tri = poly(T, 3), huge = box(-10, -10, 10, 10);
    cr_assert_eq(veer_outline_clearance(&huge, &tri, 0, &c), VEER_OK);
    cr_expect_float_eq(c, -1.0, 1e-12);
    /* keep-in: inside 0.25 m from the nearest side, and sticking out 0.3 m */
    veer_outline K = box(0.0, 0.0, 10.0, 5.0);
    F = box(0.25, 1.0, 2.0, 2.0);
    cr_assert_eq(veer_outline_clearance(&F, &K, 1, &c), VEER_OK);
    cr_expect_float_eq(c, 0.25, 1e-12);
    F = box(9.0, 1.0, 10.3, 2.0);
    cr_assert_eq(veer_outline_clearance(&F, &K, 1, &c), VEER_OK);
    cr_expect_float_eq(c, -0.3, 1e-12);
    /* keep-in L with the footprint over the notch: the footprint's corner
     * (1.8, 1.8) is the point farthest from the L, 0.8 from the notch corner
     * (1, 1)? no: from the L's edges x = 1 (y >= 1) and y = 1 (x >= 1) it is
     * 0.8 away from both, and from the corner sqrt(2) * 0.8: distance 0.8 */
    const double Lk[] = {0, 0, 2, 0, 2, 1, 1, 1, 1, 2, 0, 2};
    veer_outline l = poly(Lk, 6);
    F = box(0.5, 0.5, 1.8, 1.8);
    cr_assert_eq(veer_outline_clearance(&F, &l, 1, &c), VEER_OK);
    cr_expect_float_eq(c, -0.8, 1e-12);
    /* touching is not a violation */
    F = box(-1.0, 0.0, 0.0, 1.0);
    cr_assert_eq(veer_outline_clearance(&F, &O, 0, &c), VEER_OK);
    cr_expect_eq(c, 0.0);
}

Test(range_geom, bad_outlines_get_named_statuses) {
    veer_outline o = veer_default_outline();
    veer_diag d;
    const double two[] = {0, 0, 1, 0};
    cr_expect_eq(veer_outline_set(&o, two, 2, &d), VEER_ERR_VALUE);
    cr_expect_eq(o.count, 0, "unchanged on failure");
    const double nanp[] = {0, 0, T_NAN, 0, 1, 1};
    cr_expect_eq(veer_outline_set(&o, nanp, 3, &d), VEER_ERR_VALUE);
    cr_expect(strstr(d.message, "vertex 1") != NULL, "%s", d.message);
    const double bow[] = {0, 0, 1, 1, 1, 0, 0, 1}; /* a bow tie */
    cr_expect_eq(veer_outline_set(&o, bow, 4, &d), VEER_ERR_GEOMETRY);
    cr_expect(strstr(d.message, "edges 0 and 2") != NULL, "%s", d.message);
    const double dup[] = {0, 0, 1, 0, 1, 0, 0, 1};
    cr_expect_eq(veer_outline_set(&o, dup, 4, &d), VEER_ERR_GEOMETRY);
    const double flat[] = {0, 0, 1, 0, 2, 0};
    cr_expect_eq(veer_outline_set(&o, flat, 3, &d), VEER_ERR_GEOMETRY);
    const double fold[] = {0, 0, 2, 0, 1, 0, 1, 1}; /* edge 0 and 1 fold back */
    cr_expect_eq(veer_outline_set(&o, fold, 4, &d), VEER_ERR_GEOMETRY);
    const double touch[] = {0, 0, 2, 0, 2, 2, 1, 0.0, 0, 2}; /* vertex 3 on edge 0 */
    cr_expect_eq(veer_outline_set(&o, touch, 5, &d), VEER_ERR_GEOMETRY);
    double many[2 * 65];
    for (int i = 0; i < 65; i++) many[2 * i] = cos(i * 0.0966), many[2 * i + 1] = sin(i * 0.0966);
    cr_expect_eq(veer_outline_set(&o, many, 65, &d), VEER_ERR_CAPACITY);
    veer_outline huge = box(0, 0, 1, 1);
    huge.points[2][0] = 2e6;
    cr_expect_eq(veer_outline_check(&huge, &d), VEER_ERR_VALUE);
    cr_expect_eq(veer_outline_check(NULL, &d), VEER_ERR_NULL);
    int in;
    veer_outline bad = veer_default_outline();
    cr_expect_eq(veer_outline_contains(&bad, 0, 0, &in), VEER_ERR_VALUE);

    veer_range r = big_range();
    veer_outline ko = box(1, 1, 2, 2);
    cr_assert_eq(veer_range_add_keep_out(&r, &ko, &d), VEER_OK);
    r.keep_out[0].points[1][1] = T_NAN;
    cr_expect_eq(veer_range_check(&r, &d), VEER_ERR_VALUE);
    cr_expect(strstr(d.message, "keep_out[0]") != NULL, "%s", d.message);
    r.keep_out[0] = ko;
    cr_expect_eq(veer_range_add_speed_zone(&r, &ko, 0.0, &d), VEER_ERR_VALUE);
    cr_expect_eq(veer_range_add_speed_zone(&r, &ko, T_NAN, &d), VEER_ERR_VALUE);
    cr_expect_eq(r.zone_count, 0);
    veer_footprint fp = veer_footprint_rectangle(0.5, 0.5, 0.3, 0.3, -0.1);
    cr_expect_eq(veer_footprint_check(&fp, &d), VEER_ERR_VALUE);
    fp = veer_footprint_rectangle(0.5, -0.5, 0.3, 0.3, 0.0);
    cr_expect_eq(veer_footprint_check(&fp, &d), VEER_ERR_GEOMETRY, "zero length");
    char name[32];
    veer_area_id id = {VEER_AREA_KEEP_OUT, 3};
    veer_area_name(id, name, sizeof name);
    cr_expect_str_eq(name, "keep_out[3]");
}

/* ---- sweeping a plan --------------------------------------------------------- */

/* A straight run past a keep-out whose near side lies a chosen distance from
 * the footprint's side: the worst margin is that distance (elementary
 * geometry: the footprint translates parallel to the side). */
Test(range_check, brushing_a_keep_out_reports_its_margin) {
    veer_plan *p = line_plan(0.0, 0.0, 10.0, 0.0, 2.0, 1.0);
    veer_range r = big_range();
    double want = 0.123;
    veer_footprint fp = veer_footprint_rectangle(0.6, 0.4, 0.35, 0.35, 0.05);
    veer_outline ko = box(4.0, 0.35 + 0.05 + want, 6.0, 3.0);
    cr_assert_eq(veer_range_add_keep_out(&r, &ko, NULL), VEER_OK);
    veer_range_report rep;
    veer_diag d;
    cr_assert_eq(veer_plan_check_range(p, &r, &fp, &rep, &d), VEER_OK, "%s", d.message);
    cr_expect(fabs(rep.worst.margin - want) <= 1e-3, "worst %.6f want %.6f", rep.worst.margin, want);
    cr_expect_eq(rep.worst.area.kind, VEER_AREA_KEEP_OUT);
    cr_expect_eq(rep.worst.area.index, 0);
    /* the worst pose is alongside the keep-out: body x in [4 - 0.6, 6 + 0.4] */
    cr_expect(rep.worst.pose[0] >= 3.4 - 1e-6 && rep.worst.pose[0] <= 6.4 + 1e-6, "x %g", rep.worst.pose[0]);
    cr_expect_eq(rep.clear, 1);
    cr_expect_eq(rep.violated, 0);
    veer_plan_destroy(p);
}

/* A pivot sweeps the footprint's far corner along a circle about the pivot
 * point; a keep-out square with a vertex on that circle's ray, m beyond it,
 * and its diagonal along the ray, is nowhere closer to the footprint than m,
 * and exactly m when the corner passes (triangle inequality). */
Test(range_check, pivot_corner_brushes_a_post) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    l.body_speed = 1.0;
    l.body_accel = 1.0;
    l.yaw_rate = 0.8;
    l.yaw_accel = 1.0;
    veer_route route = veer_default_route(0.0, 0.0, 0.0);
    veer_leg pv = veer_default_leg(VEER_LEG_PIVOT);
    pv.pivot_x = -2.0;
    pv.pivot_y = 0.0;
    pv.angle = 1.2;
    cr_assert_eq(veer_route_add_leg(&route, &pv), VEER_OK);
    veer_plan *p = NULL;
    veer_diag diag;
    cr_assert_eq(veer_plan_create(&d, &l, &route, NULL, &p, &diag), VEER_OK, "%s", diag.message);
    veer_footprint fp = veer_footprint_rectangle(0.5, 0.5, 0.3, 0.3, 0.02);
    /* front-left corner (0.5, 0.3) at the start is at (0.5, 0.3) in the world;
     * its radius about the pivot (-2, 0) is hypot(2.5, 0.3) */
    double rc = hypot(2.5, 0.3), m = 0.0876, phi = atan2(0.3, 2.5) + 0.7; /* passed 0.7 rad into the pivot */
    double ux = cos(phi), uy = sin(phi), vx = -uy, vy = ux, rho = rc + m + fp.margin, h = 0.1;
    double cx = -2.0 + rho * ux, cy = rho * uy;
    double xy[8] = {cx, cy, cx + h * (ux + vx), cy + h * (uy + vy), cx + 2 * h * ux, cy + 2 * h * uy,
                    cx + h * (ux - vx), cy + h * (uy - vy)};
    veer_range r = big_range();
    veer_outline post = poly(xy, 4);
    cr_assert_eq(veer_range_add_keep_out(&r, &post, NULL), VEER_OK);
    veer_range_report rep;
    cr_assert_eq(veer_plan_check_range(p, &r, &fp, &rep, &diag), VEER_OK, "%s", diag.message);
    cr_expect(fabs(rep.worst.margin - m) <= 1e-3, "worst %.6f want %.6f", rep.worst.margin, m);
    cr_expect_eq(rep.worst.area.kind, VEER_AREA_KEEP_OUT);
    /* pivot position s in radians: the front-left corner meets the ray after
     * 0.7 rad, and the front-right corner, at the same radius, after another
     * 2 atan(0.3 / 2.5): both are closest approaches of exactly m */
    double s2 = 0.7 + 2.0 * atan2(0.3, 2.5);
    cr_expect(fabs(rep.worst.s - 0.7) < 0.02 || fabs(rep.worst.s - s2) < 0.02, "s %g", rep.worst.s);
    veer_plan_destroy(p);
}

/* Driving into a wall: the first violation is where the footprint's front
 * (with margin) reaches the wall, at a time from the closed-form trapezoid
 * (Lynch & Park, Modern Robotics, 9.2: accelerate to v in v/a, cruise, brake),
 * and its depth is how far the front ends up beyond the wall. */
Test(range_check, first_violation_time_position_and_depth) {
    double v = 2.0, a = 1.0, D = 10.0;
    veer_plan *p = line_plan(0.0, 0.0, D, 0.0, v, a);
    veer_range r = big_range();
    veer_footprint fp = veer_footprint_rectangle(0.5, 0.5, 0.3, 0.3, 0.1);
    double wall = 7.0;
    veer_outline ko = box(wall, -5.0, 30.0, 5.0);
    cr_assert_eq(veer_range_add_keep_out(&r, &ko, NULL), VEER_OK);
    veer_range_report rep;
    cr_assert_eq(veer_plan_check_range(p, &r, &fp, &rep, NULL), VEER_OK);
    cr_assert_eq(rep.violated, 1);
    cr_expect_eq(rep.clear, 0);
    double s_v = wall - 0.5 - 0.1;           /* body x when the grown front touches */
    double t_v = v / a + (s_v - v * v / (2 * a)) / v; /* in the cruise: 2 + 4.4 / 2 */
    cr_expect(fabs(rep.first_violation.s - s_v) < 1e-4, "s %g want %g", rep.first_violation.s, s_v);
    cr_expect(fabs(rep.first_violation.t - t_v) < 5e-3, "t %g want %g", rep.first_violation.t, t_v);
    cr_expect_eq(rep.first_violation.area.kind, VEER_AREA_KEEP_OUT);
    double depth = D + 0.5 - wall + 0.1;      /* front at 10.5, margin 0.1, wall at 7 */
    cr_expect(fabs(rep.first_violation.margin + depth) < 1e-3, "depth %g want %g", -rep.first_violation.margin, depth);
    cr_expect(fabs(rep.worst.margin + depth) < 1e-3);
    cr_expect(fabs(rep.first_violation_end.s - D) < 1e-9, "still in at the end");
    /* and the same wall as the keep-in's far side */
    veer_range r2 = veer_default_range();
    r2.keep_in = box(-5.0, -5.0, wall, 5.0);
    cr_assert_eq(veer_plan_check_range(p, &r2, &fp, &rep, NULL), VEER_OK);
    cr_expect_eq(rep.first_violation.area.kind, VEER_AREA_KEEP_IN);
    cr_expect(fabs(rep.first_violation.s - s_v) < 1e-4, "s %g want %g", rep.first_violation.s, s_v);
    cr_expect(fabs(rep.first_violation.margin + depth) < 1e-3);
    veer_plan_destroy(p);
}

Test(range_check, bad_input_leaves_the_report_alone) {
    veer_plan *p = line_plan(0.0, 0.0, 5.0, 0.0, 1.0, 1.0);
    veer_range r = big_range();
    veer_footprint fp = veer_footprint_rectangle(0.5, 0.5, 0.3, 0.3, 0.0);
    veer_range_report rep, ref;
    memset(&rep, 0x5a, sizeof rep);
    ref = rep;
    veer_diag d;
    cr_expect_eq(veer_plan_check_range(NULL, &r, &fp, &rep, &d), VEER_ERR_NULL);
    cr_expect_eq(veer_plan_check_range(p, NULL, &fp, &rep, &d), VEER_ERR_NULL);
    cr_expect_eq(veer_plan_check_range(p, &r, &fp, NULL, &d), VEER_ERR_NULL);
    veer_range none = veer_default_range();
    cr_expect_eq(veer_plan_check_range(p, &none, &fp, &rep, &d), VEER_ERR_VALUE);
    cr_expect(strstr(d.message, "keep-in") != NULL, "%s", d.message);
    fp.margin = T_NAN;
    cr_expect_eq(veer_plan_check_range(p, &r, &fp, &rep, &d), VEER_ERR_VALUE);
    fp.margin = 0.0;
    r.keep_out_count = 40;
    cr_expect_eq(veer_plan_check_range(p, &r, &fp, &rep, &d), VEER_ERR_CAPACITY);
    cr_expect(memcmp(&rep, &ref, sizeof rep) == 0, "report untouched");
    veer_braking_report br;
    cr_expect_eq(veer_plan_check_braking(p, &r, &fp, &br, &d), VEER_ERR_CAPACITY);
    veer_plan_destroy(p);
}

/* ---- braking envelope -------------------------------------------------------- */

/* On a straight line the controlled stop from cruise at v with the plan's
 * braking deceleration a_b stops in v^2 / (2 a_b) (uniform deceleration, any
 * physics text). a_b is read off the plan's own braking before the end. */
Test(range_braking, straight_line_stop_distance) {
    double v = 2.0, a = 1.0;
    veer_plan *p = line_plan(0.0, 0.0, 12.0, 0.0, v, a);
    veer_range r = big_range();
    veer_footprint fp = veer_footprint_rectangle(0.5, 0.5, 0.3, 0.3, 0.0);
    veer_sample smp;
    cr_assert_eq(veer_plan_sample(p, veer_plan_duration(p) - 0.5, &smp), VEER_OK);
    double a_b = -smp.sddot;
    cr_assert(a_b > 0.9 * a && a_b <= a * (1 + 1e-9), "plan braking %g", a_b);
    veer_braking_report b;
    veer_diag d;
    cr_assert_eq(veer_plan_check_braking(p, &r, &fp, &b, &d), VEER_OK, "%s", d.message);
    cr_expect(fabs(b.stop_speed - v) < 1e-6, "longest stop starts at cruise: %g", b.stop_speed);
    cr_expect(fabs(b.stop_distance - v * v / (2 * a_b)) < 1e-3, "distance %.5f, v^2/2a %.5f", b.stop_distance,
              v * v / (2 * a_b));
    cr_expect(fabs(b.stop_duration - v / a_b) < 2e-3, "duration %.5f, v/a %.5f", b.stop_duration, v / a_b);
    cr_expect_eq(b.clear, 1);
    cr_expect(b.worst_margin > 50.0, "far from the keep-in's sides");
    cr_expect_float_eq(b.last_safe_stop_t, veer_plan_duration(p), 1e-12);
    veer_plan_destroy(p);
}

/* A wall across the line: the last instant a stop still ends short of it is
 * when the cart, cruising at v, is v^2 / (2 a_b) before the violation point
 * (uniform deceleration), at a time from the closed-form trapezoid. */
Test(range_braking, last_safe_stop_before_a_wall) {
    double v = 2.0, a = 1.0, D = 12.0;
    veer_plan *p = line_plan(0.0, 0.0, D, 0.0, v, a);
    veer_range r = big_range();
    veer_footprint fp = veer_footprint_rectangle(0.5, 0.5, 0.3, 0.3, 0.0);
    veer_outline ko = box(9.5, -5.0, 30.0, 5.0);
    cr_assert_eq(veer_range_add_keep_out(&r, &ko, NULL), VEER_OK);
    veer_sample smp;
    cr_assert_eq(veer_plan_sample(p, veer_plan_duration(p) - 0.5, &smp), VEER_OK);
    double a_b = -smp.sddot;
    veer_braking_report b;
    cr_assert_eq(veer_plan_check_braking(p, &r, &fp, &b, NULL), VEER_OK);
    cr_expect_eq(b.clear, 0);
    double s_v = 9.0, s_stop = s_v - v * v / (2 * a_b);
    double t_safe = v / a + (s_stop - v * v / (2 * a)) / v;
    cr_expect(fabs(b.last_safe_stop_t - t_safe) < 3e-3, "t %g want %g", b.last_safe_stop_t, t_safe);
    cr_expect(b.last_safe_stop_s < s_v && b.last_safe_stop_s > s_v - 2e-3, "ends at %g", b.last_safe_stop_s);
    /* the worst pose is the plan's end inside the wall; the earliest stop
     * reaching it starts v^2 / (2 a_b) before it would be inside the braking */
    cr_expect(b.worst_margin < -2.9 && b.worst_margin > -3.1 - 1e-3, "worst %g", b.worst_margin);
    veer_plan_destroy(p);
}

/* ---- speed zones ----------------------------------------------------------------- */

static double t_speed_cap(const veer_range *r, const veer_footprint *fp, const double pose[3], int *zone) {
    veer_outline F = t_place(fp, pose);
    double cap = T_INF;
    *zone = -1;
    for (int i = 0; i < r->zone_count; i++)
        if (t_gap(&F, &r->zones[i].area) <= fp->margin && r->zones[i].speed < cap) cap = r->zones[i].speed, *zone = i;
    return cap;
}

/* Speed-zone caps hold at every millisecond: wherever the footprint grown by
 * its margin meets a zone (exact polygon test in this file), the body speed
 * is within the zone's cap. Rounded corners, a pivot and a non-convex zone. */
Test(range_zones, caps_hold_at_every_millisecond) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    for (int i = 0; i < 4; i++) {
        l.modules[i].wheel_rate = 25.0;
        l.modules[i].wheel_accel = 20.0;
        l.modules[i].steer_rate = 4.0;
    }
    l.body_speed = 2.0;
    l.body_accel = 1.5;
    veer_route route = veer_default_route(0.0, 0.0, 0.0);
    veer_leg t = veer_default_leg(VEER_LEG_TRAVEL);
    t.heading = VEER_HEADING_TANGENT;
    t.corner_tolerance = 0.6;
    cr_assert_eq(veer_route_add_leg(&route, &t), VEER_OK);
    double wps[][2] = {{8.0, 0.0}, {8.0, 7.0}, {1.0, 9.0}};
    for (int i = 0; i < 3; i++) {
        veer_waypoint w = veer_default_waypoint(wps[i][0], wps[i][1]);
        w.stop = i == 2;
        cr_assert_eq(veer_route_add_waypoint(&route, &w), VEER_OK);
    }
    veer_leg pv = veer_default_leg(VEER_LEG_PIVOT);
    pv.pivot_x = 1.0;
    pv.pivot_y = 7.0;
    pv.angle = 1.5;
    cr_assert_eq(veer_route_add_leg(&route, &pv), VEER_OK);

    veer_range r = veer_default_range();
    veer_outline z0 = box(3.0, -1.0, 4.0, 1.0);                 /* across the first line */
    const double Lz[] = {7.0, 1.5, 9.5, 1.5, 9.5, 5.0, 8.6, 5.0, 8.6, 2.5, 7.0, 2.5}; /* an L around the corner run */
    veer_outline z1 = poly(Lz, 6);
    veer_outline z2 = box(-3.0, 6.0, -0.2, 9.5);                /* met by the pivot */
    cr_assert_eq(veer_range_add_speed_zone(&r, &z0, 0.5, NULL), VEER_OK);
    cr_assert_eq(veer_range_add_speed_zone(&r, &z1, 0.8, NULL), VEER_OK);
    cr_assert_eq(veer_range_add_speed_zone(&r, &z2, 0.3, NULL), VEER_OK);
    veer_footprint fp = veer_footprint_rectangle(0.6, 0.5, 0.4, 0.4, 0.15);
    veer_plan *p = NULL;
    veer_diag diag;
    cr_assert_eq(veer_plan_create_in_range(&d, &l, &route, NULL, &r, &fp, &p, &diag), VEER_OK, "%s", diag.message);

    double T = veer_plan_duration(p), worst = 0.0, fastest_outside = 0.0;
    int in_zone[3] = {0, 0, 0};
    for (long k = 0; k * 1e-3 <= T; k++) {
        veer_sample s;
        cr_assert_eq(veer_plan_sample(p, k * 1e-3, &s), VEER_OK);
        int z;
        double cap = t_speed_cap(&r, &fp, s.pose, &z);
        double v = hypot(s.twist_world[0], s.twist_world[1]);
        if (z >= 0) {
            in_zone[z]++;
            worst = fmax(worst, v / cap);
            cr_assert(v <= cap * (1.0 + 1e-9) + 1e-12, "t %.3f: speed %.6f in speed_zone[%d] capped at %.3f", s.t, v, z,
                      cap);
        } else {
            fastest_outside = fmax(fastest_outside, v);
        }
    }
    for (int z = 0; z < 3; z++) cr_expect(in_zone[z] > 100, "zone %d met for %d ms", z, in_zone[z]);
    cr_expect(worst > 0.97, "the caps bind somewhere: worst ratio %.4f", worst);
    cr_expect(fastest_outside > 1.5, "faster outside the zones: %.3f", fastest_outside);
    /* the planner names the zones where they bind */
    int named = 0;
    for (int k = 0; k < veer_plan_grid_count(p); k++) {
        double s, sd;
        veer_limit_id id;
        cr_assert_eq(veer_plan_grid(p, k, &s, &sd, &id), VEER_OK);
        if (id.kind == VEER_LIMIT_SPEED_ZONE) named |= 1 << id.module;
    }
    cr_expect_eq(named, 7, "speed_zone[0..2] all bind somewhere (mask %d)", named);
    veer_plan_destroy(p);
}

/* ---- several carts ----------------------------------------------------------- */

/* Two carts on crossing lanes, the second started later: the minimum
 * separation and the first instant they come closer than required, against
 * brute-force sampling every 0.1 ms with this file's own polygon code. */
Test(range_multi, crossing_lanes_against_brute_force) {
    veer_plan *pa = line_plan(-10.0, 0.0, 10.0, 0.0, 2.0, 1.0);
    veer_plan *pb = line_plan(0.0, -10.0, 0.0, 10.0, 1.5, 0.8);
    double offsets[] = {-1.0, 0.4, 1.7, 3.0};
    for (int o = 0; o < 4; o++) {
        veer_cart carts[2];
        memset(carts, 0, sizeof carts);
        carts[0].plan = pa;
        carts[0].start_time = 0.0;
        carts[0].footprint = veer_footprint_rectangle(0.6, 0.4, 0.35, 0.35, 0.1);
        carts[1].plan = pb;
        carts[1].start_time = offsets[o];
        carts[1].footprint = veer_footprint_rectangle(0.5, 0.5, 0.3, 0.3, 0.05);
        double required = 1.0;
        veer_separation_report rep;
        veer_diag d;
        cr_assert_eq(veer_carts_check_separation(carts, 2, required, &rep, &d), VEER_OK, "%s", d.message);
        /* brute force */
        double t0 = fmin(0.0, offsets[o]), t1 = fmax(veer_plan_duration(pa), offsets[o] + veer_plan_duration(pb));
        double best = T_INF, best_t = 0.0, first = -1.0;
        for (long k = 0; t0 + k * 1e-4 <= t1; k++) {
            double T = t0 + k * 1e-4;
            veer_sample sa, sb;
            cr_assert_eq(veer_plan_sample(pa, T - carts[0].start_time, &sa), VEER_OK);
            cr_assert_eq(veer_plan_sample(pb, T - carts[1].start_time, &sb), VEER_OK);
            veer_outline Fa = t_place(&carts[0].footprint, sa.pose), Fb = t_place(&carts[1].footprint, sb.pose);
            double sep = t_gap(&Fa, &Fb) - 0.1 - 0.05;
            if (sep < best) best = sep, best_t = T;
            if (first < 0.0 && sep < required) first = T;
        }
        cr_expect(fabs(rep.min_separation - best) < 1e-3, "offset %g: min %.5f brute %.5f (t %.4f vs %.4f)",
                  offsets[o], rep.min_separation, best, rep.min_t, best_t);
        cr_expect_eq(rep.conflict, first >= 0.0, "offset %g", offsets[o]);
        if (first >= 0.0)
            cr_expect(fabs(rep.conflict_t - first) < 2e-4, "offset %g: first conflict %.5f brute %.5f", offsets[o],
                      rep.conflict_t, first);
        cr_expect_eq(rep.min_a, 0);
        cr_expect_eq(rep.min_b, 1);
    }
    veer_cart one[1];
    memset(one, 0, sizeof one);
    one[0].plan = pa;
    one[0].footprint = veer_footprint_rectangle(0.5, 0.5, 0.3, 0.3, 0.0);
    veer_separation_report rep;
    cr_expect_eq(veer_carts_check_separation(one, 1, 1.0, &rep, NULL), VEER_ERR_VALUE);
    veer_cart two[2] = {one[0], one[0]};
    two[1].start_time = T_NAN;
    cr_expect_eq(veer_carts_check_separation(two, 2, 1.0, &rep, NULL), VEER_ERR_VALUE);
    two[1].start_time = 0.0;
    cr_expect_eq(veer_carts_check_separation(two, 2, -1.0, &rep, NULL), VEER_ERR_VALUE);
    veer_plan_destroy(pa);
    veer_plan_destroy(pb);
}

/* A brief touch between two grid points: on a coarse grid a pivot swings the
 * footprint's far corner past the tip of a zone that reaches 0.5 mm into
 * the circle the grown corner sweeps (radius rc + margin about the pivot
 * point, triangle inequality), in the middle of a grid interval. The zone
 * must hold there too, at every millisecond. */
Test(range_zones, brief_touch_between_grid_points) {
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits l = veer_default_limits();
    l.body_speed = 3.0;
    l.body_accel = 2.0;
    l.yaw_rate = 0.8;
    l.yaw_accel = 1.0;
    veer_route route = veer_default_route(0.0, 0.0, 0.0);
    veer_leg pv = veer_default_leg(VEER_LEG_PIVOT);
    pv.pivot_x = -2.0;
    pv.pivot_y = 0.0;
    pv.angle = 1.6;
    cr_assert_eq(veer_route_add_leg(&route, &pv), VEER_OK);
    veer_plan_options opt = veer_default_plan_options();
    opt.grid_points = 16;
    veer_plan *p0 = NULL;
    cr_assert_eq(veer_plan_create(&d, &l, &route, &opt, &p0, NULL), VEER_OK);
    /* the grid interval holding 0.8 rad, and its middle */
    double mid = -1.0, width = 0.0;
    for (int k = 0; k + 1 < veer_plan_grid_count(p0); k++) {
        double s0, s1, v;
        veer_limit_id id;
        cr_assert_eq(veer_plan_grid(p0, k, &s0, &v, &id), VEER_OK);
        cr_assert_eq(veer_plan_grid(p0, k + 1, &s1, &v, &id), VEER_OK);
        if (s0 <= 0.8 && s1 > 0.8) mid = 0.5 * (s0 + s1), width = s1 - s0;
    }
    veer_plan_destroy(p0);
    cr_assert(mid > 0.0 && width > 0.05, "coarse grid: interval %g rad", width);
    veer_footprint fp = veer_footprint_rectangle(0.5, 0.5, 0.3, 0.3, 0.05);
    double rc = hypot(2.5, 0.3), phi = atan2(0.3, 2.5) + mid, rho = rc + fp.margin - 0.5e-3;
    double ux = cos(phi), uy = sin(phi), vx = -uy, vy = ux;
    double tip[2] = {-2.0 + rho * ux, rho * uy};
    double xy[6] = {tip[0], tip[1], tip[0] + 0.5 * ux + 0.02 * vx, tip[1] + 0.5 * uy + 0.02 * vy,
                    tip[0] + 0.5 * ux - 0.02 * vx, tip[1] + 0.5 * uy - 0.02 * vy};
    veer_range r = veer_default_range();
    veer_outline z = poly(xy, 3);
    cr_assert_eq(veer_range_add_speed_zone(&r, &z, 0.4, NULL), VEER_OK);
    veer_plan *p = NULL;
    veer_diag diag;
    cr_assert_eq(veer_plan_create_in_range(&d, &l, &route, &opt, &r, &fp, &p, &diag), VEER_OK, "%s", diag.message);
    int met = 0;
    for (long k = 0; k * 1e-3 <= veer_plan_duration(p); k++) {
        veer_sample s;
        cr_assert_eq(veer_plan_sample(p, k * 1e-3, &s), VEER_OK);
        int zi;
        double cap = t_speed_cap(&r, &fp, s.pose, &zi);
        if (zi < 0) continue;
        met++;
        double v = hypot(s.twist_world[0], s.twist_world[1]);
        cr_assert(v <= cap * (1.0 + 1e-9), "t %.3f s %.4f: speed %.4f over the cap %.2f", s.t, s.s, v, cap);
    }
    cr_expect(met > 5, "the corner meets the zone for %d ms", met);
    veer_plan_destroy(p);
}

/* Bad input from anywhere (a file, a radio, Python): random counts and
 * coordinates, NaN, infinities, huge and tiny values, repeated points.
 * Never a crash; a refused outline gets a named status; an accepted one
 * gives finite answers. */
Test(range_geom, random_garbage_never_crashes) {
    unsigned long long state = 0x6a09e667f3bcc909ull;
    const double odd[] = {T_NAN, T_INF, -T_INF, 1e300, -1e300, 1e-310, 0.0, 1e6, 2e6, 1e-7};
    int accepted = 0;
    for (int it = 0; it < 3000; it++) {
        veer_outline a = veer_default_outline(), b = veer_default_outline();
        veer_outline *o[2] = {&a, &b};
        for (int w = 0; w < 2; w++) {
            state = state * 6364136223846793005ull + 1442695040888963407ull;
            int n = (int)(state >> 33) % 75 - 5;
            o[w]->count = n;
            int m = n < 0 ? 0 : n > VEER_MAX_OUTLINE_VERTICES ? VEER_MAX_OUTLINE_VERTICES : n;
            if (it % 2 && m >= 3) {
                /* a star polygon (simple) at a random scale and offset, now and then one vertex spoilt */
                double scale = pow(10.0, (double)((state >> 20) % 11) - 5.0), off = (double)((state >> 8) % 1000) - 500.0;
                for (int i = 0; i < m; i++) {
                    state = state * 6364136223846793005ull + 1442695040888963407ull;
                    double ang = 6.283185307179586 * (i + 0.8 * (double)((state >> 40) % 1000) / 1000.0) / m;
                    double rad = scale * (0.2 + (double)((state >> 20) % 1000) / 1000.0);
                    o[w]->points[i][0] = off + rad * cos(ang);
                    o[w]->points[i][1] = off + rad * sin(ang);
                }
                if ((state >> 50) % 4 == 0) o[w]->points[(state >> 12) % (unsigned)m][(state >> 11) & 1] = odd[(state >> 30) % 10];
                continue;
            }
            for (int i = 0; i < m; i++)
                for (int k = 0; k < 2; k++) {
                    state = state * 6364136223846793005ull + 1442695040888963407ull;
                    unsigned r = (unsigned)(state >> 40);
                    double v = r % 17 == 0 ? odd[r % 10] : (double)(r % 20001) * 1e-3 - 10.0;
                    if (r % 23 == 0 && i > 0) v = o[w]->points[i - 1][k];
                    if (r % 29 == 0) v *= 1e-7;
                    o[w]->points[i][k] = v;
                }
        }
        veer_diag d;
        veer_status sa = veer_outline_check(&a, &d);
        cr_assert(sa == VEER_OK || sa == VEER_ERR_VALUE || sa == VEER_ERR_CAPACITY || sa == VEER_ERR_GEOMETRY);
        cr_assert_eq(sa == VEER_OK, d.message[0] == '\0', "a message exactly when refused");
        veer_status sb = veer_outline_check(&b, &d);
        double v = 12345.0;
        int in = 7;
        veer_status st = veer_outline_distance(&a, &b, &v);
        cr_assert_eq(st == VEER_OK, sa == VEER_OK && sb == VEER_OK);
        if (st != VEER_OK) {
            cr_assert_eq(v, 12345.0, "output untouched on failure");
            continue;
        }
        accepted++;
        cr_assert(isfinite(v) && v >= 0.0);
        cr_assert_eq(veer_outline_clearance(&a, &b, it & 1, &v), VEER_OK);
        cr_assert(isfinite(v));
        cr_assert_eq(veer_outline_contains(&a, b.points[0][0], b.points[0][1], &in), VEER_OK);
        cr_assert(in == 0 || in == 1);
        cr_assert_eq(veer_outline_point_distance(&a, 0.5, -0.5, &v), VEER_OK);
        cr_assert(isfinite(v));
    }
    cr_expect(accepted > 300, "many pairs are valid: %d", accepted);
}
