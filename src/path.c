/* The PATH box: a route becomes a smooth pose curve q(s) = (x, y, yaw) with
 * exact first and second derivatives (no finite differences anywhere).
 *
 * Pieces: straight lines, rounded corners, spins in place and pivots about a
 * world point. A rounded corner at waypoint P between unit directions d0 and
 * d1 is a degree-7 polynomial B(sigma), t = sigma / L in [0, 1], with
 *     B'(sigma) = d0 (1 - h(t)) + d1 h(t) + c (d0 + d1) g(t),
 * h(t) = 10t^3 - 15t^4 + 6t^5 (quintic smootherstep), g(t) = t^3 (1 - t)^3.
 * So B' is d0 and d1 at the ends and B'', B''' vanish there: position is C3
 * and the tangent heading C2 at the joins with the lines. Integrating,
 *     B(L) - B(0) = L (1/2 + c/140) (d0 + d1) = lambda (d0 + d1),
 * which fixes L for a given c; c >= 0 is chosen so that the mean of |B'| is 1,
 * i.e. L equals the arc length of the blend. The shape depends only on the
 * turn angle and scales with lambda, so the closest approach to P is
 * lambda * dev1 with dev1 measured once for lambda = 1.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "internal.h"

enum { PIECE_LINE = 1, PIECE_CORNER = 2, PIECE_SPIN = 3, PIECE_PIVOT = 4 };

/* Layout of veer_path_piece's private fields.
 *   LINE    c[k][0] start, c[k][1] unit direction (k = x, y); p = c0 + c1 (s - s0)
 *   CORNER  c[k][0..7] coefficients in t = (s - s0) / len
 *   SPIN    c[0][0], c[1][0] position, c[0][1] yaw at s0, c[0][2] +-1
 *   PIVOT   c[0][0], c[1][0] centre C, c[0][1], c[1][1] p0 - C, c[0][2] yaw at s0, c[0][3] +-1
 * yaw_p by heading (travel pieces):
 *   HOLD     [0] yaw
 *   TANGENT  line [0] yaw; corner [0] yaw at s0, [1..2] d0
 *   TOWARD   [0..1] point, [2] unwrap reference; corners add (start s, reference)
 *            of further regions at [3..4], [5..6], [7..8]
 *   BLEND    [0..5] knots (s, yaw) before, after and after that (global s); while
 *            its leg is laid out, [6..7] of the leg's piece k - 1 keep knot k
 *   all      [9..11] start-mismatch fade: m, L_fade, s where it starts */

#define DEG_ (VEER_PI / 180.0)
#define COINCIDENT_ 1e-6       /* m: consecutive points closer than this are one point */
#define MAX_TURN_ (175.0 * DEG_) /* sharper pass-through corners must be stops */
#define STRAIGHT_TURN_ 1e-9    /* rad: a pass-through this straight needs no blend */
#define MISMATCH_MAX_ (5.0 * DEG_) /* start mismatch absorbed by a fade */
#define FADE_MAX_ 1.0          /* m: longest fade of a start mismatch */
#define TOWARD_MIN_ 1e-3       /* m: closest the path may pass to a TOWARD point */
#define ZERO_TURN_ 1e-9        /* rad: shortest spin or pivot */
#define STOP_MARGIN_ 0.01      /* share of a line next to a rest that a blend leaves straight */
#define COORD_MAX_ 1e6         /* m and rad: largest magnitude accepted for positions and angles */
#define TOWARD_REGION_ 2.0     /* rad: yaw swing after which a TOWARD corner starts a new unwrap region */
#define TOWARD_REGIONS_ 4      /* unwrap regions a corner piece holds: covers a sweep of 8 rad > 2 pi */

/* ---- small helpers ------------------------------------------------------ */

static double cross2(double ax, double ay, double bx, double by) { return ax * by - ay * bx; }
static double dot2(double ax, double ay, double bx, double by) { return ax * bx + ay * by; }

/* Quintic smootherstep S(u) = 10u^3 - 15u^4 + 6u^5 and its derivatives,
 * clamped to 0 below u = 0 and 1 above u = 1. */
static void smootherstep(double u, double *f, double *f1, double *f2) {
    if (u <= 0.0) {
        *f = 0.0, *f1 = 0.0, *f2 = 0.0;
    } else if (u >= 1.0) {
        *f = 1.0, *f1 = 0.0, *f2 = 0.0;
    } else {
        double v = 1.0 - u;
        *f = u * u * u * (10.0 + u * (-15.0 + 6.0 * u));
        *f1 = 30.0 * u * u * v * v;
        *f2 = 60.0 * u * v * (1.0 - 2.0 * u);
    }
}

/* ---- corner blend ------------------------------------------------------- */

/* Velocity of the unit-lambda corner, in sigma units, at t. */
static void corner_velocity(const double d0[2], const double d1[2], double c, double t, double v[2]) {
    double h = t * t * t * (10.0 + t * (-15.0 + 6.0 * t));
    double w = t * (1.0 - t);
    double g = w * w * w;
    for (int k = 0; k < 2; k++) v[k] = d0[k] * (1.0 - h) + d1[k] * h + c * (d0[k] + d1[k]) * g;
}

/* Mean of |B'| over t in [0, 1] and its derivative in c, by composite
 * 5-point Gauss-Legendre quadrature (Abramowitz & Stegun 25.4.29). */
static double corner_mean_speed(const double d0[2], const double d1[2], double c, double *dmean) {
    static const double x[5] = {-0.90617984593866396, -0.53846931010568311, 0.0, 0.53846931010568311,
                                0.90617984593866396};
    static const double w[5] = {0.23692688505618942, 0.47862867049936619, 0.568888888888889,
                                0.47862867049936619, 0.23692688505618942};
    const int panels = 4;
    double sum = 0.0, dsum = 0.0;
    double ex = d0[0] + d1[0], ey = d0[1] + d1[1];
    for (int p = 0; p < panels; p++) {
        double a = (double)p / panels, half = 0.5 / panels;
        for (int i = 0; i < 5; i++) {
            double t = a + half * (1.0 + x[i]);
            double v[2], tw = t * (1.0 - t), g = tw * tw * tw;
            corner_velocity(d0, d1, c, t, v);
            double sp = hypot(v[0], v[1]);
            sum += w[i] * half * sp;
            if (sp > 0.0) dsum += w[i] * half * g * dot2(v[0], v[1], ex, ey) / sp;
        }
    }
    *dmean = dsum;
    return sum;
}

typedef struct {
    double c;    /* coefficient of (d0 + d1) g(t) */
    double L1;   /* parameter length for lambda = 1 */
    double dev1; /* closest approach to the corner for lambda = 1 */
} corner_shape;

