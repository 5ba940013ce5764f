/* Criterion suite for the PATH box (src/path.c) and the route helpers (src/route.c).
 * Scenarios are made-up routes on an invented practice range.
 * SPDX-License-Identifier: MIT */
#include <criterion/criterion.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include "internal.h"

#define PI VEER_PI
#define DEG (PI / 180.0)
#define T_NAN ((double)NAN) /* NAN is a float constant */
/* path.c opens a new unwrap reference every 2 rad of bearing sweep */
#define TOWARD_REGION 2.0

/* The paths' storage at the library maxima (the path does not own it). The
 * piece view shares g_path's pieces and has segments of its own. */
static veer_path_piece g_pieces[VEER_PATH_MAX_PIECES];
static veer_path_segment g_segments[VEER_PATH_MAX_SEGMENTS];
static veer_path_segment g_view_segments[VEER_PATH_MAX_SEGMENTS];
static veer_path g_path = {.pieces = g_pieces,
                           .piece_cap = VEER_PATH_MAX_PIECES,
                           .segments = g_segments,
                           .segment_cap = VEER_PATH_MAX_SEGMENTS};
static veer_path g_view;
static veer_diag g_diag;

/* ---- helpers ------------------------------------------------------------ */

static void leg_add(veer_route *r, veer_leg leg) { cr_assert_eq(veer_route_add_leg(r, &leg), VEER_OK); }

static void wp_add(veer_route *r, double x, double y, int stop) {
    veer_waypoint w = veer_default_waypoint(x, y);
    w.stop = stop;
    cr_assert_eq(veer_route_add_waypoint(r, &w), VEER_OK);
}

static void wp_add_yaw(veer_route *r, double x, double y, int stop, double yaw) {
    veer_waypoint w = veer_default_waypoint(x, y);
    w.stop = stop;
    w.has_yaw = 1;
    w.yaw = yaw;
    cr_assert_eq(veer_route_add_waypoint(r, &w), VEER_OK);
}

static veer_leg travel(veer_heading_kind h) {
    veer_leg l = veer_default_leg(VEER_LEG_TRAVEL);
    l.heading = h;
    return l;
}

static void build_ok(const veer_route *r) {
    veer_status st = veer__path_build_route(r, &g_path, &g_diag);
    cr_assert_eq(st, VEER_OK, "build failed: %s (%s)", veer_status_name(st), g_diag.message);
}

static void eval(int seg, double s, double q[3], double dq[3], double ddq[3]) {
    veer__path_eval(&g_path, seg, s, q, dq, ddq);
}

/* A copy of g_path in which segment j is exactly piece j, so a piece can be
 * evaluated at its own end (the left limit at a join). */
static void make_piece_view(void) {
    cr_assert(g_path.piece_count <= VEER_PATH_MAX_SEGMENTS);
    g_view = g_path; /* shares the pieces */
    g_view.segments = g_view_segments;
    g_view.segment_cap = VEER_PATH_MAX_SEGMENTS;
    g_view.segment_count = g_path.piece_count;
    for (int j = 0; j < g_path.piece_count; j++) {
        veer_path_segment *sg = &g_view.segments[j];
        memset(sg, 0, sizeof *sg);
        sg->s_begin = g_path.pieces[j].s0;
        sg->s_end = g_path.pieces[j].s0 + g_path.pieces[j].len;
        sg->first_piece = j;
        sg->piece_count = 1;
    }
}

static void eval_piece(int j, double s, double q[3], double dq[3], double ddq[3]) {
    veer__path_eval(&g_view, j, s, q, dq, ddq);
}

static int seg_of_piece(int j) {
    for (int k = 0; k < g_path.segment_count; k++) {
        const veer_path_segment *sg = &g_path.segments[k];
        if (j >= sg->first_piece && j < sg->first_piece + sg->piece_count) return k;
    }
    cr_assert_fail("piece %d in no segment", j);
    return -1;
}

/* Deterministic generator (Numerical Recipes' 32-bit LCG constants, 3rd ed. 7.1). */
static unsigned g_rng = 12345u;
static double rnd(void) {
    g_rng = g_rng * 1664525u + 1013904223u;
    return (g_rng >> 8) / 16777216.0;
}

static double curvature(const double dq[3], const double ddq[3]) {
    /* signed curvature of a plane curve, (x'y'' - y'x'') / (x'^2 + y'^2)^(3/2)
     * (do Carmo, Differential Geometry of Curves and Surfaces, 1-5) */
    double n = hypot(dq[0], dq[1]);
    return (dq[0] * ddq[1] - dq[1] * ddq[0]) / (n * n * n);
}

static int near_rel(double a, double b, double tol) { return fabs(a - b) <= tol * (1.0 + fabs(b)); }

/* A travel leg through corners of several angles and a stop, starting
 * facing its first direction (+x). */
static veer_route route_mixed(veer_heading_kind h, int reversed) {
    veer_route r = veer_default_route(1.0, 2.0, reversed ? PI : 0.0);
    veer_leg l = travel(h);
    l.reversed = reversed;
    l.corner_tolerance = 0.3;
    l.toward_x = 6.0, l.toward_y = -3.0;
    l.dwell = 1.0;
    if (h == VEER_HEADING_TOWARD) r.start_yaw = atan2(-3.0 - 2.0, 6.0 - 1.0);
    leg_add(&r, l);
    wp_add_yaw(&r, 6.0, 2.0, 0, 0.8);
    wp_add(&r, 7.0, 6.0, 0);
    wp_add_yaw(&r, 12.0, 7.5, 1, -2.5);
    wp_add_yaw(&r, 15.0, 3.0, 0, 3.0);
    wp_add(&r, 11.0, 1.0, 0);
    wp_add(&r, 14.0, -1.0, 1);
    return r;
}

/* route_mixed followed by a spin and a pivot. */
static veer_route route_all_kinds(veer_heading_kind h, int reversed) {
    veer_route r = route_mixed(h, reversed);
    veer_leg spin = veer_default_leg(VEER_LEG_SPIN);
    spin.yaw = 2.0;
    spin.direction = 1;
    leg_add(&r, spin);
    veer_leg piv = veer_default_leg(VEER_LEG_PIVOT);
    piv.pivot_x = 15.0, piv.pivot_y = 0.0;
    piv.angle = -1.2;
    leg_add(&r, piv);
    return r;
}

/* ---- route helpers -------------------------------------------------------- */
/* Reference: the contract written in include/veer/route.h (no outside source). */

Test(route, defaults) {
    veer_route r = veer_default_route(1.5, -2.0, 0.25);
    cr_expect_eq(r.start_x, 1.5);
    cr_expect_eq(r.start_y, -2.0);
    cr_expect_eq(r.start_yaw, 0.25);
    cr_expect_eq(r.leg_count, 0);
    cr_expect_eq(r.waypoint_count, 0);
    cr_expect_eq(r.has_start_steer, 0);
    veer_leg l = veer_default_leg(VEER_LEG_TRAVEL);
    cr_expect_eq(l.kind, VEER_LEG_TRAVEL);
    cr_expect_eq(l.heading, VEER_HEADING_HOLD);
    cr_expect_eq(l.corner_tolerance, 0.25);
    cr_expect_eq(l.dwell, 0.0);
    cr_expect_eq(l.waypoint_count, 0);
    veer_waypoint w = veer_default_waypoint(3.0, 4.0);
    cr_expect_eq(w.x, 3.0);
    cr_expect_eq(w.y, 4.0);
    cr_expect_eq(w.stop, 0);
    cr_expect_eq(w.has_yaw, 0);
    cr_expect_eq(w.dwell, 0.0);
}

Test(route, add_leg_and_waypoints) {
    veer_route r = veer_default_route(0, 0, 0);
    veer_leg l = travel(VEER_HEADING_TANGENT);
    l.waypoint_count = 7; /* reset by add_leg */
    leg_add(&r, l);
    cr_expect_eq(r.leg_count, 1);
    cr_expect_eq(r.legs[0].waypoint_count, 0);
    cr_expect_eq(r.legs[0].heading, VEER_HEADING_TANGENT);
    wp_add(&r, 1, 0, 0);
    wp_add(&r, 2, 0, 1);
    cr_expect_eq(r.legs[0].waypoint_count, 2);
    cr_expect_eq(r.waypoint_count, 2);
    cr_expect_eq(r.waypoints[1].x, 2.0);
    cr_expect_eq(r.waypoints[1].stop, 1);
}

