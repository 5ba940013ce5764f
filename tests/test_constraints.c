/* Criterion suite for the row builder (src/constraints.c): the rows of the
 * acceleration polygons. veer keeps only half of each polygon's faces
 * (veer_polygon) and makes the other half as their mirror image; these tests
 * hold the rows it builds against a polygon computed here from scratch, every
 * face with its own cos and sin and no symmetry used.
 *
 * The reference is the standard regular polygon with n sides inscribed in a
 * circle of radius R: vertices at R (cos 2 pi k / n, sin 2 pi k / n),
 * k = 0 .. n - 1, face j joining vertices j and j + 1, its outward normal at
 * the angle (2 j + 1) pi / n halfway between them and its distance from the
 * centre the apothem R cos(pi / n) (elementary trigonometry of the isosceles
 * triangle centre, vertex j, vertex j + 1). It is built in the path's
 * tangent frame (t, nrm), vertex 0 on the tangent, as design.md states and as
 * tests/python/reference.py's polygon_rows builds it for the HiGHS
 * comparison. Of its faces only those on the side of the normal
 * acceleration can bind (n / 2 of them), and of those only the faces whose
 * lower vertex lies at or below the highest normal acceleration the speed
 * bound allows, with constraints.c's margin of 1e-9 (polygon_rows).
 * SPDX-License-Identifier: MIT */
#include <criterion/criterion.h>
#include <math.h>
#include <stdint.h>
#include <string.h>
#include <veer/veer.h>
#include "rng.h"
#include "plan_internal.h"

#define TOL 1e-15 /* per coefficient, times max(1, |reference|) */

static rng gen = {0x5eed0f5eed0f5eedull}; /* rng.h: splitmix64 */

/* The reference rows of |p1 u + p2 x| <= R as the inscribed polygon with
 * `sides` sides, for a speed bound xmax (x <= xmax); prune = 0 keeps every
 * face on the normal acceleration's side. Long double where the machine has
 * it, so that the reference's own rounding is well below TOL. */
static int ref_rows(int sides, double radius, const double p1[2], const double p2[2], double xmax, int prune,
                    veer_row *out, veer_limit_id id) {
    const long double pi = 3.141592653589793238462643383279502884L;
    const long double R = (long double)radius, ax = (long double)p1[0], ay = (long double)p1[1];
    const long double bx = (long double)p2[0], by = (long double)p2[1];
    long double sp = sqrtl(ax * ax + ay * ay);
    if (!(sp > 0.0L || bx != 0.0L || by != 0.0L)) return 0;
    long double tx = 1.0L, ty = 0.0L;
    if (sp > 0.0L) {
        tx = ax / sp;
        ty = ay / sp;
    }
    long double at_x = bx * tx + by * ty;  /* p2 . t */
    long double an_x = -bx * ty + by * tx; /* p2 . nrm, nrm = t turned by +90 degrees */
    long double side = an_x >= 0.0L ? 1.0L : -1.0L;
    long double top = fabsl(an_x) * (long double)xmax / R * (1.0L + 1e-9L);
    int m = 0;
    for (int j = 0; j < sides / 2; j++) {
        /* the heights of the face's vertices j and j + 1 above the tangent; 0
         * and n / 2 lie on it */
        long double v0 = (j == 0) ? 0.0L : sinl(2.0L * pi * j / sides);
        long double v1 = (2 * (j + 1) == sides) ? 0.0L : sinl(2.0L * pi * (j + 1) / sides);
        long double h = v0 < v1 ? v0 : v1;
        if (prune && h > top) continue; /* NaN top (inf * 0): kept */
        long double ang = (2 * j + 1) * pi / sides;
        long double c = cosl(ang), s = side * sinl(ang);
        out[m++] = (veer_row){(double)(c * sp), (double)(c * at_x + s * an_x), (double)(R * cosl(pi / sides)), id};
    }
    return m;
}

static void expect_near(double got, double want, const char *what, int sides, int k) {
    double tol = TOL * (fabs(want) > 1.0 ? fabs(want) : 1.0);
    cr_expect(fabs(got - want) <= tol, "%d sides, row %d: %s is %.17g, the reference %.17g (off %.3g)", sides, k, what,
              got, want, got - want);
}