/* Position of the unit-lambda corner relative to the waypoint, at t. */
static void corner_unit_point(const double d0[2], const double d1[2], const corner_shape *sh, double t, double p[2]) {
    double H = t * t * t * t * (2.5 + t * (-3.0 + t));
    double G = t * t * t * t * (0.25 + t * (-0.6 + t * (0.5 - t / 7.0)));
    for (int k = 0; k < 2; k++)
        p[k] = -d0[k] + sh->L1 * (d0[k] * t + (d1[k] - d0[k]) * H + sh->c * (d0[k] + d1[k]) * G);
}

/* Solves mean |B'| = 1 for c (Newton, kept inside a bracket by bisection);
 * the mean speed grows with c because d0 + d1 points along every convex
 * combination of d0 and d1. Then measures dev1. */
static corner_shape corner_shape_of(const double d0[2], const double d1[2]) {
    corner_shape sh;
    double dm;
    double lo = 0.0, hi = 1.0;
    while (corner_mean_speed(d0, d1, hi, &dm) < 1.0 && hi < 1e7) hi *= 2.0;
    double c = 0.0;
    for (int it = 0; it < 200; it++) {
        double f = corner_mean_speed(d0, d1, c, &dm) - 1.0;
        if (fabs(f) < 1e-15) break;
        if (f < 0.0)
            lo = c;
        else
            hi = c;
        double cn = dm > 0.0 ? c - f / dm : 0.5 * (lo + hi);
        if (!(cn > lo && cn < hi)) cn = 0.5 * (lo + hi);
        if (fabs(cn - c) <= 1e-15 * (1.0 + c)) {
            c = cn;
            break;
        }
        c = cn;
    }
    sh.c = c;
    sh.L1 = 1.0 / (0.5 + c / 140.0);
    /* The blend is symmetric about the bisector, so the midpoint is a critical
     * point of the distance; a coarse scan guards the claim that it is the
     * closest one. */
    double p[2];
    sh.dev1 = HUGE_VAL;
    for (int i = 0; i <= 32; i++) {
        corner_unit_point(d0, d1, &sh, i / 32.0, p);
        double r = hypot(p[0], p[1]);
        if (r < sh.dev1) sh.dev1 = r;
    }
    return sh;
}

/* Fills the corner piece's coefficients in powers of t = sigma / L. */
static void corner_coefficients(veer_path_piece *pc, double px, double py, const double d0[2], const double d1[2],
                                const corner_shape *sh, double lambda) {
    double L = lambda * sh->L1;
    double P[2] = {px, py};
    for (int k = 0; k < 2; k++) {
        double dl = d1[k] - d0[k], v = sh->c * (d0[k] + d1[k]);
        double *a = pc->c[k];
        a[0] = P[k] - lambda * d0[k];
        a[1] = L * d0[k];
        a[2] = 0.0;
        a[3] = 0.0;
        a[4] = L * (2.5 * dl + 0.25 * v);
        a[5] = L * (-3.0 * dl - 0.6 * v);
        a[6] = L * (dl + 0.5 * v);
        a[7] = -L * v / 7.0;
    }
    pc->len = L;
}

/* Value and first three sigma-derivatives of a degree-7 polynomial in t. */
static void poly7(const double a[8], double t, double invL, double out[4]) {
    /* Horner, written out (the loops with their integer factors cost three
     * times as much; every product and sum is the same) */
    double p = ((((((a[7] * t + a[6]) * t + a[5]) * t + a[4]) * t + a[3]) * t + a[2]) * t + a[1]) * t + a[0];
    double p1 = (((((7.0 * a[7] * t + 6.0 * a[6]) * t + 5.0 * a[5]) * t + 4.0 * a[4]) * t + 3.0 * a[3]) * t +
                 2.0 * a[2]) * t + a[1];
    double p2 = ((((42.0 * a[7] * t + 30.0 * a[6]) * t + 20.0 * a[5]) * t + 12.0 * a[4]) * t + 6.0 * a[3]) * t +
                2.0 * a[2];
    double p3 = (((210.0 * a[7] * t + 120.0 * a[6]) * t + 60.0 * a[5]) * t + 24.0 * a[4]) * t + 6.0 * a[3];
    out[0] = p;
    out[1] = p1 * invL;
    out[2] = p2 * invL * invL;
    out[3] = p3 * invL * invL * invL;
}

/* ---- piece evaluation --------------------------------------------------- */

/* Position and its first three derivatives of a travel piece: g[k][n] is the
 * n-th derivative of coordinate k. */
static void travel_geometry(const veer_path_piece *pc, double s, double g[2][4]) {
    double u = s - pc->s0;
    if (pc->kind == PIECE_LINE) {
        for (int k = 0; k < 2; k++) {
            g[k][0] = pc->c[k][0] + pc->c[k][1] * u;
            g[k][1] = pc->c[k][1];
            g[k][2] = 0.0;
            g[k][3] = 0.0;
        }
    } else {
        double invL = 1.0 / pc->len;
        double t = u * invL;
        poly7(pc->c[0], t, invL, g[0]);
        poly7(pc->c[1], t, invL, g[1]);
    }
}

/* The fade that absorbs a start mismatch m over L_fade from s_fade:
 * m (1 - S(u)), u = (s - s_fade) / L_fade. yaw_p[9..11] = m, L_fade, s_fade,
 * set on every piece the fade overlaps. */
static void add_fade(const veer_path_piece *pc, double s, double y[3]) {
    double m = pc->yaw_p[9], L = pc->yaw_p[10];
    if (!(L > 0.0) || m == 0.0) return;
    double f, f1, f2;
    smootherstep((s - pc->yaw_p[11]) / L, &f, &f1, &f2);
    y[0] += m * (1.0 - f);
    y[1] -= m * f1 / L;
    y[2] -= m * f2 / (L * L);
}

/* Smootherstep between knots (sa, ya) and (sb, yb). */
static void knot_step(double sa, double ya, double sb, double yb, double s, double y[3]) {
    double span = sb - sa, f, f1, f2;
    smootherstep((s - sa) / span, &f, &f1, &f2);
    y[0] = ya + (yb - ya) * f;
    y[1] = (yb - ya) * f1 / span;
    y[2] = (yb - ya) * f2 / (span * span);
}