Test(route, add_refusals_leave_route_unchanged) {
    static veer_route r, before;
    veer_waypoint w = veer_default_waypoint(1, 1);
    r = veer_default_route(0, 0, 0);
    cr_expect_eq(veer_route_add_leg(NULL, NULL), VEER_ERR_NULL);
    cr_expect_eq(veer_route_add_waypoint(&r, NULL), VEER_ERR_NULL);
    before = r;
    cr_expect_eq(veer_route_add_waypoint(&r, &w), VEER_ERR_STATE, "no leg yet");
    cr_expect_eq(memcmp(&r, &before, sizeof r), 0);
    leg_add(&r, veer_default_leg(VEER_LEG_SPIN));
    before = r;
    cr_expect_eq(veer_route_add_waypoint(&r, &w), VEER_ERR_STATE, "last leg is a spin");
    cr_expect_eq(memcmp(&r, &before, sizeof r), 0);
    while (r.leg_count < VEER_MAX_LEGS) leg_add(&r, veer_default_leg(VEER_LEG_TRAVEL));
    for (int i = 0; i < VEER_MAX_WAYPOINTS; i++) cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    before = r;
    veer_leg l = veer_default_leg(VEER_LEG_TRAVEL);
    cr_expect_eq(veer_route_add_leg(&r, &l), VEER_ERR_CAPACITY);
    cr_expect_eq(veer_route_add_waypoint(&r, &w), VEER_ERR_CAPACITY);
    cr_expect_eq(memcmp(&r, &before, sizeof r), 0);
}

/* ---- derivatives ------------------------------------------------------------ */

/* q' and q'' against central differences of q and q': the five-point formula
 * f'(x) ~ (f(x-2h) - 8f(x-h) + 8f(x+h) - f(x+2h)) / 12h, error h^4 f^(5)/30
 * (Burden & Faires, Numerical Analysis, numerical differentiation), with h
 * scaled to the piece so tight blends are resolved. */
static void check_derivatives(void) {
    make_piece_view();
    int checked = 0, pieces = 0;
    for (int j = 0; j < g_path.piece_count; j++) {
        const veer_path_piece *pc = &g_path.pieces[j];
        double h = 1e-4 * (pc->len < 1.0 ? pc->len : 1.0);
        if (pc->len < 1e-6) continue;
        pieces++;
        for (int n = 0; n < 40; n++) {
            double s = pc->s0 + 3 * h + (pc->len - 6 * h) * rnd();
            double q[3], dq[3], ddq[3], qs[4][3], dqs[4][3], dd[3];
            const double off[4] = {-2, -1, 1, 2};
            eval_piece(j, s, q, dq, ddq);
            for (int i = 0; i < 4; i++) eval_piece(j, s + off[i] * h, qs[i], dqs[i], dd);
            for (int k = 0; k < 3; k++) {
                double fd1 = (qs[0][k] - 8 * qs[1][k] + 8 * qs[2][k] - qs[3][k]) / (12 * h);
                double fd2 = (dqs[0][k] - 8 * dqs[1][k] + 8 * dqs[2][k] - dqs[3][k]) / (12 * h);
                cr_assert(near_rel(fd1, dq[k], 1e-6), "piece %d s %.9f q'[%d] %.12g vs fd %.12g", j, s, k, dq[k],
                          fd1);
                cr_assert(near_rel(fd2, ddq[k], 1e-6), "piece %d s %.9f q''[%d] %.12g vs fd %.12g", j, s, k,
                          ddq[k], fd2);
            }
            checked++;
        }
    }
    cr_assert_eq(checked, 40 * pieces);
    cr_assert_geq(pieces, 3);
}

Test(path_derivatives, hold) {
    veer_route r = route_all_kinds(VEER_HEADING_HOLD, 0);
    build_ok(&r);
    check_derivatives();
}
Test(path_derivatives, tangent) {
    veer_route r = route_all_kinds(VEER_HEADING_TANGENT, 0);
    build_ok(&r);
    check_derivatives();
}
Test(path_derivatives, tangent_reversed) {
    veer_route r = route_all_kinds(VEER_HEADING_TANGENT, 1);
    build_ok(&r);
    check_derivatives();
}
Test(path_derivatives, toward) {
    veer_route r = route_all_kinds(VEER_HEADING_TOWARD, 0);
    build_ok(&r);
    check_derivatives();
}
Test(path_derivatives, blend) {
    veer_route r = route_all_kinds(VEER_HEADING_BLEND, 0);
    build_ok(&r);
    check_derivatives();
}
Test(path_derivatives, start_fade) {
    /* a 3-degree start mismatch, faded in along the first line */
    veer_route r = veer_default_route(0, 0, 3.0 * DEG);
    leg_add(&r, travel(VEER_HEADING_TANGENT));
    wp_add(&r, 0.6, 0, 0);
    wp_add(&r, 0.6, 2, 1);
    build_ok(&r);
    check_derivatives();
}

/* ---- continuity ------------------------------------------------------------ */

/* Left and right limits of q, q', q'' at every join inside a segment, the
 * curvature there (a C2 curve has continuous curvature, do Carmo 1-5), and
 * zero curvature at both ends of every corner blend (the join with a line). */
static void check_joins(int min_joins) {
    make_piece_view();
    int joins = 0;
    for (int k = 0; k < g_path.segment_count; k++) {
        const veer_path_segment *sg = &g_path.segments[k];
        for (int j = sg->first_piece + 1; j < sg->first_piece + sg->piece_count; j++) {
            double s = g_path.pieces[j].s0;
            double ql[3], dql[3], ddql[3], qr[3], dqr[3], ddqr[3];
            eval_piece(j - 1, s, ql, dql, ddql);
            eval_piece(j, s, qr, dqr, ddqr);
            for (int c = 0; c < 3; c++) {
                cr_assert(near_rel(ql[c], qr[c], 1e-9), "join %d q[%d] %.15g / %.15g", j, c, ql[c], qr[c]);
                cr_assert(near_rel(dql[c], dqr[c], 1e-9), "join %d q'[%d] %.15g / %.15g", j, c, dql[c], dqr[c]);
                cr_assert(near_rel(ddql[c], ddqr[c], 1e-9), "join %d q''[%d] %.15g / %.15g", j, c, ddql[c],
                          ddqr[c]);
            }
            if (hypot(dql[0], dql[1]) > 0.0) {
                double kl = curvature(dql, ddql), kr = curvature(dqr, ddqr);
                cr_assert(fabs(kl - kr) < 1e-9, "join %d curvature %.15g / %.15g", j, kl, kr);
                cr_assert(fabs(kl) < 1e-9, "join %d: a blend end has zero curvature, got %.3g", j, kl);
            }
            joins++;
        }
        /* the whole path: pose continuous (yaw unwrapped) from segment to segment */
        if (k + 1 < g_path.segment_count) {
            double qa[3], qb[3], d[3], dd[3];
            eval(k, sg->s_end, qa, d, dd);
            eval(k + 1, g_path.segments[k + 1].s_begin, qb, d, dd);
            cr_assert_eq(sg->s_end, g_path.segments[k + 1].s_begin);
            for (int c = 0; c < 3; c++) cr_assert(fabs(qa[c] - qb[c]) < 1e-9, "segment %d/%d q[%d]", k, k + 1, c);
        }
    }
    cr_assert_geq(joins, min_joins);
}

Test(path_continuity, hold) {
    veer_route r = route_all_kinds(VEER_HEADING_HOLD, 0);
    build_ok(&r);
    check_joins(4);
}
Test(path_continuity, tangent) {
    veer_route r = route_all_kinds(VEER_HEADING_TANGENT, 1);
    build_ok(&r);
    check_joins(4);
}
Test(path_continuity, toward) {
    veer_route r = route_all_kinds(VEER_HEADING_TOWARD, 0);
    build_ok(&r);
    check_joins(4);
}
Test(path_continuity, blend) {
    veer_route r = route_all_kinds(VEER_HEADING_BLEND, 0);
    build_ok(&r);
    check_joins(4);
}
Test(path_continuity, blends_meeting_on_a_short_line) {
    /* two corners on either end of a 1.1 m line, tolerance large: each blend
     * takes half of it and they join directly */
    veer_route r = veer_default_route(0, 0, 0);
    veer_leg l = travel(VEER_HEADING_TANGENT);
    l.corner_tolerance = 2.0;
    leg_add(&r, l);
    wp_add(&r, 5, 0, 0);
    wp_add(&r, 5.44, 1.008, 0);
    wp_add(&r, 9, 1, 1);
    build_ok(&r);
    cr_assert_eq(g_path.segment_count, 1);
    cr_assert_eq(g_path.piece_count, 4, "line, corner, corner, line (got %d pieces)", g_path.piece_count);
    check_joins(3);
    check_derivatives();
}

Test(path_continuity, travel_speed_never_zero) {
    veer_heading_kind hs[] = {VEER_HEADING_HOLD, VEER_HEADING_TANGENT, VEER_HEADING_TOWARD, VEER_HEADING_BLEND};
    for (int i = 0; i < 4; i++) {
        veer_route r = route_all_kinds(hs[i], 0);
        build_ok(&r);
        for (int k = 0; k < g_path.segment_count; k++) {
            const veer_path_segment *sg = &g_path.segments[k];
            for (int n = 0; n <= 2000; n++) {
                double s = sg->s_begin + (sg->s_end - sg->s_begin) * n / 2000.0, q[3], dq[3], ddq[3];
                eval(k, s, q, dq, ddq);
                double sp = sqrt(dq[0] * dq[0] + dq[1] * dq[1] + dq[2] * dq[2]);
                cr_assert_gt(sp, 0.5, "segment %d s %.6f |q'| %.3g", k, s, sp);
                for (int c = 0; c < 3; c++) cr_assert(isfinite(q[c]) && isfinite(dq[c]) && isfinite(ddq[c]));
            }
        }
    }
}