/* One point: the ctx's rows (only the polygon's: every other limit unset)
 * against the reference's, coefficient by coefficient and in order; and
 * veer__point_decel and veer__point_worst (the same rows, not written: the
 * controlled stop and the between-grid-point check) against those rows. */
static void check_point(const veer_row_ctx *ctx, int sides, double R, const double p1[2], const double p2[2],
                        veer_limit_id id, const veer_point_kin *pk, int prune) {
    veer_row rows[VEER_MAX_POINT_ROWS], want[VEER_MAX_POINT_ROWS];
    double xmax;
    veer_limit_id xid;
    int n = veer__point_rows(ctx, pk, 0.0, rows, &xmax, &xid);
    cr_assert(n >= 0 && n <= ctx->m, "%d rows (room for %d)", n, ctx->m);
    int w = ref_rows(sides, R, p1, p2, xmax, prune, want, id);
    cr_assert_eq(n, w, "%d sides, p1 (%g, %g), p2 (%g, %g), xmax %g: %d rows, the reference has %d", sides, p1[0],
                 p1[1], p2[0], p2[1], xmax, n, w);
    for (int k = 0; k < n; k++) {
        expect_near(rows[k].a, want[k].a, "a", sides, k);
        expect_near(rows[k].b, want[k].b, "b", sides, k);
        expect_near(rows[k].c, want[k].c, "c", sides, k);
        cr_expect(rows[k].id.kind == id.kind && rows[k].id.module == id.module, "row %d: limit %d[%d]", k,
                  rows[k].id.kind, rows[k].id.module);
    }
    /* the hardest braking the rows allow at x, and the worst row at (u, x),
     * from the rows just checked: the other two users of the inlined row
     * builder make the same rows */
    double x = isfinite(xmax) ? 0.5 * xmax : 1.7, u = -0.8;
    double decel, worst, xm;
    cr_assert_eq(veer__point_decel(ctx, pk, x, &decel, &xm, &xid), n);
    cr_assert_eq(veer__point_worst(ctx, pk, u, x, &worst, &xm, &xid), n);
    double d_rows = -VEER_UNLIMITED, w_rows = -VEER_UNLIMITED;
    for (int k = 0; k < n; k++) {
        if (rows[k].a < 0.0 && !veer__row_x_only(rows[k].a, rows[k].b, rows[k].c)) /* as the stop reads them */
            d_rows = fmax(d_rows, (rows[k].c - rows[k].b * x) / rows[k].a);
        if (rows[k].c > 0.0) w_rows = fmax(w_rows, (rows[k].a * u + rows[k].b * x) / rows[k].c);
    }
    cr_expect(decel == d_rows || fabs(decel - d_rows) <= 1e-12 * fabs(d_rows), "%d sides: decel %.17g, from the rows %.17g",
              sides, decel, d_rows);
    cr_expect(worst == w_rows || fabs(worst - w_rows) <= 1e-12 * fabs(w_rows), "%d sides: worst %.17g, from the rows %.17g",
              sides, worst, w_rows);
}

/* A steered cart with every limit unset but the body's speed (for the
 * speed bound) and one polygon: the body acceleration's (traction 0) or
 * module 0's traction. The point has no yaw rate, so that module 0's contact
 * point has the body's path derivatives. */
static void ctx_for(veer_row_ctx *ctx, veer_drive_def *drive, veer_limits *lim, int sides, int traction, double R,
                    double speed) {
    *drive = veer_default_drive_def(VEER_DRIVE_STEERED);
    *lim = veer_default_limits();
    lim->body_speed = speed;
    if (traction) lim->modules[0].traction_mu = R / VEER_GRAVITY;
    else lim->body_accel = R;
    veer_plan_options opt = veer_default_plan_options();
    opt.accel_polygon_sides = sides;
    opt.traction_polygon_sides = sides;
    cr_assert_eq(veer__plan_options_check(&opt, NULL), VEER_OK);
    veer__row_ctx_init(ctx, drive, lim, &opt);
    cr_assert_eq(ctx->accel.faces, sides / 2);
    cr_assert_eq(ctx->traction.faces, sides / 2);
}