/* The yaw law of a travel piece at s from its geometry g. */
static void travel_yaw(const veer_path_piece *pc, double s, const double g[2][4], double y[3]) {
    const double *p = pc->yaw_p;
    y[0] = y[1] = y[2] = 0.0;
    switch (pc->heading) {
    case VEER_HEADING_TANGENT:
        if (pc->kind == PIECE_LINE) {
            y[0] = p[0];
        } else {
            /* psi = atan2(y', x'); psi' = (x'y'' - y'x'') / |p'|^2, and its
             * derivative; measured from d0, since B' stays between d0 and d1. */
            double x1 = g[0][1], y1 = g[1][1], x2 = g[0][2], y2 = g[1][2], x3 = g[0][3], y3 = g[1][3];
            double n = x1 * x1 + y1 * y1;
            double cr = cross2(x1, y1, x2, y2);
            y[0] = p[0] + atan2(cross2(p[1], p[2], x1, y1), dot2(p[1], p[2], x1, y1));
            y[1] = cr / n;
            y[2] = cross2(x1, y1, x3, y3) / n - 2.0 * cr * dot2(x1, y1, x2, y2) / (n * n);
        }
        break;
    case VEER_HEADING_TOWARD: {
        /* alpha = atan2(r), r = T - p: alpha' = (r x r') / |r|^2,
         * alpha'' = (r x r'') / |r|^2 - 2 (r x r')(r . r') / |r|^4. */
        double rx = p[0] - g[0][0], ry = p[1] - g[1][0];
        double r1x = -g[0][1], r1y = -g[1][1], r2x = -g[0][2], r2y = -g[1][2];
        double n = rx * rx + ry * ry;
        double cr = cross2(rx, ry, r1x, r1y);
        /* unwrap against a reference within pi of every yaw in its region:
         * p[2] from the start, (p[3], p[4]), (p[5], p[6]), (p[7], p[8]) =
         * (where a region starts, its reference) on corners */
        double ref = p[2];
        if (pc->kind == PIECE_CORNER)
            for (int k = 3; k <= 7 && s >= p[k]; k += 2) ref = p[k + 1];
        y[0] = ref + veer__wrap(atan2(ry, rx) - ref);
        y[1] = cr / n;
        y[2] = cross2(rx, ry, r2x, r2y) / n - 2.0 * cr * dot2(rx, ry, r1x, r1y) / (n * n);
        break;
    }
    case VEER_HEADING_BLEND:
        if (s < p[2])
            knot_step(p[0], p[1], p[2], p[3], s, y);
        else if (s < p[4])
            knot_step(p[2], p[3], p[4], p[5], s, y);
        else
            y[0] = p[5];
        break;
    default: /* HOLD */
        y[0] = p[0];
        break;
    }
    add_fade(pc, s, y);
}

static void piece_eval(const veer_path_piece *pc, double s, double q[3], double dq[3], double ddq[3]) {
    double u = s - pc->s0;
    if (pc->kind == PIECE_SPIN) {
        q[0] = pc->c[0][0], q[1] = pc->c[1][0], q[2] = pc->c[0][1] + pc->c[0][2] * u;
        dq[0] = 0.0, dq[1] = 0.0, dq[2] = pc->c[0][2];
        ddq[0] = ddq[1] = ddq[2] = 0.0;
        return;
    }
    if (pc->kind == PIECE_PIVOT) {
        /* p = C + R(a) (p0 - C), a = sgn u: p' = sgn J R(a)(p0 - C), p'' = -R(a)(p0 - C). */
        double sg = pc->c[0][3], a = sg * u, ca = cos(a), sa = sin(a);
        double ox = pc->c[0][1], oy = pc->c[1][1];
        double rx = ca * ox - sa * oy, ry = sa * ox + ca * oy;
        double turn = pc->c[0][4]; /* 1: rigid pivot, 0: orbit with the yaw held */
        q[0] = pc->c[0][0] + rx, q[1] = pc->c[1][0] + ry, q[2] = pc->c[0][2] + turn * a;
        dq[0] = -sg * ry, dq[1] = sg * rx, dq[2] = turn * sg;
        ddq[0] = -rx, ddq[1] = -ry, ddq[2] = 0.0;
        return;
    }
    double g[2][4], y[3];
    travel_geometry(pc, s, g);
    travel_yaw(pc, s, g, y);
    q[0] = g[0][0], q[1] = g[1][0], q[2] = y[0];
    dq[0] = g[0][1], dq[1] = g[1][1], dq[2] = y[1];
    ddq[0] = g[0][2], ddq[1] = g[1][2], ddq[2] = y[2];
}

void veer__path_eval(const veer_path *path, int seg, double s, double q[3], double dq[3], double ddq[3]) {
    double qq[3], dd[3], d2[3];
    if (!q) q = qq;
    if (!dq) dq = dd;
    if (!ddq) ddq = d2;
    if (!path || path->segment_count <= 0 || path->segment_count > path->segment_cap) {
        for (int k = 0; k < 3; k++) q[k] = dq[k] = ddq[k] = 0.0;
        return;
    }
    if (seg < 0) seg = 0;
    if (seg >= path->segment_count) seg = path->segment_count - 1;
    const veer_path_segment *sg = &path->segments[seg];
    if (!(s >= sg->s_begin)) s = sg->s_begin; /* also NaN */
    if (s > sg->s_end) s = sg->s_end;
    /* the last piece of the segment starting at or before s */
    int lo = sg->first_piece, hi = sg->first_piece + sg->piece_count - 1;
    while (lo < hi) {
        int mid = (lo + hi + 1) / 2;
        if (path->pieces[mid].s0 <= s)
            lo = mid;
        else
            hi = mid - 1;
    }
    piece_eval(&path->pieces[lo], s, q, dq, ddq);
}

int veer__path_segment_at(const veer_path *path, double s) {
    if (!path || path->segment_count <= 0) return 0;
    int lo = 0, hi = path->segment_count - 1;
    if (!(s >= 0.0)) return 0;
    while (lo < hi) {
        int mid = (lo + hi + 1) / 2;
        if (path->segments[mid].s_begin <= s)
            lo = mid;
        else
            hi = mid - 1;
    }
    return lo;
}

/* ---- checks ------------------------------------------------------------- */

static int bad_number(double v) { return !veer__finite(v) || fabs(v) > COORD_MAX_; }