/* ---- lines ---------------------------------------------------------------- */

Test(path_line, straight_is_arc_length) {
    /* a 3-4-5 triangle's hypotenuse: length 5 exactly; a line parametrised by
     * arc length has |q'| = 1 and q'' = 0 (do Carmo 1-3) */
    veer_route r = veer_default_route(1, 2, 0.3);
    leg_add(&r, travel(VEER_HEADING_HOLD));
    wp_add(&r, 4, 6, 0);
    build_ok(&r);
    cr_assert_eq(g_path.segment_count, 1);
    cr_assert(fabs(g_path.length - 5.0) < 1e-15);
    for (int n = 0; n <= 50; n++) {
        double s = 5.0 * n / 50, q[3], dq[3], ddq[3];
        eval(0, s, q, dq, ddq);
        cr_assert(fabs(q[0] - (1 + 0.6 * s)) < 1e-14);
        cr_assert(fabs(q[1] - (2 + 0.8 * s)) < 1e-14);
        cr_assert(fabs(q[2] - 0.3) < 1e-15);
        cr_assert(fabs(hypot(dq[0], dq[1]) - 1.0) < 1e-15);
        cr_assert(ddq[0] == 0.0 && ddq[1] == 0.0 && dq[2] == 0.0 && ddq[2] == 0.0);
    }
    cr_assert(fabs(g_path.end_pose[0] - 4) < 1e-14 && fabs(g_path.end_pose[1] - 6) < 1e-14);
    cr_assert(fabs(g_path.end_pose[2] - 0.3) < 1e-15);
    /* clamping outside the segment */
    double q[3], dq[3], ddq[3];
    eval(0, -3.0, q, dq, ddq);
    cr_assert(fabs(q[0] - 1) < 1e-15 && fabs(q[1] - 2) < 1e-15);
    eval(0, 99.0, q, dq, ddq);
    cr_assert(fabs(q[0] - 4) < 1e-14 && fabs(q[1] - 6) < 1e-14);
    eval(5, T_NAN, q, dq, ddq);
    cr_assert(isfinite(q[0]) && isfinite(q[1]) && isfinite(q[2]));
}

/* ---- corners --------------------------------------------------------------- */

/* Dense sampling of the blend: closest approach to the waypoint, and the
 * inscribed-polygon length (arc length is the limit of inscribed polygons,
 * do Carmo 1-3; error O(h^2) for a smooth curve). */
static void measure_corner(int j, double px, double py, double *closest, double *polyline) {
    const veer_path_piece *pc = &g_path.pieces[j];
    const int n = 200000;
    int seg = seg_of_piece(j);
    double best = HUGE_VAL, len = 0.0, prev[2] = {0, 0};
    for (int i = 0; i <= n; i++) {
        double q[3], dq[3], ddq[3];
        eval(seg, pc->s0 + pc->len * i / n, q, dq, ddq);
        double d = hypot(q[0] - px, q[1] - py);
        if (d < best) best = d;
        if (i > 0) len += hypot(q[0] - prev[0], q[1] - prev[1]);
        prev[0] = q[0], prev[1] = q[1];
    }
    *closest = best;
    *polyline = len;
}

Test(path_corner, deviation_and_arc_length) {
    const double angles[] = {1, 10, 30, 45, 90, 120, 135, 160, 170, 175};
    const double tol = 0.1;
    for (size_t a = 0; a < sizeof angles / sizeof angles[0]; a++) {
        for (int side = -1; side <= 1; side += 2) {
            double th = side * angles[a] * DEG;
            veer_route r = veer_default_route(0, 0, 0);
            veer_leg l = travel(VEER_HEADING_TANGENT);
            l.corner_tolerance = tol;
            leg_add(&r, l);
            double len = angles[a] < 5 ? 400.0 : 10.0; /* a 1-degree corner needs a long blend */
            wp_add(&r, len, 0, 0);
            wp_add(&r, len + len * cos(th), len * sin(th), 1);
            build_ok(&r);
            cr_assert_eq(g_path.piece_count, 3, "%g deg: line, corner, line", angles[a]);
            double closest, poly;
            measure_corner(1, len, 0.0, &closest, &poly);
            double plen = g_path.pieces[1].len;
            cr_log_info("corner %+6.1f deg: closest %.9f m (tol %.3f), parameter %.9f, polyline %.9f (%.2e)",
                        side * angles[a], closest, tol, plen, poly, (plen - poly) / poly);
            cr_assert(closest <= tol * (1 + 1e-9), "%g deg: closest %.9g beyond tolerance", th / DEG, closest);
            cr_assert(closest >= 0.99 * tol, "%g deg: closest %.9g not within 1%% of tolerance", th / DEG, closest);
            cr_assert(fabs(plen - poly) <= 0.02 * poly, "%g deg: parameter %.9g vs arc %.9g", th / DEG, plen, poly);
            /* the tangent heading ends the corner along the new line */
            double q[3], dq[3], ddq[3];
            eval(0, g_path.length, q, dq, ddq);
            cr_assert(fabs(q[2] - th) < 1e-12, "end yaw %.15g vs %.15g", q[2], th);
        }
    }
}

Test(path_corner, capped_by_short_lines) {
    /* 1 m lines and a 1 m tolerance: the blend may use at most 99% of a line
     * next to a rest, so it passes closer than the tolerance */
    veer_route r = veer_default_route(0, 0, 0);
    veer_leg l = travel(VEER_HEADING_HOLD);
    l.corner_tolerance = 1.0;
    leg_add(&r, l);
    wp_add(&r, 1, 0, 0);
    wp_add(&r, 1, 1, 1);
    build_ok(&r);
    cr_assert_eq(g_path.piece_count, 3);
    double closest, poly;
    measure_corner(1, 1.0, 0.0, &closest, &poly);
    cr_assert_lt(closest, 1.0);
    cr_assert_gt(closest, 0.2);
    /* the first line keeps 1% of its length */
    cr_assert(fabs(g_path.pieces[0].len - 0.01) < 1e-12, "first line %.15g", g_path.pieces[0].len);
    cr_assert(fabs(g_path.pieces[1].len - poly) <= 0.02 * poly);
}

Test(path_corner, collinear_pass_through) {
    veer_route r = veer_default_route(0, 0, 0);
    leg_add(&r, travel(VEER_HEADING_TANGENT));
    wp_add(&r, 2, 0, 0);
    wp_add(&r, 5, 0, 1);
    build_ok(&r);
    cr_assert_eq(g_path.segment_count, 1);
    cr_assert(fabs(g_path.length - 5.0) < 1e-14);
    double q[3], dq[3], ddq[3];
    eval(0, 3.0, q, dq, ddq);
    cr_assert(fabs(q[0] - 3.0) < 1e-14 && fabs(q[1]) < 1e-14 && fabs(q[2]) < 1e-15);
}

/* ---- heading laws --------------------------------------------------------------- */

Test(path_heading, tangent_faces_travel) {
    /* yaw is the direction of the velocity (or its opposite when reversed):
     * the tangent direction of a regular curve is atan2(y', x') */
    for (int rev = 0; rev <= 1; rev++) {
        veer_route r = route_mixed(VEER_HEADING_TANGENT, rev);
        build_ok(&r);
        int travel_segments = 0;
        for (int k = 0; k < g_path.segment_count; k++) {
            const veer_path_segment *sg = &g_path.segments[k];
            double q[3], dq[3], ddq[3];
            eval(k, 0.5 * (sg->s_begin + sg->s_end), q, dq, ddq);
            if (hypot(dq[0], dq[1]) == 0.0) continue; /* an automatic spin */
            travel_segments++;
            for (int n = 0; n <= 500; n++) {
                double s = sg->s_begin + (sg->s_end - sg->s_begin) * n / 500.0;
                eval(k, s, q, dq, ddq);
                /* the direction of travel from positions alone: a chord of 1e-6 m */
                double qa[3], qb[3], d[3], dd[3];
                eval(k, s - 1e-6, qa, d, dd); /* clamped to the segment at its ends */
                eval(k, s + 1e-6, qb, d, dd);
                double dir = atan2(qb[1] - qa[1], qb[0] - qa[0]) + (rev ? PI : 0.0);
                cr_assert(fabs(veer__wrap(q[2] - dir)) < 1e-6, "seg %d s %.6f yaw %.9f dir %.9f", k, s, q[2], dir);
            }
        }
        cr_assert_gt(travel_segments, 1);
    }
}