static void point_at(veer_point_kin *pk, const double p1[2], const double p2[2]) {
    memset(pk, 0, sizeof *pk);
    pk->q[2] = 0.3; /* yaw; no yaw rate: the contact points move as the body does */
    pk->dq[0] = p1[0], pk->dq[1] = p1[1];
    pk->ddq[0] = p2[0], pk->ddq[1] = p2[1];
    double c = cos(pk->q[2]), s = sin(pk->q[2]);
    pk->xi[0] = c * p1[0] + s * p1[1], pk->xi[1] = -s * p1[0] + c * p1[1];
    pk->dxi[0] = c * p2[0] + s * p2[1], pk->dxi[1] = -s * p2[0] + c * p2[1];
}

static void sweep(int traction) {
    veer_limit_id id = {traction ? VEER_LIMIT_TRACTION : VEER_LIMIT_BODY_ACCEL, traction ? 0 : -1};
    for (int sides = 8; sides <= 2 * VEER_MAX_POLYGON_FACES; sides += 2) {
        for (int it = 0; it < 300; it++) {
            double R = uni(&gen, 0.5, 3.0), V = exp(uni(&gen, log(0.05), log(20.0)));
            veer_row_ctx ctx;
            veer_drive_def drive;
            veer_limits lim;
            ctx_for(&ctx, &drive, &lim, sides, traction, R, V);
            double p1[2] = {uni(&gen, -1.0, 1.0), uni(&gen, -1.0, 1.0)}, p2[2] = {uni(&gen, -1.0, 1.0), uni(&gen, -1.0, 1.0)};
            veer_point_kin pk;
            point_at(&pk, p1, p2);
            check_point(&ctx, sides, R, p1, p2, id, &pk, 1);
        }
    }
}

/* Random points, every polygon the options allow (8 .. 64 sides: odd and
 * even face counts, so with and without a middle face), speed bounds from
 * low (the end runs only) to high (every face): the body acceleration's
 * polygon and a module's traction polygon. */
Test(constraints, polygon_rows_match_full_polygon_body_accel) { sweep(0); }
Test(constraints, polygon_rows_match_full_polygon_traction) { sweep(1); }

/* No speed bound: every face on the normal acceleration's side binds, the
 * rows are the whole half of the reference polygon (no pruning), on either
 * side of the tangent, and also with no normal acceleration at all (inf * 0). */
Test(constraints, polygon_rows_unbounded_speed_keep_every_face) {
    const double pts[][4] = {{0.7, -0.2, 0.3, 0.9}, {0.7, -0.2, -0.3, -0.9}, {1.0, 0.0, 0.5, 0.0}, {0.0, 0.0, 0.4, -0.6}};
    for (int sides = 8; sides <= 2 * VEER_MAX_POLYGON_FACES; sides += 2)
        for (int traction = 0; traction <= 1; traction++)
            for (int p = 0; p < 4; p++) {
                veer_row_ctx ctx;
                veer_drive_def drive;
                veer_limits lim;
                ctx_for(&ctx, &drive, &lim, sides, traction, 2.0, VEER_UNLIMITED);
                const double p1[2] = {pts[p][0], pts[p][1]}, p2[2] = {pts[p][2], pts[p][3]};
                veer_point_kin pk;
                point_at(&pk, p1, p2);
                veer_limit_id id = {traction ? VEER_LIMIT_TRACTION : VEER_LIMIT_BODY_ACCEL, traction ? 0 : -1};
                check_point(&ctx, sides, 2.0, p1, p2, id, &pk, 0);
            }
}

/* No normal acceleration (a straight line) or a speed bound of 0: only the
 * two faces through the vertex on the tangent can bind, face 0 and its mirror
 * (their lower vertex is on the tangent: height 0 exactly), and they must
 * stay, for straight-line braking and accelerating use the full limit. */