static veer_status check_leg(const veer_leg *leg, int li, veer_diag *diag) {
    const veer_limit_id none = veer__limit(VEER_LIMIT_NONE, -1);
    const struct {
        const char *name;
        double v;
    } nums[] = {{"toward_x", leg->toward_x}, {"toward_y", leg->toward_y}, {"yaw", leg->yaw},
                {"pivot_x", leg->pivot_x},   {"pivot_y", leg->pivot_y},   {"angle", leg->angle}};
    for (size_t i = 0; i < sizeof nums / sizeof nums[0]; i++)
        if (bad_number(nums[i].v))
            return veer__fail(diag, VEER_ERR_VALUE, li, -1, -1, -1.0, none,
                              "leg %d: %s is not finite or beyond +-1e6", li, nums[i].name);
    if (!veer__finite(leg->dwell) || leg->dwell < 0.0)
        return veer__fail(diag, VEER_ERR_VALUE, li, -1, -1, -1.0, none,
                          "leg %d: dwell must be a finite number of seconds >= 0", li);
    switch (leg->kind) {
    case VEER_LEG_TRAVEL:
        if (leg->waypoint_count < 1)
            return veer__fail(diag, VEER_ERR_VALUE, li, -1, -1, -1.0, none,
                              "leg %d: a travel leg needs at least one waypoint (it has %d)", li,
                              leg->waypoint_count);
        if (leg->heading < VEER_HEADING_HOLD || leg->heading > VEER_HEADING_BLEND)
            return veer__fail(diag, VEER_ERR_VALUE, li, -1, -1, -1.0, none,
                              "leg %d: unknown heading intent %d", li, (int)leg->heading);
        if (leg->reversed != 0 && leg->reversed != 1)
            return veer__fail(diag, VEER_ERR_VALUE, li, -1, -1, -1.0, none, "leg %d: reversed must be 0 or 1",
                              li);
        if (!veer__finite(leg->corner_tolerance) || !(leg->corner_tolerance > 0.0) ||
            leg->corner_tolerance > COORD_MAX_)
            return veer__fail(diag, VEER_ERR_VALUE, li, -1, -1, -1.0, none,
                              "leg %d: corner_tolerance must be a distance > 0 m", li);
        break;
    case VEER_LEG_SPIN:
    case VEER_LEG_PIVOT:
        if (leg->waypoint_count != 0)
            return veer__fail(diag, VEER_ERR_VALUE, li, -1, -1, -1.0, none,
                              "leg %d: a %s leg takes no waypoints (it has %d)", li,
                              leg->kind == VEER_LEG_SPIN ? "spin" : "pivot", leg->waypoint_count);
        if (leg->kind == VEER_LEG_PIVOT && leg->hold_yaw != 0 && leg->hold_yaw != 1)
            return veer__fail(diag, VEER_ERR_VALUE, li, -1, -1, -1.0, none, "leg %d: hold_yaw must be 0 or 1", li);
        if (leg->kind == VEER_LEG_SPIN && leg->direction != 0 && leg->direction != 1 && leg->direction != -1)
            return veer__fail(diag, VEER_ERR_VALUE, li, -1, -1, -1.0, none,
                              "leg %d: spin direction must be 0, +1 or -1 (it is %d)", li, leg->direction);
        break;
    default:
        return veer__fail(diag, VEER_ERR_VALUE, li, -1, -1, -1.0, none, "leg %d: unknown leg kind %d", li,
                          (int)leg->kind);
    }
    return VEER_OK;
}

static veer_status check_waypoint(const veer_waypoint *wp, int li, int wi, veer_diag *diag) {
    const veer_limit_id none = veer__limit(VEER_LIMIT_NONE, -1);
    if (bad_number(wp->x) || bad_number(wp->y) || bad_number(wp->yaw))
        return veer__fail(diag, VEER_ERR_VALUE, li, wi, -1, -1.0, none,
                          "leg %d, waypoint %d: x, y and yaw must be finite and within +-1e6", li, wi);
    if (!veer__finite(wp->dwell) || wp->dwell < 0.0)
        return veer__fail(diag, VEER_ERR_VALUE, li, wi, -1, -1.0, none,
                          "leg %d, waypoint %d: dwell must be a finite number of seconds >= 0", li, wi);
    if ((wp->stop != 0 && wp->stop != 1) || (wp->has_yaw != 0 && wp->has_yaw != 1))
        return veer__fail(diag, VEER_ERR_VALUE, li, wi, -1, -1.0, none,
                          "leg %d, waypoint %d: stop and has_yaw must be 0 or 1", li, wi);
    return VEER_OK;
}

static veer_status check_route(const veer__route_view *route, veer_diag *diag) {
    const veer_limit_id none = veer__limit(VEER_LIMIT_NONE, -1);
    if (bad_number(route->start_x) || bad_number(route->start_y) || bad_number(route->start_yaw))
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, none,
                          "route start pose must be finite and within +-1e6");
    if (route->has_start_steer != 0 && route->has_start_steer != 1)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, none, "has_start_steer must be 0 or 1");
    if (route->has_start_steer)
        for (int m = 0; m < VEER_MAX_MODULES; m++)
            if (bad_number(route->start_steer[m]))
                return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, none,
                                  "start_steer[%d] is not finite", m);
    if (route->leg_count < 1)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, none, "the route has no legs (leg_count %d)",
                          route->leg_count);
    if (route->leg_count > VEER_MAX_LEGS)
        return veer__fail(diag, VEER_ERR_CAPACITY, -1, -1, -1, -1.0, none,
                          "leg_count %d exceeds the capacity of %d legs", route->leg_count, VEER_MAX_LEGS);
    if (route->waypoint_count < 0)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, none, "waypoint_count %d is negative",
                          route->waypoint_count);
    if (route->waypoint_count > VEER_MAX_WAYPOINTS)
        return veer__fail(diag, VEER_ERR_CAPACITY, -1, -1, -1, -1.0, none,
                          "waypoint_count %d exceeds the capacity of %d waypoints", route->waypoint_count,
                          VEER_MAX_WAYPOINTS);
    int used = 0;
    for (int li = 0; li < route->leg_count; li++) {
        const veer_leg *leg = &route->legs[li];
        veer_status st = check_leg(leg, li, diag);
        if (st) return st;
        if (leg->kind != VEER_LEG_TRAVEL) continue;
        if (leg->waypoint_count > route->waypoint_count - used)
            return veer__fail(diag, VEER_ERR_VALUE, li, -1, -1, -1.0, none,
                              "leg %d: takes %d waypoints but only %d of the route's %d are left", li,
                              leg->waypoint_count, route->waypoint_count - used, route->waypoint_count);
        for (int k = 0; k < leg->waypoint_count; k++) {
            st = check_waypoint(&route->waypoints[used + k], li, used + k, diag);
            if (st) return st;
        }
        used += leg->waypoint_count;
    }
    if (used != route->waypoint_count)
        return veer__fail(diag, VEER_ERR_VALUE, -1, used, -1, -1.0, none,
                          "the legs take %d waypoints but the route has %d; waypoints %d.. belong to no leg", used,
                          route->waypoint_count, used);
    return VEER_OK;
}