Test(path_heading, tangent_yaw_is_continuous_and_unwrapped) {
    /* a loop that turns through more than a full turn: yaw keeps counting */
    veer_route r = veer_default_route(0, 0, 0);
    veer_leg l = travel(VEER_HEADING_TANGENT);
    l.corner_tolerance = 0.5;
    leg_add(&r, l);
    wp_add(&r, 10, 0, 0);
    wp_add(&r, 10, 10, 0);
    wp_add(&r, 0, 10, 0);
    wp_add(&r, 0, 2, 0);
    wp_add(&r, 8, 2, 0);
    wp_add(&r, 8, 6, 1);
    build_ok(&r);
    double q[3], dq[3], ddq[3], prev = 0.0;
    for (int n = 0; n <= 20000; n++) {
        eval(0, g_path.length * n / 20000.0, q, dq, ddq);
        cr_assert(fabs(q[2] - prev) < 0.01);
        prev = q[2];
    }
    cr_assert(fabs(q[2] - 2.5 * PI) < 1e-12, "end yaw %.15g", q[2]);
    cr_assert(fabs(g_path.end_pose[2] - 2.5 * PI) < 1e-12);
}

/* Checks the toward law at dense samples: the yaw points at T (bearing of a
 * point, atan2 of the difference vector), and it is the continuous unwrap of
 * that bearing, compared against an unwrap done here from positions only. */
static void check_toward(double tx, double ty, double start_yaw) {
    double q[3], dq[3], ddq[3];
    double unwrapped = start_yaw, prev_bearing = start_yaw;
    for (int k = 0; k < g_path.segment_count; k++) {
        const veer_path_segment *sg = &g_path.segments[k];
        for (int n = 0; n <= 40000; n++) {
            double s = sg->s_begin + (sg->s_end - sg->s_begin) * n / 40000.0;
            eval(k, s, q, dq, ddq);
            double bearing = atan2(ty - q[1], tx - q[0]);
            unwrapped += veer__wrap(bearing - prev_bearing);
            prev_bearing = bearing;
            cr_assert(fabs(q[2] - unwrapped) < 1e-9, "seg %d s %.6f yaw %.12f expected %.12f", k, s, q[2],
                      unwrapped);
        }
    }
}

Test(path_heading, toward_faces_the_point) {
    veer_route r = route_mixed(VEER_HEADING_TOWARD, 0);
    build_ok(&r);
    check_toward(6.0, -3.0, r.start_yaw);
}

/* A 170-degree pass-through with the faced point just inside the nose of its
 * blend, depth inside the blend's closest point: the cart wraps around the
 * point, most of the bearing sweep inside the one blend piece. */
static double toward_hairpin(double depth) {
    double th = 170.0 * DEG, tol = 0.5;
    double ux = cos(th) - 1.0, uy = sin(th), un = hypot(ux, uy); /* into the turn, along the bisector */
    double tx = 10.0 + (tol + depth) * ux / un, ty = (tol + depth) * uy / un;
    veer_route r = veer_default_route(0, 0, atan2(ty, tx));
    veer_leg l = travel(VEER_HEADING_TOWARD);
    l.toward_x = tx, l.toward_y = ty;
    l.corner_tolerance = tol;
    leg_add(&r, l);
    wp_add(&r, 10, 0, 0);
    wp_add(&r, 10 + 10 * cos(th), 10 * sin(th), 1);
    build_ok(&r);
    cr_assert_eq(g_path.piece_count, 3);
    check_toward(tx, ty, r.start_yaw);
    check_derivatives();
    check_joins(2);
    double qa[3], qb[3], dq[3], ddq[3];
    const veer_path_piece *c = &g_path.pieces[1];
    eval(0, c->s0, qa, dq, ddq);
    eval(0, c->s0 + c->len, qb, dq, ddq);
    cr_log_info("toward, point %.3f m inside the blend: sweep %.4f rad inside it", depth, qb[2] - qa[2]);
    return qb[2] - qa[2];
}

Test(path_heading, toward_point_inside_a_hairpin) {
    double sweep = toward_hairpin(0.05);
    cr_assert_gt(sweep, TOWARD_REGION, "two unwrap regions needed: %.6f rad", sweep);
    sweep = toward_hairpin(0.005);
    cr_assert_gt(sweep, 2.0 * TOWARD_REGION, "three unwrap regions needed: %.6f rad", sweep);
}

Test(path_heading, blend_hits_knots) {
    /* the blend law's contract (route.h): the yaw passes through each knot
     * with zero rate, and stays after the last one */
    veer_route r = route_mixed(VEER_HEADING_BLEND, 0);
    build_ok(&r);
    double q[3], dq[3], ddq[3];
    /* waypoint 0 (corner, yaw 0.8): the middle of the first corner piece */
    const veer_path_piece *c0 = &g_path.pieces[1];
    eval(0, c0->s0 + 0.5 * c0->len, q, dq, ddq);
    cr_assert(fabs(q[2] - 0.8) < 1e-12, "knot yaw %.15g", q[2]);
    cr_assert(fabs(dq[2]) < 1e-12);
    /* waypoint 2 (stop, yaw -2.5) */
    eval(0, g_path.segments[0].s_end, q, dq, ddq);
    cr_assert(fabs(veer__wrap(q[2] + 2.5)) < 1e-12);
    cr_assert(fabs(q[2] - 0.8) < PI, "unwrapped the shorter way from 0.8: %.6f", q[2]);
    /* waypoint 3 (corner, yaw 3.0) */
    int j = g_path.segments[1].first_piece + 1;
    eval(1, g_path.pieces[j].s0 + 0.5 * g_path.pieces[j].len, q, dq, ddq);
    cr_assert(fabs(veer__wrap(q[2] - 3.0)) < 1e-12);
    double last = q[2];
    for (int n = 0; n <= 100; n++) {
        double s = g_path.pieces[j].s0 + 0.5 * g_path.pieces[j].len +
                   (g_path.length - g_path.pieces[j].s0 - 0.5 * g_path.pieces[j].len) * n / 100.0;
        eval(1, s, q, dq, ddq);
        cr_assert(fabs(q[2] - last) < 1e-12 && dq[2] == 0.0, "constant after the last knot");
    }
}

Test(path_heading, hold_keeps_start_yaw) {
    veer_route r = route_mixed(VEER_HEADING_HOLD, 0);
    r.start_yaw = 2.2;
    build_ok(&r);
    for (int k = 0; k < g_path.segment_count; k++)
        for (int n = 0; n <= 100; n++) {
            const veer_path_segment *sg = &g_path.segments[k];
            double q[3], dq[3], ddq[3];
            eval(k, sg->s_begin + (sg->s_end - sg->s_begin) * n / 100.0, q, dq, ddq);
            cr_assert(q[2] == 2.2 && dq[2] == 0.0 && ddq[2] == 0.0);
        }
}

Test(path_heading, spin_directions) {
    /* spin contract (route.h): shorter way in (-pi, pi], ccw in [0, 2pi), cw in (-2pi, 0] */
    struct {
        double from, to;
        int dir;
        double delta;
    } cases[] = {
        {0.0, 1.0, 0, 1.0},          {0.0, -1.0, 0, -1.0},           {3.0, -3.0, 0, 2 * PI - 6.0},
        {0.0, -1.0, 1, 2 * PI - 1.0}, {0.0, 1.0, -1, 1.0 - 2 * PI},  {7.0, 7.0 + 0.5, 1, 0.5},
        {0.0, PI, 0, PI},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        veer_route r = veer_default_route(2, 3, cases[i].from);
        veer_leg l = veer_default_leg(VEER_LEG_SPIN);
        l.yaw = cases[i].to;
        l.direction = cases[i].dir;
        l.dwell = 0.5;
        leg_add(&r, l);
        build_ok(&r);
        cr_assert_eq(g_path.segment_count, 1);
        cr_assert_eq(g_path.segments[0].waypoint, -1);
        cr_assert_eq(g_path.segments[0].dwell, 0.5);
        cr_assert(fabs(g_path.length - fabs(cases[i].delta)) < 1e-12, "case %zu length %.15g", i, g_path.length);
        double q[3], dq[3], ddq[3];
        for (int n = 0; n <= 10; n++) {
            eval(0, g_path.length * n / 10.0, q, dq, ddq);
            cr_assert(q[0] == 2.0 && q[1] == 3.0 && dq[0] == 0.0 && dq[1] == 0.0);
            cr_assert(fabs(q[2] - (cases[i].from + cases[i].delta * n / 10.0)) < 1e-12);
        }
        cr_assert(fabs(veer__wrap(g_path.end_pose[2] - cases[i].to)) < 1e-12);
    }
}