Test(constraints, polygon_rows_straight_line_keeps_the_end_faces) {
    const double pts[][4] = {{1.0, 0.0, 0.5, 0.0}, {0.0, -2.0, 0.0, 3.0}, {0.0, 0.0, 0.0, 0.0}};
    for (int sides = 8; sides <= 2 * VEER_MAX_POLYGON_FACES; sides += 2)
        for (int p = 0; p < 3; p++) {
            veer_row_ctx ctx;
            veer_drive_def drive;
            veer_limits lim;
            ctx_for(&ctx, &drive, &lim, sides, 0, 2.0, 1.5);
            const double p1[2] = {pts[p][0], pts[p][1]}, p2[2] = {pts[p][2], pts[p][3]};
            veer_point_kin pk;
            point_at(&pk, p1, p2);
            veer_row rows[VEER_MAX_POINT_ROWS];
            double xmax;
            veer_limit_id xid;
            int n = veer__point_rows(&ctx, &pk, 0.0, rows, &xmax, &xid);
            if (p == 2) { /* no motion at all: no rows */
                cr_expect_eq(n, 0);
                continue;
            }
            cr_assert_eq(n, 2, "%d sides, point %d: %d rows", sides, p, n);
            double sp = hypot(p1[0], p1[1]), cp = cos(VEER_PI / sides);
            cr_expect(fabs(rows[0].a - cp * sp) <= TOL * sp && fabs(rows[1].a + cp * sp) <= TOL * sp,
                      "%d sides: a %.17g, %.17g", sides, rows[0].a, rows[1].a);
            check_point(&ctx, sides, 2.0, p1, p2, veer__limit(VEER_LIMIT_BODY_ACCEL, -1), &pk, 1);
        }
    /* a curve with a speed bound of 0 */
    veer_row_ctx ctx;
    veer_drive_def drive;
    veer_limits lim;
    ctx_for(&ctx, &drive, &lim, 32, 0, 2.0, 0.0);
    const double p1[2] = {0.6, 0.1}, p2[2] = {-0.2, 0.7};
    veer_point_kin pk;
    point_at(&pk, p1, p2);
    check_point(&ctx, 32, 2.0, p1, p2, veer__limit(VEER_LIMIT_BODY_ACCEL, -1), &pk, 1);
}

/* Braking at the normal-acceleration limit, rounded just over it (as a plan
 * that runs a curve at that limit is, between grid points), on a polygon with
 * an odd number of faces on the normal's side (sides = 2 mod 4): its middle
 * face's normal is the path normal itself, at (2 j + 1) pi / n = pi / 2, a
 * face that bounds the normal acceleration only (cos pi / 2 = 0: no u term)
 * and says nothing of braking. Computed in double its cos is +-1e-16, not 0;
 * the controlled stop must treat that row as one without a u term, as the
 * planner's solver does (topp.c), and brake as hard as the other faces allow.
 * Reference: the full inscribed polygon (see the top of this file) with the
 * middle face's cos exactly 0; at normal acceleration r (1 + e), face j
 * (cos c_j < 0) allows u >= r (1 - s_j (1 + e)) / c_j, the hardest braking
 * the largest of those. */
Test(constraints, braking_at_the_limit_ignores_the_face_along_the_normal) {
    const long double pi = 3.141592653589793238462643383279502884L;
    const double k = 0.8, R = 2.0, e = 1e-12; /* curvature 1/m (no tangential term), radius m/s^2 */
    int tested = 0;
    for (int sides = 10; sides <= 2 * VEER_MAX_POLYGON_FACES; sides += 4)
        for (int traction = 0; traction <= 1; traction++) {
            veer_row_ctx ctx;
            veer_drive_def drive;
            veer_limits lim;
            ctx_for(&ctx, &drive, &lim, sides, traction, R, VEER_UNLIMITED);
            const double p1[2] = {1.0, 0.0}, p2[2] = {0.0, k};
            veer_point_kin pk;
            point_at(&pk, p1, p2);
            long double r = (long double)R * cosl(pi / sides);
            double x = (double)(r / (long double)k) * (1.0 + e);
            long double an = (long double)k * (long double)x / r; /* normal acceleration / r, just over 1 */
            long double want = -(long double)INFINITY;
            for (int j = 0; j < sides / 2; j++) {
                if (4 * j + 2 == sides) continue; /* the middle face: cos exactly 0 */
                long double c = cosl((2 * j + 1) * pi / sides), s = sinl((2 * j + 1) * pi / sides);
                if (c < 0.0L) want = fmaxl(want, r * (1.0L - s * an) / c);
            }
            double decel, xm;
            veer_limit_id xid;
            cr_assert_geq(veer__point_decel(&ctx, &pk, x, &decel, &xm, &xid), 0);
            cr_expect(decel < 0.0 && fabs(decel - (double)want) <= 1e-9 * fabs((double)want),
                      "%d sides (%s): hardest braking %.17g m/s^2, the polygon allows %.17Lg", sides,
                      traction ? "traction" : "body", decel, want);
            tested++;
        }
    cr_assert_eq(tested, 28);
}