/* ---- building ----------------------------------------------------------- */

typedef struct {
    const veer__route_view *route;
    veer_path *path;
    veer_diag *diag;
    double x, y, yaw; /* pose at the current end of the path; yaw unwrapped */
    double s;         /* path position of the current end */
    int seg_first;    /* first piece of the open segment */
    double seg_s;     /* where the open segment begins */
} builder;

static veer_path_piece *new_piece(builder *b, int kind, int heading, double len) {
    veer_path *path = b->path;
    if (path->piece_count >= path->piece_cap) return NULL;
    veer_path_piece *pc = &path->pieces[path->piece_count++];
    memset(pc, 0, sizeof *pc);
    pc->kind = kind;
    pc->heading = heading;
    pc->s0 = b->s;
    pc->len = len;
    return pc;
}

static veer_status piece_capacity(builder *b, int li) {
    return veer__fail(b->diag, VEER_ERR_CAPACITY, li, -1, -1, b->s, veer__limit(VEER_LIMIT_NONE, -1),
                      "leg %d: the path needs more than %d pieces", li, b->path->piece_cap);
}

static veer_status close_segment(builder *b, int li, int waypoint, double dwell) {
    veer_path *path = b->path;
    if (path->segment_count >= path->segment_cap)
        return veer__fail(b->diag, VEER_ERR_CAPACITY, li, waypoint, -1, b->s, veer__limit(VEER_LIMIT_NONE, -1),
                          "leg %d: the path needs more than %d rest-to-rest segments", li, path->segment_cap);
    veer_path_segment *sg = &path->segments[path->segment_count++];
    sg->s_begin = b->seg_s;
    sg->s_end = b->s;
    sg->first_piece = b->seg_first;
    sg->piece_count = path->piece_count - b->seg_first;
    sg->leg = li;
    sg->waypoint = waypoint;
    sg->dwell = dwell;
    b->seg_first = path->piece_count;
    b->seg_s = b->s;
    return VEER_OK;
}

/* A spin in place by delta (nonzero) from the current pose, as one piece. */
static veer_status add_spin(builder *b, int li, double delta) {
    veer_path_piece *pc = new_piece(b, PIECE_SPIN, 0, fabs(delta));
    if (!pc) return piece_capacity(b, li);
    pc->c[0][0] = b->x;
    pc->c[1][0] = b->y;
    pc->c[0][1] = b->yaw;
    pc->c[0][2] = delta > 0.0 ? 1.0 : -1.0;
    b->s += fabs(delta);
    b->yaw += delta;
    return VEER_OK;
}

static veer_status build_spin(builder *b, int li) {
    const veer_leg *leg = &b->route->legs[li];
    double cur = b->yaw, d;
    if (leg->direction == 0) {
        d = veer__wrap(leg->yaw - cur);
    } else {
        d = fmod(leg->yaw - cur, 2.0 * VEER_PI);
        if (leg->direction > 0 && d < 0.0) d += 2.0 * VEER_PI;
        if (leg->direction < 0 && d > 0.0) d -= 2.0 * VEER_PI;
    }
    if (fabs(d) < ZERO_TURN_ || fabs(fabs(d) - 2.0 * VEER_PI) < ZERO_TURN_)
        return veer__fail(b->diag, VEER_ERR_GEOMETRY, li, -1, -1, b->s, veer__limit(VEER_LIMIT_NONE, -1),
                          "leg %d: spin to the yaw it already has (%.3f rad)", li, veer__wrap(cur));
    veer_status st = add_spin(b, li, d);
    if (st) return st;
    return close_segment(b, li, -1, leg->dwell);
}

static veer_status build_pivot(builder *b, int li) {
    const veer_leg *leg = &b->route->legs[li];
    if (fabs(leg->angle) < ZERO_TURN_)
        return veer__fail(b->diag, VEER_ERR_GEOMETRY, li, -1, -1, b->s, veer__limit(VEER_LIMIT_NONE, -1),
                          "leg %d: pivot by a zero angle", li);
    double len = fabs(leg->angle);
    veer_path_piece *pc = new_piece(b, PIECE_PIVOT, 0, len);
    if (!pc) return piece_capacity(b, li);
    pc->c[0][0] = leg->pivot_x;
    pc->c[1][0] = leg->pivot_y;
    pc->c[0][1] = b->x - leg->pivot_x;
    pc->c[1][1] = b->y - leg->pivot_y;
    pc->c[0][2] = b->yaw;
    pc->c[0][3] = leg->angle > 0.0 ? 1.0 : -1.0;
    pc->c[0][4] = leg->hold_yaw ? 0.0 : 1.0; /* yaw turns with the rotation, or is held (an orbit) */
    if (leg->hold_yaw && hypot(pc->c[0][1], pc->c[1][1]) < 1e-6)
        return veer__fail(b->diag, VEER_ERR_GEOMETRY, li, -1, -1, b->s, veer__limit(VEER_LIMIT_NONE, -1),
                          "leg %d: an orbit about the point the cart stands on does not move it", li);
    double q[3], dq[3], ddq[3];
    piece_eval(pc, pc->s0 + len, q, dq, ddq);
    b->s += len;
    b->x = q[0], b->y = q[1], b->yaw = q[2];
    return close_segment(b, li, -1, leg->dwell);
}

static const char *heading_name(int h) {
    switch (h) {
    case VEER_HEADING_TANGENT:
        return "tangent";
    case VEER_HEADING_TOWARD:
        return "toward";
    case VEER_HEADING_BLEND:
        return "blend";
    default:
        return "hold";
    }
}

/* State of the yaw law while a travel leg is laid out. */
typedef struct {
    int heading;
    double hold;      /* HOLD: the leg's start yaw */
    double law;       /* TANGENT, TOWARD: the law's unwrapped yaw at the current end */
    double offset;    /* TANGENT: 0, or pi when reversed */
    double tx, ty;    /* TOWARD point */
    double fade;      /* mismatch to absorb at the start of the open segment */
} yaw_state;

static veer_status toward_too_close(builder *b, int li, int wi) {
    return veer__fail(b->diag, VEER_ERR_GEOMETRY, li, wi, -1, b->s, veer__limit(VEER_LIMIT_NONE, -1),
                      "leg %d, waypoint %d: the path passes within 1 mm of the point the toward heading faces", li,
                      wi);
}