Test(path_heading, pivot_is_a_rigid_rotation) {
    /* rotation of a rigid body about a fixed point C: every body point moves
     * on a circle about C, p - C = R(yaw - yaw0) (p0 - C) (Lynch & Park,
     * Modern Robotics, 3.2) */
    double cx = 1.0, cy = -2.0, x0 = 3.0, y0 = 1.0, yaw0 = 0.4, ang = 2.5;
    for (int sgn = -1; sgn <= 1; sgn += 2) {
        veer_route r = veer_default_route(x0, y0, yaw0);
        veer_leg l = veer_default_leg(VEER_LEG_PIVOT);
        l.pivot_x = cx, l.pivot_y = cy, l.angle = sgn * ang;
        leg_add(&r, l);
        build_ok(&r);
        cr_assert(fabs(g_path.length - ang) < 1e-15);
        double rad = hypot(x0 - cx, y0 - cy);
        for (int n = 0; n <= 200; n++) {
            double s = ang * n / 200.0, q[3], dq[3], ddq[3];
            eval(0, s, q, dq, ddq);
            cr_assert(fabs(hypot(q[0] - cx, q[1] - cy) - rad) < 1e-12);
            double th = q[2] - yaw0;
            cr_assert(fabs(th - sgn * s) < 1e-12);
            double ex = cx + cos(th) * (x0 - cx) - sin(th) * (y0 - cy);
            double ey = cy + sin(th) * (x0 - cx) + cos(th) * (y0 - cy);
            cr_assert(fabs(q[0] - ex) < 1e-12 && fabs(q[1] - ey) < 1e-12);
            /* a body-fixed point: C in body coordinates stays put */
            double bx = cos(q[2]) * (cx - q[0]) + sin(q[2]) * (cy - q[1]);
            double by = -sin(q[2]) * (cx - q[0]) + cos(q[2]) * (cy - q[1]);
            double bx0 = cos(yaw0) * (cx - x0) + sin(yaw0) * (cy - y0);
            double by0 = -sin(yaw0) * (cx - x0) + cos(yaw0) * (cy - y0);
            cr_assert(fabs(bx - bx0) < 1e-12 && fabs(by - by0) < 1e-12);
        }
    }
    /* a pivot about the body origin is a spin */
    veer_route r = veer_default_route(x0, y0, yaw0);
    veer_leg l = veer_default_leg(VEER_LEG_PIVOT);
    l.pivot_x = x0, l.pivot_y = y0, l.angle = 1.0;
    leg_add(&r, l);
    build_ok(&r);
    double q[3], dq[3], ddq[3];
    eval(0, 0.5, q, dq, ddq);
    cr_assert(q[0] == x0 && q[1] == y0 && fabs(q[2] - yaw0 - 0.5) < 1e-15);
    cr_assert(dq[0] == 0.0 && dq[1] == 0.0 && dq[2] == 1.0);
}

/* ---- segmentation ----------------------------------------------------------- */
/* Reference: the segment contract in src/internal.h and route.h (rest to rest,
 * dwell, automatic spins); positions and angles checked by plain arithmetic. */

Test(path_segments, stops_split_and_carry_dwell) {
    veer_route r = veer_default_route(0, 0, 0);
    veer_leg l = travel(VEER_HEADING_HOLD);
    l.dwell = 2.0;
    leg_add(&r, l);
    veer_waypoint w = veer_default_waypoint(3, 0);
    w.stop = 1, w.dwell = 1.5;
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    wp_add(&r, 3, 4, 0);
    w = veer_default_waypoint(6, 4);
    w.dwell = 0.5; /* the leg's last waypoint is a stop even when stop = 0 */
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    veer_leg sp = veer_default_leg(VEER_LEG_SPIN);
    sp.yaw = 1.0, sp.dwell = 0.25;
    leg_add(&r, sp);
    build_ok(&r);
    cr_assert_eq(g_path.segment_count, 3);
    const veer_path_segment *s = g_path.segments;
    cr_expect_eq(s[0].leg, 0);
    cr_expect_eq(s[0].waypoint, 0);
    cr_expect_eq(s[0].dwell, 1.5);
    cr_expect(fabs(s[0].s_begin) < 1e-15 && fabs(s[0].s_end - 3.0) < 1e-12);
    cr_expect_eq(s[1].leg, 0);
    cr_expect_eq(s[1].waypoint, 2);
    cr_expect_eq(s[1].dwell, 2.5);
    cr_expect_eq(s[2].leg, 1);
    cr_expect_eq(s[2].waypoint, -1);
    cr_expect_eq(s[2].dwell, 0.25);
    cr_expect(fabs(s[2].s_end - s[2].s_begin - 1.0) < 1e-12);
    cr_expect(fabs(g_path.length - s[2].s_end) < 1e-15);
    cr_expect_eq(veer__path_segment_at(&g_path, 2.9), 0);
    cr_expect_eq(veer__path_segment_at(&g_path, s[0].s_end), 1, "the later segment at a shared rest");
    cr_expect_eq(veer__path_segment_at(&g_path, -5.0), 0);
    cr_expect_eq(veer__path_segment_at(&g_path, 1e9), 2);
    cr_expect_eq(veer__path_segment_at(&g_path, T_NAN), 0);
    /* rest to rest: the stop is exactly the waypoint */
    double q[3], dq[3], ddq[3];
    eval(0, s[0].s_end, q, dq, ddq);
    cr_expect(fabs(q[0] - 3.0) < 1e-12 && fabs(q[1]) < 1e-12);
    cr_expect(fabs(g_path.end_pose[0] - 6.0) < 1e-12 && fabs(g_path.end_pose[1] - 4.0) < 1e-12);
    cr_expect(fabs(g_path.end_pose[2] - 1.0) < 1e-12);
}

Test(path_segments, tangent_stop_with_a_turn_spins_in_place) {
    veer_route r = veer_default_route(0, 0, 0);
    leg_add(&r, travel(VEER_HEADING_TANGENT));
    veer_waypoint w = veer_default_waypoint(3, 0);
    w.stop = 1, w.dwell = 0.7;
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    wp_add(&r, 3, 4, 1);
    build_ok(&r);
    cr_assert_eq(g_path.segment_count, 3);
    const veer_path_segment *s = g_path.segments;
    cr_expect_eq(s[0].waypoint, 0);
    cr_expect_eq(s[0].dwell, 0.7);
    cr_expect_eq(s[1].waypoint, -1, "the automatic spin");
    cr_expect_eq(s[1].leg, 0);
    cr_expect_eq(s[1].dwell, 0.0);
    cr_expect(fabs(s[1].s_end - s[1].s_begin - PI / 2) < 1e-12);
    cr_expect_eq(s[2].waypoint, 1);
    double q[3], dq[3], ddq[3];
    eval(1, 0.5 * (s[1].s_begin + s[1].s_end), q, dq, ddq);
    cr_expect(fabs(q[0] - 3) < 1e-12 && fabs(q[1]) < 1e-12 && fabs(q[2] - PI / 4) < 1e-12);
    cr_expect(dq[0] == 0.0 && dq[1] == 0.0 && dq[2] == 1.0);
    eval(2, s[2].s_begin + 1.0, q, dq, ddq);
    cr_expect(fabs(q[2] - PI / 2) < 1e-12);
    cr_expect(fabs(g_path.length - (7.0 + PI / 2)) < 1e-12);
}

Test(path_segments, small_turn_at_a_stop_fades) {
    /* 3 degrees at a tangent stop: no spin, the yaw eases onto the new tangent
     * within min(first line, 1 m) */
    double th = 3.0 * DEG;
    veer_route r = veer_default_route(0, 0, 0);
    leg_add(&r, travel(VEER_HEADING_TANGENT));
    wp_add(&r, 3, 0, 1);
    wp_add(&r, 3 + 5 * cos(th), 5 * sin(th), 1);
    build_ok(&r);
    cr_assert_eq(g_path.segment_count, 2);
    double q[3], dq[3], ddq[3];
    double s1 = g_path.segments[1].s_begin;
    eval(1, s1, q, dq, ddq);
    cr_expect(fabs(q[2]) < 1e-15, "starts at the yaw it had: %.3g", q[2]);
    cr_expect(fabs(dq[2]) < 1e-15 && fabs(ddq[2]) < 1e-15);
    eval(1, s1 + 1.0, q, dq, ddq);
    cr_expect(fabs(q[2] - th) < 1e-15, "on the tangent after 1 m: %.15g", q[2]);
    eval(1, s1 + 0.5, q, dq, ddq);
    cr_expect(fabs(q[2] - 0.5 * th) < 1e-12, "half way at the fade's middle (smootherstep symmetry)");
}