/* Yaw law of a line piece from a along d (unit), length L. */
static veer_status line_yaw(builder *b, yaw_state *ys, veer_path_piece *pc, double ax, double ay, double dx,
                            double dy, int li, int wi) {
    double L = pc->len;
    switch (ys->heading) {
    case VEER_HEADING_TANGENT:
        pc->yaw_p[0] = ys->law;
        break;
    case VEER_HEADING_TOWARD: {
        double u = dot2(ys->tx - ax, ys->ty - ay, dx, dy);
        if (u < 0.0) u = 0.0;
        if (u > L) u = L;
        double fx = ax + dx * u, fy = ay + dy * u;
        if (hypot(ys->tx - fx, ys->ty - fy) < TOWARD_MIN_) return toward_too_close(b, li, wi);
        /* reference: the direction at the foot of the perpendicular, within a
         * quarter turn of every direction seen from the line */
        double a0 = atan2(ys->ty - ay, ys->tx - ax), af = atan2(ys->ty - fy, ys->tx - fx);
        double ref = ys->law + veer__wrap(af - a0);
        pc->yaw_p[0] = ys->tx;
        pc->yaw_p[1] = ys->ty;
        pc->yaw_p[2] = ref;
        double ae = atan2(ys->ty - (ay + dy * L), ys->tx - (ax + dx * L));
        ys->law = ref + veer__wrap(ae - ref);
        break;
    }
    case VEER_HEADING_HOLD:
        pc->yaw_p[0] = ys->hold;
        break;
    default: /* BLEND: filled once the leg's knots are known */
        break;
    }
    return VEER_OK;
}

/* Yaw law of a corner piece. */
static veer_status corner_yaw(builder *b, yaw_state *ys, veer_path_piece *pc, const double d0[2], double turn,
                              const corner_shape *sh, int li, int wi) {
    switch (ys->heading) {
    case VEER_HEADING_TANGENT:
        pc->yaw_p[0] = ys->law;
        pc->yaw_p[1] = d0[0];
        pc->yaw_p[2] = d0[1];
        ys->law += turn;
        break;
    case VEER_HEADING_TOWARD: {
        /* Walk the blend with steps short against the distance to the point
         * (the direction to it turns by at most about 0.11 rad a step),
         * unwrap, and open a new reference every TOWARD_REGION_ rad. */
        double *p = pc->yaw_p;
        double vmax = 1.0 + fabs(sh->c) * 2.0 / 64.0; /* |B'| <= 1 + c |d0 + d1| max g */
        double g[2][4];
        p[0] = ys->tx, p[1] = ys->ty, p[2] = ys->law;
        p[3] = p[5] = p[7] = HUGE_VAL;
        p[4] = p[6] = p[8] = ys->law;
        int regions = 1;
        double sigma = 0.0, u = ys->law, L = pc->len;
        travel_geometry(pc, pc->s0, g);
        double rx = ys->tx - g[0][0], ry = ys->ty - g[1][0];
        double prev = atan2(ry, rx), ref = ys->law;
        if (hypot(rx, ry) < TOWARD_MIN_) return toward_too_close(b, li, wi);
        while (sigma < L) {
            double step = 0.1 * hypot(rx, ry) / vmax;
            sigma = sigma + step < L ? sigma + step : L;
            travel_geometry(pc, pc->s0 + sigma, g);
            rx = ys->tx - g[0][0], ry = ys->ty - g[1][0];
            if (hypot(rx, ry) < TOWARD_MIN_) return toward_too_close(b, li, wi);
            double a = atan2(ry, rx);
            u += veer__wrap(a - prev);
            prev = a;
            if (fabs(u - ref) > TOWARD_REGION_ && sigma < L) {
                if (regions == TOWARD_REGIONS_) return toward_too_close(b, li, wi);
                p[1 + 2 * regions] = pc->s0 + sigma;
                p[2 + 2 * regions] = u;
                ref = u;
                regions++;
            }
        }
        ys->law = ref + veer__wrap(prev - ref);
        break;
    }
    case VEER_HEADING_HOLD:
        pc->yaw_p[0] = ys->hold;
        break;
    default:
        break;
    }
    return VEER_OK;
}

static veer_status mismatch(builder *b, int li, int wi, double cur, double law, int heading) {
    return veer__fail(b->diag, VEER_ERR_GEOMETRY, li, wi, -1, b->s, veer__limit(VEER_LIMIT_NONE, -1),
                      "leg %d starts facing %.2f rad but its %s heading needs %.2f rad; add a spin leg first", li,
                      veer__wrap(cur), heading_name(heading), veer__wrap(law));
}

/* Spreads the fade of a start mismatch m over the first min(segment length,
 * 1 m) of a travel segment just closed: yaw then starts exactly at the yaw the
 * cart has and joins the law with matching rate and curvature (C2). */
static void apply_fade(veer_path *path, double m) {
    if (m == 0.0) return;
    const veer_path_segment *sg = &path->segments[path->segment_count - 1];
    double L = sg->s_end - sg->s_begin;
    if (L > FADE_MAX_) L = FADE_MAX_;
    for (int j = sg->first_piece; j < sg->first_piece + sg->piece_count; j++) {
        veer_path_piece *pc = &path->pieces[j];
        if (pc->s0 >= sg->s_begin + L) break;
        pc->yaw_p[9] = m;
        pc->yaw_p[10] = L;
        pc->yaw_p[11] = sg->s_begin;
    }
}

/* A travel leg's points and lines, computed where they are needed rather
 * than kept for every waypoint (a cart builds paths on a small stack); the
 * same arithmetic gives the same values each time. Point 0 is where the leg
 * starts, point i >= 1 waypoint w0 + i - 1; line i runs from point i to i + 1. */
typedef struct {
    const veer__route_view *route;
    int w0, n;     /* first waypoint, waypoint count */
    double x0, y0; /* where the leg starts */
} travel_leg;

typedef struct {
    double x, y, x1, y1; /* its two ends */
    int stop, stop1;     /* the cart rests at that end */
    double ll, dx, dy;   /* length, unit direction (0 when shorter than COINCIDENT_) */
} travel_line;

/* The blend at a point between two lines: turn angle, shape and size
 * (lam 0: no blend, shape unset). */
typedef struct {
    double turn, lam;
    corner_shape shape;
} travel_corner;

static void travel_point(const travel_leg *t, int i, double *x, double *y, int *stop) {
    if (i == 0) {
        *x = t->x0, *y = t->y0, *stop = 1;
        return;
    }
    const veer_waypoint *wp = &t->route->waypoints[t->w0 + i - 1];
    *x = wp->x, *y = wp->y;
    *stop = wp->stop || i == t->n;
}