Test(path_segments, start_mismatch_refused_names_the_leg) {
    veer_route r = veer_default_route(0, 0, 0);
    leg_add(&r, travel(VEER_HEADING_HOLD));
    wp_add(&r, 4, 0, 1);
    leg_add(&r, travel(VEER_HEADING_TANGENT));
    wp_add(&r, 4, 5, 1);
    veer_status st = veer__path_build_route(&r, &g_path, &g_diag);
    cr_assert_eq(st, VEER_ERR_GEOMETRY);
    cr_assert_eq(g_diag.status, VEER_ERR_GEOMETRY);
    cr_assert_eq(g_diag.leg, 1);
    cr_assert(strstr(g_diag.message, "leg 1 starts facing 0.00 rad") != NULL, "%s", g_diag.message);
    cr_assert(strstr(g_diag.message, "1.57") != NULL && strstr(g_diag.message, "spin leg") != NULL, "%s",
              g_diag.message);
    cr_assert_eq(g_path.piece_count, 0);
    cr_assert_eq(g_path.segment_count, 0);
    /* with a spin leg first it builds */
    veer_route r2 = veer_default_route(0, 0, 0);
    leg_add(&r2, travel(VEER_HEADING_HOLD));
    wp_add(&r2, 4, 0, 1);
    veer_leg sp = veer_default_leg(VEER_LEG_SPIN);
    sp.yaw = PI / 2;
    leg_add(&r2, sp);
    leg_add(&r2, travel(VEER_HEADING_TANGENT));
    wp_add(&r2, 4, 5, 1);
    build_ok(&r2);
    /* the toward law is held to the same rule */
    veer_route r3 = veer_default_route(0, 0, 0);
    veer_leg tw = travel(VEER_HEADING_TOWARD);
    tw.toward_x = 0, tw.toward_y = 10;
    leg_add(&r3, tw);
    wp_add(&r3, 4, 0, 1);
    cr_assert_eq(veer__path_build_route(&r3, &g_path, &g_diag), VEER_ERR_GEOMETRY);
    cr_assert(strstr(g_diag.message, "leg 0 starts facing") && strstr(g_diag.message, "toward"), "%s", g_diag.message);
}

/* ---- bad input -------------------------------------------------------------- */
/* Reference: the checks listed in route.h; the project rule that bad input gets
 * a named status and a message, never a crash, and leaves a valid output. */

typedef void (*mutator)(veer_route *r);

static veer_route base_route(void) {
    veer_route r = veer_default_route(0, 0, 0);
    veer_leg l = travel(VEER_HEADING_TANGENT);
    leg_add(&r, l);
    wp_add(&r, 5, 0, 0);
    wp_add(&r, 5, 5, 1);
    veer_leg s = veer_default_leg(VEER_LEG_SPIN);
    s.yaw = 0.0;
    leg_add(&r, s);
    veer_leg p = veer_default_leg(VEER_LEG_PIVOT);
    p.pivot_x = 6, p.pivot_y = 5, p.angle = 1.0;
    leg_add(&r, p);
    return r;
}

static void m_no_legs(veer_route *r) { r->leg_count = 0; }
static void m_neg_legs(veer_route *r) { r->leg_count = -3; }
static void m_many_legs(veer_route *r) { r->leg_count = VEER_MAX_LEGS + 1; }
static void m_many_wps(veer_route *r) { r->waypoint_count = VEER_MAX_WAYPOINTS + 1; }
static void m_neg_wps(veer_route *r) { r->waypoint_count = -1; }
static void m_too_few_wps(veer_route *r) { r->waypoint_count = 1; }
static void m_unused_wps(veer_route *r) { r->waypoints[2] = veer_default_waypoint(9, 9), r->waypoint_count = 3; }
static void m_nan_start(veer_route *r) { r->start_x = T_NAN; }
static void m_inf_yaw(veer_route *r) { r->start_yaw = HUGE_VAL; }
static void m_huge_x(veer_route *r) { r->waypoints[0].x = 1e300; }
static void m_nan_wp(veer_route *r) { r->waypoints[1].y = T_NAN; }
static void m_nan_wp_yaw(veer_route *r) { r->waypoints[1].yaw = T_NAN; }
static void m_nan_toward(veer_route *r) { r->legs[0].toward_x = T_NAN; }
static void m_nan_spin(veer_route *r) { r->legs[1].yaw = -HUGE_VAL; }
static void m_nan_pivot(veer_route *r) { r->legs[2].pivot_y = T_NAN; }
static void m_nan_dwell(veer_route *r) { r->legs[2].dwell = T_NAN; }
static void m_neg_dwell(veer_route *r) { r->legs[0].dwell = -1.0; }
static void m_neg_wp_dwell(veer_route *r) { r->waypoints[0].dwell = -0.1; }
static void m_zero_tol(veer_route *r) { r->legs[0].corner_tolerance = 0.0; }
static void m_neg_tol(veer_route *r) { r->legs[0].corner_tolerance = -0.2; }
static void m_nan_tol(veer_route *r) { r->legs[0].corner_tolerance = T_NAN; }
static void m_bad_kind(veer_route *r) { r->legs[1].kind = (veer_leg_kind)9; }
static void m_zero_kind(veer_route *r) { r->legs[1].kind = VEER_LEG_UNSPECIFIED; }
static void m_bad_heading(veer_route *r) { r->legs[0].heading = (veer_heading_kind)7; }
static void m_zero_heading(veer_route *r) { r->legs[0].heading = VEER_HEADING_UNSPECIFIED; }
static void m_bad_dir(veer_route *r) { r->legs[1].direction = 2; }
static void m_bad_reversed(veer_route *r) { r->legs[0].reversed = 5; }
static void m_bad_stop(veer_route *r) { r->waypoints[0].stop = 3; }
static void m_bad_has_yaw(veer_route *r) { r->waypoints[0].has_yaw = -1; }
static void m_spin_with_wps(veer_route *r) { r->legs[1].waypoint_count = 1; }
static void m_nan_steer(veer_route *r) { r->has_start_steer = 1, r->start_steer[3] = T_NAN; }
static void m_travel_no_wps(veer_route *r) {
    /* an extra travel leg without waypoints at the end */
    r->legs[r->leg_count] = veer_default_leg(VEER_LEG_TRAVEL);
    r->leg_count++;
}
static void m_coincident(veer_route *r) { r->waypoints[1].x = 5.0, r->waypoints[1].y = 5e-7; }
static void m_first_at_start(veer_route *r) { r->waypoints[0].x = 1e-7, r->waypoints[0].y = 0; }
static void m_sharp(veer_route *r) {
    /* 176 degrees at a pass-through */
    r->waypoints[1].x = 5.0 - 5 * cos(4 * DEG), r->waypoints[1].y = 5 * sin(4 * DEG);
    r->legs[0].heading = VEER_HEADING_HOLD;
}
static void m_toward_through(veer_route *r) {
    r->legs[0].heading = VEER_HEADING_TOWARD;
    r->legs[0].toward_x = 5.0, r->legs[0].toward_y = 3.0; /* on the second line */
    r->start_yaw = atan2(3.0, 5.0);
}
static void m_toward_near_blend(veer_route *r) {
    /* 0.5 mm from the blend's closest point to the corner (waypoint 0) */
    r->legs[0].heading = VEER_HEADING_TOWARD;
    double d = 0.25 - 0.0005, c = sqrt(0.5);
    r->legs[0].toward_x = 5.0 - d * c, r->legs[0].toward_y = d * c;
    r->start_yaw = atan2(r->legs[0].toward_y, r->legs[0].toward_x);
}
static void m_spin_zero(veer_route *r) { r->legs[1].yaw = PI / 2 + 2 * PI; } /* already facing pi/2 */
static void m_spin_zero_ccw(veer_route *r) { r->legs[1].yaw = PI / 2, r->legs[1].direction = 1; }
static void m_pivot_zero(veer_route *r) { r->legs[2].angle = 0.0; }

Test(path_bad_input, each_named_and_leaves_empty_path) {
    struct {
        const char *name;
        mutator m;
        veer_status want;
        int leg;            /* expected diag.leg */
        const char *needle; /* text the message must hold, or NULL */
    } cases[] = {
        {"no legs", m_no_legs, VEER_ERR_VALUE, -1, NULL},
        {"negative leg count", m_neg_legs, VEER_ERR_VALUE, -1, NULL},
        {"too many legs", m_many_legs, VEER_ERR_CAPACITY, -1, "33"},
        {"too many waypoints", m_many_wps, VEER_ERR_CAPACITY, -1, NULL},
        {"negative waypoint count", m_neg_wps, VEER_ERR_VALUE, -1, NULL},
        {"legs take more waypoints than exist", m_too_few_wps, VEER_ERR_VALUE, 0, NULL},
        {"waypoints left over", m_unused_wps, VEER_ERR_VALUE, -1, NULL},
        {"NaN start", m_nan_start, VEER_ERR_VALUE, -1, NULL},
        {"inf start yaw", m_inf_yaw, VEER_ERR_VALUE, -1, NULL},
        {"huge coordinate", m_huge_x, VEER_ERR_VALUE, 0, NULL},
        {"NaN waypoint", m_nan_wp, VEER_ERR_VALUE, 0, NULL},
        {"NaN waypoint yaw", m_nan_wp_yaw, VEER_ERR_VALUE, 0, NULL},
        {"NaN toward point", m_nan_toward, VEER_ERR_VALUE, 0, NULL},
        {"inf spin yaw", m_nan_spin, VEER_ERR_VALUE, 1, NULL},
        {"NaN pivot point", m_nan_pivot, VEER_ERR_VALUE, 2, NULL},
        {"NaN dwell", m_nan_dwell, VEER_ERR_VALUE, 2, NULL},
        {"negative leg dwell", m_neg_dwell, VEER_ERR_VALUE, 0, NULL},
        {"negative waypoint dwell", m_neg_wp_dwell, VEER_ERR_VALUE, 0, NULL},
        {"zero corner tolerance", m_zero_tol, VEER_ERR_VALUE, 0, NULL},
        {"negative corner tolerance", m_neg_tol, VEER_ERR_VALUE, 0, NULL},
        {"NaN corner tolerance", m_nan_tol, VEER_ERR_VALUE, 0, NULL},
        {"unknown leg kind", m_bad_kind, VEER_ERR_VALUE, 1, NULL},
        {"unspecified leg kind", m_zero_kind, VEER_ERR_VALUE, 1, NULL},
        {"unknown heading", m_bad_heading, VEER_ERR_VALUE, 0, NULL},
        {"unspecified heading", m_zero_heading, VEER_ERR_VALUE, 0, NULL},
        {"unknown spin direction", m_bad_dir, VEER_ERR_VALUE, 1, NULL},
        {"reversed not 0/1", m_bad_reversed, VEER_ERR_VALUE, 0, NULL},
        {"stop not 0/1", m_bad_stop, VEER_ERR_VALUE, 0, NULL},
        {"has_yaw not 0/1", m_bad_has_yaw, VEER_ERR_VALUE, 0, NULL},
        {"spin leg with waypoints", m_spin_with_wps, VEER_ERR_VALUE, 1, NULL},
        {"NaN start steer", m_nan_steer, VEER_ERR_VALUE, -1, NULL},
        {"travel leg without waypoints", m_travel_no_wps, VEER_ERR_VALUE, 3, NULL},
        {"coincident waypoints", m_coincident, VEER_ERR_GEOMETRY, 0, "waypoint 1: coincides with waypoint 0"},
        {"first waypoint at the start", m_first_at_start, VEER_ERR_GEOMETRY, 0, NULL},
        {"corner sharper than 175 degrees", m_sharp, VEER_ERR_GEOMETRY, 0, "leg 0, waypoint 0: corner too sharp"},
        {"toward point on the path", m_toward_through, VEER_ERR_GEOMETRY, 0, "within 1 mm"},
        {"toward point 0.5 mm from a blend", m_toward_near_blend, VEER_ERR_GEOMETRY, 0, "within 1 mm"},
        {"spin to the same yaw", m_spin_zero, VEER_ERR_GEOMETRY, 1, "spin to the yaw it already has"},
        {"ccw spin to the same yaw", m_spin_zero_ccw, VEER_ERR_GEOMETRY, 1, NULL},
        {"pivot by zero", m_pivot_zero, VEER_ERR_GEOMETRY, 2, NULL},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        static veer_route r, copy;
        r = base_route();
        build_ok(&r); /* the base route is fine */
        cases[i].m(&r);
        copy = r;
        memset(&g_diag, 0x55, sizeof g_diag);
        veer_status st = veer__path_build_route(&r, &g_path, &g_diag);
        cr_expect_eq(st, cases[i].want, "%s: got %s (%s)", cases[i].name, veer_status_name(st), g_diag.message);
        cr_expect_eq(g_diag.status, st, "%s", cases[i].name);
        cr_expect(g_diag.message[0] != '\0' && strlen(g_diag.message) < sizeof g_diag.message, "%s: no message",
                  cases[i].name);
        cr_expect_eq(g_diag.leg, cases[i].leg, "%s: diag.leg %d (%s)", cases[i].name, g_diag.leg, g_diag.message);
        if (cases[i].needle)
            cr_expect(strstr(g_diag.message, cases[i].needle) != NULL, "%s: message '%s' lacks '%s'", cases[i].name,
                      g_diag.message, cases[i].needle);
        cr_expect_eq(g_path.piece_count, 0, "%s", cases[i].name);
        cr_expect_eq(g_path.segment_count, 0, "%s", cases[i].name);
        cr_expect_eq(memcmp(&r, &copy, sizeof r), 0, "%s: route changed", cases[i].name);
        cr_log_info("%-40s %-14s %s", cases[i].name, veer_status_name(st), g_diag.message);
        /* evaluating the empty path is harmless */
        double q[3], dq[3], ddq[3];
        veer__path_eval(&g_path, 0, 1.0, q, dq, ddq);
        cr_expect(q[0] == 0.0 && dq[0] == 0.0 && ddq[0] == 0.0);
    }
}

Test(path_bad_input, null_pointers) {
    veer_route r = base_route();
    cr_expect_eq(veer__path_build_route(NULL, &g_path, &g_diag), VEER_ERR_NULL);
    cr_expect(g_diag.message[0] != '\0');
    cr_expect_eq(veer__path_build_route(&r, NULL, &g_diag), VEER_ERR_NULL);
    cr_expect_eq(veer__path_build_route(&r, &g_path, NULL), VEER_OK, "diag may be NULL");
    cr_expect_eq(veer__path_build_route(NULL, NULL, NULL), VEER_ERR_NULL);
    double q[3] = {1, 1, 1}, dq[3], ddq[3];
    veer__path_eval(NULL, 0, 0.0, q, dq, ddq);
    cr_expect(q[0] == 0.0 && q[1] == 0.0 && q[2] == 0.0);
    cr_expect_eq(veer__path_segment_at(NULL, 1.0), 0);
}

/* The path builds into the storage its owner attached and refuses, with a
 * message and an empty path, to write past it. */
Test(path_bad_input, attached_storage_is_the_limit) {
    veer_route r = base_route();
    build_ok(&r);
    const int pieces = g_path.piece_count, segments = g_path.segment_count;
    cr_assert_leq(pieces, VEER_PATH_PIECES_FOR(r.waypoint_count, r.leg_count));
    cr_assert_leq(segments, VEER_PATH_SEGMENTS_FOR(r.waypoint_count, r.leg_count));
    const double length = g_path.length;
    static veer_path_piece pc[VEER_PATH_MAX_PIECES + 1];
    static veer_path_segment sg[VEER_PATH_MAX_SEGMENTS + 1];
    veer_path p;
    char want[96];
    /* exactly the room it needs: the same path */
    veer__path_attach(&p, pc, pieces, sg, segments);
    cr_assert_eq(veer__path_build_route(&r, &p, &g_diag), VEER_OK, "%s", g_diag.message);
    cr_expect_eq(p.piece_count, pieces);
    cr_expect_eq(p.segment_count, segments);
    cr_expect_eq(p.length, length);
    cr_expect(memcmp(pc, g_path.pieces, (size_t)pieces * sizeof *pc) == 0);
    /* one piece short; the entry after the room keeps its marker */
    memset(pc, 0x5a, sizeof pc);
    veer__path_attach(&p, pc, pieces - 1, sg, segments);
    cr_assert_eq(veer__path_build_route(&r, &p, &g_diag), VEER_ERR_CAPACITY);
    snprintf(want, sizeof want, "the path needs more than %d pieces", pieces - 1);
    cr_expect(strstr(g_diag.message, want) != NULL, "%s", g_diag.message);
    cr_expect(p.piece_count == 0 && p.segment_count == 0 && p.length == 0.0);
    cr_expect(p.pieces == pc && p.piece_cap == pieces - 1, "the storage stays attached");
    const unsigned char *after = (const unsigned char *)&pc[pieces - 1];
    for (size_t b = 0; b < sizeof *pc; b++) cr_assert_eq(after[b], 0x5a, "byte %zu past the room written", b);
    /* one segment short */
    memset(sg, 0x5a, sizeof sg);
    veer__path_attach(&p, pc, pieces, sg, segments - 1);
    cr_assert_eq(veer__path_build_route(&r, &p, &g_diag), VEER_ERR_CAPACITY);
    snprintf(want, sizeof want, "the path needs more than %d rest-to-rest segments", segments - 1);
    cr_expect(strstr(g_diag.message, want) != NULL, "%s", g_diag.message);
    cr_expect(p.piece_count == 0 && p.segment_count == 0);
    after = (const unsigned char *)&sg[segments - 1];
    for (size_t b = 0; b < sizeof *sg; b++) cr_assert_eq(after[b], 0x5a, "byte %zu past the room written", b);
    /* no storage */
    veer__path_attach(&p, NULL, 0, NULL, 0);
    cr_expect_eq(veer__path_build_route(&r, &p, &g_diag), VEER_ERR_NULL);
    cr_expect(strstr(g_diag.message, "no storage") != NULL, "%s", g_diag.message);
}