static void travel_line_of(const travel_leg *t, int i, travel_line *l) {
    travel_point(t, i, &l->x, &l->y, &l->stop);
    travel_point(t, i + 1, &l->x1, &l->y1, &l->stop1);
    double ex = l->x1 - l->x, ey = l->y1 - l->y;
    l->ll = hypot(ex, ey);
    l->dx = l->dy = 0.0;
    if (!(l->ll < COINCIDENT_)) l->dx = ex / l->ll, l->dy = ey / l->ll;
}

static double travel_turn(const travel_line *in, const travel_line *out) {
    return atan2(cross2(in->dx, in->dy, out->dx, out->dy), dot2(in->dx, in->dy, out->dx, out->dy));
}

/* The corner where line in ends and line out starts (the turn is checked). */
static void travel_corner_of(const veer_leg *leg, const travel_line *in, const travel_line *out, travel_corner *c) {
    memset(c, 0, sizeof *c);
    if (out->stop) return;
    c->turn = travel_turn(in, out);
    if (fabs(c->turn) < STRAIGHT_TURN_) return;
    double d0[2] = {in->dx, in->dy}, d1[2] = {out->dx, out->dy};
    c->shape = corner_shape_of(d0, d1);
    double want = leg->corner_tolerance / c->shape.dev1;
    double cap_in = in->stop ? in->ll * (1.0 - STOP_MARGIN_) : 0.5 * in->ll;
    double cap_out = out->stop1 ? out->ll * (1.0 - STOP_MARGIN_) : 0.5 * out->ll;
    c->lam = want < cap_in ? want : cap_in;
    if (cap_out < c->lam) c->lam = cap_out;
}

static veer_status build_travel(builder *b, int li, int w0) {
    const veer__route_view *route = b->route;
    const veer_leg *leg = &route->legs[li];
    const veer_limit_id none = veer__limit(VEER_LIMIT_NONE, -1);
    const int n = leg->waypoint_count;
    const travel_leg tl = {route, w0, n, b->x, b->y};
    travel_line cur, next;
    veer_status st;

    for (int i = 0; i < n; i++) {
        travel_line_of(&tl, i, &cur);
        if (cur.ll < COINCIDENT_) {
            if (i == 0)
                return veer__fail(b->diag, VEER_ERR_GEOMETRY, li, w0, -1, b->s, none,
                                  "leg %d, waypoint %d: coincides with the position the leg starts from", li, w0);
            return veer__fail(b->diag, VEER_ERR_GEOMETRY, li, w0 + i, -1, b->s, none,
                              "leg %d, waypoint %d: coincides with waypoint %d", li, w0 + i, w0 + i - 1);
        }
    }
    /* corners too sharp to pass through */
    for (int i = 1; i < n; i++) {
        travel_line_of(&tl, i - 1, &cur);
        travel_line_of(&tl, i, &next);
        if (next.stop) continue;
        double turn = travel_turn(&cur, &next);
        if (fabs(turn) > MAX_TURN_)
            return veer__fail(b->diag, VEER_ERR_GEOMETRY, li, w0 + i - 1, -1, b->s, none,
                              "leg %d, waypoint %d: corner too sharp to pass through (turns %.1f degrees, at "
                              "most 175); make it a stop",
                              li, w0 + i - 1, fabs(turn) / DEG_);
    }

    travel_line_of(&tl, 0, &cur);
    yaw_state ys;
    memset(&ys, 0, sizeof ys);
    ys.heading = leg->heading;
    ys.hold = b->yaw;
    ys.offset = leg->reversed ? VEER_PI : 0.0;
    ys.tx = leg->toward_x, ys.ty = leg->toward_y;
    if (ys.heading == VEER_HEADING_TANGENT) {
        double target = atan2(cur.dy, cur.dx) + ys.offset;
        ys.law = b->yaw + veer__wrap(target - b->yaw);
        ys.fade = b->yaw - ys.law;
        if (fabs(ys.fade) > MISMATCH_MAX_) return mismatch(b, li, -1, b->yaw, ys.law, ys.heading);
    } else if (ys.heading == VEER_HEADING_TOWARD) {
        if (hypot(ys.tx - cur.x, ys.ty - cur.y) < TOWARD_MIN_) return toward_too_close(b, li, w0);
        double target = atan2(ys.ty - cur.y, ys.tx - cur.x);
        ys.law = b->yaw + veer__wrap(target - b->yaw);
        ys.fade = b->yaw - ys.law;
        if (fabs(ys.fade) > MISMATCH_MAX_) return mismatch(b, li, -1, b->yaw, ys.law, ys.heading);
    }

    const int leg_first = b->path->piece_count;
    const double leg_s = b->s, leg_yaw = b->yaw;
    /* BLEND knots: the leg's start, then every waypoint with a yaw (a corner
     * at its blend midpoint, a stop where it rests), unwrapped the short way.
     * Not kept on the stack: knot k >= 1 goes to yaw_p[6..7] of the leg's
     * piece k - 1, which a BLEND piece's yaw law leaves unused (every
     * waypoint adds a piece before its knot: a line, or a corner where two
     * blends take the whole line). */
    veer_path_piece *lp = &b->path->pieces[leg_first];
    int nk = 1;
    double yk = leg_yaw; /* the last knot's yaw */
    travel_corner cn; /* at the end of line i */
    double lam = 0.0; /* the blend at the start of line i */
    for (int i = 0; i < n; i++) {
        int wi = w0 + i; /* the waypoint this line runs to */
        if (i > 0) cur = next, lam = cn.lam;
        memset(&cn, 0, sizeof cn);
        if (i + 1 < n) {
            travel_line_of(&tl, i + 1, &next);
            travel_corner_of(leg, &cur, &next, &cn);
        }
        double a = lam, e = cn.lam;
        double L = cur.ll - a - e;
        if (L > 1e-12 * (1.0 + cur.ll)) {
            veer_path_piece *pc = new_piece(b, PIECE_LINE, leg->heading, L);
            if (!pc) return piece_capacity(b, li);
            double ax = cur.x + cur.dx * a, ay = cur.y + cur.dy * a;
            pc->c[0][0] = ax, pc->c[0][1] = cur.dx;
            pc->c[1][0] = ay, pc->c[1][1] = cur.dy;
            st = line_yaw(b, &ys, pc, ax, ay, cur.dx, cur.dy, li, wi);
            if (st) return st;
            b->s += L;
        }
        double wps; /* where the path passes waypoint wi */
        if (!cur.stop1) {
            if (cn.lam > 0.0) {
                double d0[2] = {cur.dx, cur.dy}, d1[2] = {next.dx, next.dy};
                veer_path_piece *pc = new_piece(b, PIECE_CORNER, leg->heading, 0.0);
                if (!pc) return piece_capacity(b, li);
                corner_coefficients(pc, cur.x1, cur.y1, d0, d1, &cn.shape, cn.lam);
                st = corner_yaw(b, &ys, pc, d0, cn.turn, &cn.shape, li, wi);
                if (st) return st;
                wps = pc->s0 + 0.5 * pc->len;
                b->s += pc->len;
            } else {
                wps = b->s;
            }
        } else {
            /* a rest at waypoint wi */
            wps = b->s;
            b->x = cur.x1, b->y = cur.y1;
            double dwell = route->waypoints[wi].dwell + (i + 1 == n ? leg->dwell : 0.0);
            st = close_segment(b, li, wi, dwell);
            if (st) return st;
            apply_fade(b->path, ys.fade);
            ys.fade = 0.0;
            if (i + 1 < n && ys.heading == VEER_HEADING_TANGENT) {
                /* The tangent turns at this stop: a small change is faded in at
                 * the start of the next segment, a larger one is a spin in place
                 * (its own segment). */
                double target = atan2(next.dy, next.dx) + ys.offset;
                double nextlaw = ys.law + veer__wrap(target - ys.law);
                double delta = nextlaw - ys.law;
                if (fabs(delta) > MISMATCH_MAX_) {
                    b->yaw = ys.law;
                    st = add_spin(b, li, delta);
                    if (st) return st;
                    st = close_segment(b, li, -1, 0.0);
                    if (st) return st;
                    ys.fade = 0.0;
                } else {
                    ys.fade = -delta;
                }
                ys.law = nextlaw;
            }
        }
        const veer_waypoint *wp = &route->waypoints[wi];
        if (ys.heading == VEER_HEADING_BLEND && wp->has_yaw) {
            yk += veer__wrap(wp->yaw - yk);
            lp[nk - 1].yaw_p[6] = wps;
            lp[nk - 1].yaw_p[7] = yk;
            nk++;
        }
    }

    if (ys.heading == VEER_HEADING_BLEND) {
        int k = 0;
        double sk = leg_s; /* knot k, yk its yaw */
        yk = leg_yaw;
        for (int j = leg_first; j < b->path->piece_count; j++) {
            veer_path_piece *pc = &b->path->pieces[j];
            while (k + 1 < nk && lp[k].yaw_p[6] <= pc->s0) sk = lp[k].yaw_p[6], yk = lp[k].yaw_p[7], k++;
            double *p = pc->yaw_p;
            p[0] = sk, p[1] = yk;
            if (k + 1 < nk)
                p[2] = lp[k].yaw_p[6], p[3] = lp[k].yaw_p[7];
            else
                p[2] = p[0], p[3] = p[1];
            if (k + 2 < nk)
                p[4] = lp[k + 1].yaw_p[6], p[5] = lp[k + 1].yaw_p[7];
            else
                p[4] = p[2], p[5] = p[3];
        }
    }
    /* the yaw at the leg's end, from the last piece itself */
    {
        const veer_path_piece *last = &b->path->pieces[b->path->piece_count - 1];
        double q[3], dq[3], ddq[3];
        piece_eval(last, last->s0 + last->len, q, dq, ddq);
        b->yaw = q[2];
    }
    return VEER_OK;
}

static veer_status build(const veer__route_view *route, veer_path *out, veer_diag *diag) {
    veer_status st = check_route(route, diag);
    if (st) return st;
    builder b;
    memset(&b, 0, sizeof b);
    b.route = route;
    b.path = out;
    b.diag = diag;
    b.x = route->start_x, b.y = route->start_y, b.yaw = route->start_yaw;
    int w0 = 0;
    for (int li = 0; li < route->leg_count; li++) {
        const veer_leg *leg = &route->legs[li];
        switch (leg->kind) {
        case VEER_LEG_TRAVEL:
            st = build_travel(&b, li, w0);
            w0 += leg->waypoint_count;
            break;
        case VEER_LEG_SPIN:
            st = build_spin(&b, li);
            break;
        default:
            st = build_pivot(&b, li);
            break;
        }
        if (st) return st;
    }
    out->length = b.s;
    out->end_pose[0] = b.x, out->end_pose[1] = b.y, out->end_pose[2] = b.yaw;
    veer__diag_ok(diag);
    return VEER_OK;
}

void veer__path_attach(veer_path *path, veer_path_piece *pieces, int piece_cap, veer_path_segment *segments,
                       int segment_cap) {
    path->length = 0.0;
    path->piece_count = 0;
    path->piece_cap = pieces && piece_cap > 0 ? piece_cap : 0;
    path->pieces = pieces;
    path->segment_count = 0;
    path->segment_cap = segments && segment_cap > 0 ? segment_cap : 0;
    path->segments = segments;
    path->end_pose[0] = path->end_pose[1] = path->end_pose[2] = 0.0;
}

void veer__path_caps(int waypoints, int legs, int *piece_cap, int *segment_cap) {
    int w = waypoints, l = legs;
    w = w < 0 ? 0 : w > VEER_MAX_WAYPOINTS ? VEER_MAX_WAYPOINTS : w;
    l = l < 0 ? 0 : l > VEER_MAX_LEGS ? VEER_MAX_LEGS : l;
    *piece_cap = VEER_PATH_PIECES_FOR(w, l);
    *segment_cap = VEER_PATH_SEGMENTS_FOR(w, l);
}

veer_status veer__path_build(const veer__route_view *route, veer_path *out, veer_diag *diag) {
    if (!route || !out)
        return veer__fail(diag, VEER_ERR_NULL, -1, -1, -1, -1.0, veer__limit(VEER_LIMIT_NONE, -1),
                          "veer__path_build: %s is NULL", !route ? "route" : "out");
    if (!out->pieces || !out->segments || out->piece_cap < 0 || out->segment_cap < 0)
        return veer__fail(diag, VEER_ERR_NULL, -1, -1, -1, -1.0, veer__limit(VEER_LIMIT_NONE, -1),
                          "veer__path_build: the path has no storage attached (veer__path_attach)");
    out->length = 0.0;
    out->piece_count = 0;
    out->segment_count = 0;
    out->end_pose[0] = out->end_pose[1] = out->end_pose[2] = 0.0;
    veer_status st = build(route, out, diag);
    if (st) {
        /* leave a valid, empty path behind */
        out->length = 0.0;
        out->piece_count = 0;
        out->segment_count = 0;
        out->end_pose[0] = out->end_pose[1] = out->end_pose[2] = 0.0;
    }
    return st;
}