/* The room veer__path_caps gives: the formulas, clamped to the maxima. */
Test(path_bad_input, caps_for_a_route) {
    int pc, sc;
    veer__path_caps(3, 2, &pc, &sc);
    cr_expect(pc == 2 * 3 + 2 && sc == 2 * 3 + 2, "%d %d", pc, sc);
    veer__path_caps(-1, 1000, &pc, &sc);
    cr_expect(pc == VEER_PATH_PIECES_FOR(0, VEER_MAX_LEGS) && sc == VEER_PATH_SEGMENTS_FOR(0, VEER_MAX_LEGS));
    veer__path_caps(VEER_MAX_WAYPOINTS + 5, VEER_MAX_LEGS, &pc, &sc);
    cr_expect(pc == VEER_PATH_MAX_PIECES && sc == VEER_PATH_MAX_SEGMENTS);
}

Test(path_bad_input, diag_cleared_on_success) {
    veer_route r = base_route();
    memset(&g_diag, 0x55, sizeof g_diag);
    build_ok(&r);
    cr_expect_eq(g_diag.status, VEER_OK);
    cr_expect_eq(g_diag.message[0], '\0');
}

Test(path_capacity, largest_route_fits) {
    /* capacities in src/internal.h must hold the largest route route.h allows */
    /* 64 stop waypoints on a zig-zag with tangent heading: every stop turns,
     * so every stop gets an automatic spin */
    static veer_route r;
    r = veer_default_route(0, 0, 0);
    leg_add(&r, travel(VEER_HEADING_TANGENT));
    for (int i = 0; i < VEER_MAX_WAYPOINTS; i++) wp_add(&r, (i + 1) * 1.0, (i % 2) ? 0.0 : 1.0, 1);
    r.waypoints[0].y = 0.0; /* first line along the start yaw */
    veer_status st = veer__path_build_route(&r, &g_path, &g_diag);
    cr_assert_eq(st, VEER_OK, "%s", g_diag.message);
    cr_assert_eq(g_path.segment_count, 2 * VEER_MAX_WAYPOINTS - 2, "%d", g_path.segment_count);
    check_joins(0);
}

/* ---- random routes ----------------------------------------------------------- */

/* Property check (common practice, no source): random routes, many of them
 * invalid, never crash; an accepted one has finite q, q', q'' everywhere,
 * continuous pose, C2 joins and nonzero q'; a refused one has a message and an
 * empty path. */
Test(path_random, never_crash_never_nan) {
    int ok = 0, refused = 0;
    g_rng = 777u;
    for (int trial = 0; trial < 1500; trial++) {
        static veer_route r;
        r = veer_default_route(40 * rnd() - 20, 40 * rnd() - 20, 8 * rnd() - 4);
        int legs = 1 + (int)(5 * rnd());
        double x = r.start_x, y = r.start_y;
        for (int l = 0; l < legs; l++) {
            double u = rnd();
            veer_leg leg = veer_default_leg(u < 0.6 ? VEER_LEG_TRAVEL : u < 0.8 ? VEER_LEG_SPIN : VEER_LEG_PIVOT);
            leg.heading = (veer_heading_kind)(1 + (int)(4 * rnd()));
            leg.reversed = rnd() < 0.3;
            leg.toward_x = 40 * rnd() - 20, leg.toward_y = 40 * rnd() - 20;
            leg.corner_tolerance = 0.01 + 2 * rnd();
            leg.yaw = 10 * rnd() - 5;
            leg.direction = (int)(3 * rnd()) - 1;
            leg.pivot_x = x + 4 * rnd() - 2, leg.pivot_y = y + 4 * rnd() - 2;
            leg.angle = 6 * rnd() - 3;
            leg.dwell = rnd() < 0.5 ? 0.0 : rnd();
            if (veer_route_add_leg(&r, &leg) != VEER_OK) break;
            if (leg.kind != VEER_LEG_TRAVEL) continue;
            int n = 1 + (int)(5 * rnd());
            for (int k = 0; k < n; k++) {
                x += 10 * rnd() - 5, y += 10 * rnd() - 5;
                veer_waypoint w = veer_default_waypoint(x, y);
                w.stop = rnd() < 0.3;
                w.has_yaw = rnd() < 0.5;
                w.yaw = 10 * rnd() - 5;
                if (veer_route_add_waypoint(&r, &w) != VEER_OK) break;
            }
        }
        /* now and then a broken value */
        if (rnd() < 0.1) r.waypoints[(int)(rnd() * r.waypoint_count)].x = T_NAN;
        veer_status st = veer__path_build_route(&r, &g_path, &g_diag);
        if (st != VEER_OK) {
            refused++;
            cr_assert(g_diag.message[0] != '\0');
            cr_assert_eq(g_path.piece_count, 0);
            continue;
        }
        ok++;
        /* the room a route's path needs at most (internal.h) */
        cr_assert_leq(g_path.piece_count, VEER_PATH_PIECES_FOR(r.waypoint_count, r.leg_count), "trial %d", trial);
        cr_assert_leq(g_path.segment_count, VEER_PATH_SEGMENTS_FOR(r.waypoint_count, r.leg_count), "trial %d", trial);
        double prev[3] = {r.start_x, r.start_y, r.start_yaw};
        for (int k = 0; k < g_path.segment_count; k++) {
            const veer_path_segment *sg = &g_path.segments[k];
            cr_assert_gt(sg->s_end, sg->s_begin);
            for (int i = 0; i <= 60; i++) {
                double q[3], dq[3], ddq[3];
                eval(k, sg->s_begin + (sg->s_end - sg->s_begin) * i / 60.0, q, dq, ddq);
                for (int c = 0; c < 3; c++) cr_assert(isfinite(q[c]) && isfinite(dq[c]) && isfinite(ddq[c]));
                cr_assert_gt(fabs(dq[0]) + fabs(dq[1]) + fabs(dq[2]), 0.1);
                if (i == 0)
                    for (int c = 0; c < 3; c++)
                        cr_assert(fabs(q[c] - prev[c]) < 1e-9, "trial %d segment %d q[%d] jumps", trial, k, c);
                if (i == 60) memcpy(prev, q, sizeof prev);
            }
        }
        for (int c = 0; c < 3; c++) cr_assert(fabs(prev[c] - g_path.end_pose[c]) < 1e-9);
        if (g_path.piece_count <= VEER_PATH_MAX_SEGMENTS) check_joins(0);
    }
    cr_log_info("random routes: %d built, %d refused", ok, refused);
    cr_assert_gt(ok, 100);
    cr_assert_gt(refused, 100);
}

/* The room a route's path needs (VEER_PATH_PIECES_FOR, internal.h) holds for
 * the routes that come nearest it: a tangent leg of 64 waypoints with a
 * rounded corner at each (a line and a corner per waypoint, the last only its
 * line), the same with a stop at each where the tangent turns a quarter
 * (a line and a spin each), and 31 pivot legs after a short travel leg. The
 * first two come within two pieces of the bound (127 of 129), the third
 * within two (34 of 36): a plan or player sized by it is not sized for
 * fewer pieces than a route can need, nor for many more. */
Test(path, worst_routes_fit_the_piece_bound) {
    for (int stops = 0; stops < 2; stops++) {
        static veer_route r;
        r = veer_default_route(0, 0, VEER_PI / 4);
        veer_leg l = travel(VEER_HEADING_TANGENT);
        l.corner_tolerance = 0.05;
        leg_add(&r, l);
        for (int i = 0; i < VEER_MAX_WAYPOINTS; i++) wp_add(&r, 10.0 * (i + 1), 10.0 * ((i + 1) % 2), stops);
        build_ok(&r);
        cr_assert_eq(g_path.piece_count, 2 * VEER_MAX_WAYPOINTS - 1, "stops %d: %d pieces", stops, g_path.piece_count);
        cr_assert_leq(g_path.piece_count, VEER_PATH_PIECES_FOR(r.waypoint_count, r.leg_count));
        cr_assert_leq(g_path.segment_count, VEER_PATH_SEGMENTS_FOR(r.waypoint_count, r.leg_count));
    }
    static veer_route r;
    r = veer_default_route(0, 0, 0);
    leg_add(&r, travel(VEER_HEADING_TANGENT));
    wp_add(&r, 5, 0, 0);
    wp_add(&r, 5, 5, 1);
    for (int i = 1; i < VEER_MAX_LEGS; i++) {
        veer_leg p = veer_default_leg(VEER_LEG_PIVOT);
        p.pivot_x = 6, p.pivot_y = 5, p.angle = 0.1;
        leg_add(&r, p);
    }
    build_ok(&r);
    cr_assert_eq(g_path.piece_count, 3 + VEER_MAX_LEGS - 1, "%d pieces", g_path.piece_count);
    cr_assert_leq(g_path.piece_count, VEER_PATH_PIECES_FOR(r.waypoint_count, r.leg_count));
    cr_assert_leq(g_path.segment_count, VEER_PATH_SEGMENTS_FOR(r.waypoint_count, r.leg_count));
}
