/* Polygon maths for the range checks: validation, containment, distances,
 * and the signed clearance of a footprint against an area (range.h).
 *
 * Simple polygons only (checked): convex or not, either orientation.
 * Containment is the crossing-number test with the boundary counted as
 * inside; distances are exact minima over vertex-edge pairs.
 *
 * The depth of a violation, max over points p of the shape of the distance
 * from p to the allowed side, is found exactly from a finite candidate set.
 * The distance from p to the boundary is the smallest of convex functions
 * (distances to each edge, which are distances to its end points or to its
 * line), so it has no local maximum where fewer than three of them tie in
 * the interior of the shape, nor where fewer than two tie on an edge of the
 * shape (the tie curves of two such sites are lines and parabolas along
 * which the distance has no interior maximum). The candidates are
 * therefore: the shape's vertices; the points of its edges where two sites
 * (boundary vertices or edge lines) are equally far; and the interior points
 * equally far from three sites. Each is a root of a quadratic along a line.
 * Interior points are searched by branch and bound over cells, each cell
 * solved exactly once few sites can be nearest in it (interior_search).
 * SPDX-License-Identifier: MIT */
#include <stdio.h>
#include <string.h>
#include "range_internal.h"

#define PT(o, i) ((o)->points[(i)])

/* ---- small helpers ------------------------------------------------------ */

static double orient(const double a[2], const double b[2], const double c[2]) {
    return (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0]);
}

static int sgn(double v) { return (v > 0.0) - (v < 0.0); }

/* c collinear with a-b lies within the segment's box. */
static int within_box(const double a[2], const double b[2], const double c[2]) {
    return c[0] >= fmin(a[0], b[0]) && c[0] <= fmax(a[0], b[0]) && c[1] >= fmin(a[1], b[1]) &&
           c[1] <= fmax(a[1], b[1]);
}

/* Segments a-b and c-d touch or cross. */
static int segments_meet(const double a[2], const double b[2], const double c[2], const double d[2]) {
    int o1 = sgn(orient(a, b, c)), o2 = sgn(orient(a, b, d));
    int o3 = sgn(orient(c, d, a)), o4 = sgn(orient(c, d, b));
    if (o1 * o2 < 0 && o3 * o4 < 0) return 1;
    if (o1 == 0 && within_box(a, b, c)) return 1;
    if (o2 == 0 && within_box(a, b, d)) return 1;
    if (o3 == 0 && within_box(c, d, a)) return 1;
    if (o4 == 0 && within_box(c, d, b)) return 1;
    return 0;
}

static double point_segment_distance(double px, double py, const double a[2], const double b[2]) {
    double ex = b[0] - a[0], ey = b[1] - a[1];
    double wx = px - a[0], wy = py - a[1];
    double L2 = ex * ex + ey * ey;
    double t = L2 > 0.0 ? (wx * ex + wy * ey) / L2 : 0.0;
    if (t < 0.0) t = 0.0;
    if (t > 1.0) t = 1.0;
    return hypot(wx - t * ex, wy - t * ey);
}

static double segment_distance(const double a[2], const double b[2], const double c[2], const double d[2]) {
    if (segments_meet(a, b, c, d)) return 0.0;
    double m = point_segment_distance(a[0], a[1], c, d);
    m = fmin(m, point_segment_distance(b[0], b[1], c, d));
    m = fmin(m, point_segment_distance(c[0], c[1], a, b));
    return fmin(m, point_segment_distance(d[0], d[1], a, b));
}

void veer__outline_box(const veer_outline *o, double box[4]) {
    box[0] = box[2] = PT(o, 0)[0];
    box[1] = box[3] = PT(o, 0)[1];
    for (int i = 1; i < o->count; i++) {
        box[0] = fmin(box[0], PT(o, i)[0]);
        box[1] = fmin(box[1], PT(o, i)[1]);
        box[2] = fmax(box[2], PT(o, i)[0]);
        box[3] = fmax(box[3], PT(o, i)[1]);
    }
}

double veer__box_distance(const double a[4], const double b[4]) {
    double dx = fmax(0.0, fmax(a[0] - b[2], b[0] - a[2]));
    double dy = fmax(0.0, fmax(a[1] - b[3], b[1] - a[3]));
    return hypot(dx, dy);
}

static double box_point_distance(const double b[4], double x, double y) {
    double dx = fmax(0.0, fmax(b[0] - x, x - b[2]));
    double dy = fmax(0.0, fmax(b[1] - y, y - b[3]));
    return hypot(dx, dy);
}

int veer__outline_inside(const veer_outline *o, double x, double y) {
    int n = o->count, in = 0;
    double p[2] = {x, y};
    for (int i = 0, j = n - 1; i < n; j = i++) {
        const double *a = PT(o, j), *b = PT(o, i);
        if (orient(a, b, p) == 0.0 && within_box(a, b, p)) return 1; /* on the boundary */
        if ((a[1] > y) != (b[1] > y)) {
            double xc = a[0] + (y - a[1]) * (b[0] - a[0]) / (b[1] - a[1]);
            if (x < xc) in = !in;
        }
    }
    return in;
}

double veer__outline_boundary_distance(const veer_outline *o, double x, double y) {
    double m = VEER_UNLIMITED;
    for (int i = 0, j = o->count - 1; i < o->count; j = i++) m = fmin(m, point_segment_distance(x, y, PT(o, j), PT(o, i)));
    return m;
}

/* Smallest distance between the two boundaries (0 when they meet). */
static double boundary_gap(const veer_outline *a, const veer_outline *b) {
    double m = VEER_UNLIMITED;
    for (int i = 0, j = a->count - 1; i < a->count; j = i++)
        for (int k = 0, l = b->count - 1; k < b->count; l = k++) {
            double d = segment_distance(PT(a, j), PT(a, i), PT(b, l), PT(b, k));
            if (d < m) {
                m = d;
                if (m == 0.0) return 0.0;
            }
        }
    return m;
}

double veer__outline_gap(const veer_outline *a, const veer_outline *b) {
    double m = boundary_gap(a, b);
    if (m == 0.0) return 0.0;
    if (veer__outline_inside(b, PT(a, 0)[0], PT(a, 0)[1]) || veer__outline_inside(a, PT(b, 0)[0], PT(b, 0)[1]))
        return 0.0;
    return m;
}

/* ---- depth of a violation ------------------------------------------------ */

/* A site of the area's boundary: a vertex (point) or an edge's line
 * n . p = c with unit normal n (and the edge's ends, for its distance). */
typedef struct {
    int line;
    double a, b, c; /* point (a, b); line normal (a, b), offset c */
    double e0[2], e1[2];
} site;

/* Distance from (x, y) to the site's feature: the vertex, or the edge. */
static double site_distance(const site *st, double x, double y) {
    return st->line ? point_segment_distance(x, y, st->e0, st->e1) : hypot(x - st->a, y - st->b);
}

/* Squared distance to the site along p = m + tau d: q[0] + q[1] tau + q[2] tau^2. */
static void site_quadratic(const site *st, const double m[2], const double d[2], double q[3]) {
    if (st->line) {
        double e = st->a * m[0] + st->b * m[1] - st->c, f = st->a * d[0] + st->b * d[1];
        q[0] = e * e, q[1] = 2.0 * e * f, q[2] = f * f;
    } else {
        double wx = m[0] - st->a, wy = m[1] - st->b;
        q[0] = wx * wx + wy * wy, q[1] = 2.0 * (wx * d[0] + wy * d[1]), q[2] = d[0] * d[0] + d[1] * d[1];
    }
}

/* Real roots of A t^2 + B t + C = 0 (a double root once); returns how many. */
static int solve_quadratic(double A, double B, double C, double r[2]) {
    double scale = fabs(A) + fabs(B) + fabs(C);
    if (!(scale > 0.0)) return 0; /* identically zero: no isolated tie */
    if (fabs(A) <= 1e-13 * scale) {
        if (fabs(B) <= 1e-13 * scale) return 0;
        r[0] = -C / B;
        return 1;
    }
    double disc = B * B - 4.0 * A * C;
    if (disc < 0.0) {
        if (disc < -1e-12 * B * B) return 0;
        disc = 0.0;
    }
    double sq = sqrt(disc);
    double qq = -0.5 * (B + (B >= 0.0 ? sq : -sq)); /* Numerical Recipes 5.6: no cancellation */
    if (qq == 0.0) {
        r[0] = 0.0;
        return 1;
    }
    r[0] = qq / A;
    r[1] = C / qq;
    return disc == 0.0 ? 1 : 2;
}

/* Distance from p to the allowed side: 0 there, else to the boundary. */
static double outside_by(const veer_outline *area, int allowed_inside, double x, double y) {
    if (veer__outline_inside(area, x, y) == allowed_inside) return 0.0;
    return veer__outline_boundary_distance(area, x, y);
}

typedef struct {
    const veer_outline *shape, *area;
    int allowed_inside;
    double box[4];
    double best;
    site sites[2 * VEER_MAX_OUTLINE_VERTICES];
    int ns;
} depth_search;

/* Tries the point tau on line m + tau d as a candidate; tie2 is the squared
 * distance to the sites that tie there (the value there is at most that
 * when one of them is a vertex, and equal to it at a true tie). */
static void try_point(depth_search *ds, const double m[2], const double d[2], double tau, double tie2, int interior) {
    if (!(tie2 >= 0.0) || sqrt(tie2) <= ds->best) return;
    double x = m[0] + tau * d[0], y = m[1] + tau * d[1];
    if (interior) {
        if (box_point_distance(ds->box, x, y) > 0.0) return;
        if (!veer__outline_inside(ds->shape, x, y)) return;
    }
    double v = outside_by(ds->area, ds->allowed_inside, x, y);
    if (v > ds->best) ds->best = v;
}

/* Ties of sites i and k along the line (m, d); edge: tau restricted to [0, 1]. */
static void ties_on_line(depth_search *ds, const site *si, const site *sk, const double m[2], const double d[2],
                         int edge) {
    double qi[3], qk[3], r[2];
    site_quadratic(si, m, d, qi);
    site_quadratic(sk, m, d, qk);
    int nr = solve_quadratic(qi[2] - qk[2], qi[1] - qk[1], qi[0] - qk[0], r);
    for (int z = 0; z < nr; z++) {
        double tau = r[z];
        if (edge) {
            if (tau < -1e-12 || tau > 1.0 + 1e-12) continue;
            tau = fmin(1.0, fmax(0.0, tau));
        }
        try_point(ds, m, d, tau, qi[0] + tau * (qi[1] + tau * qi[2]), !edge);
    }
}

/* Lines on which sites i and j are equally far, when that set is made of
 * lines: two vertices (their bisector) or two edge lines (the two angle
 * bisectors). Returns how many (0..2). */
static int tie_lines(const site *si, const site *sj, double m[2][2], double d[2][2]) {
    if (!si->line && !sj->line) {
        double ex = sj->a - si->a, ey = sj->b - si->b;
        if (ex * ex + ey * ey < 1e-24) return 0;
        m[0][0] = 0.5 * (si->a + sj->a), m[0][1] = 0.5 * (si->b + sj->b);
        d[0][0] = -ey, d[0][1] = ex;
        return 1;
    }
    if (si->line && sj->line) {
        int n = 0;
        for (int sign = -1; sign <= 1; sign += 2) {
            double Nx = si->a - sign * sj->a, Ny = si->b - sign * sj->b, C = si->c - sign * sj->c;
            double N2 = Nx * Nx + Ny * Ny;
            if (N2 < 1e-20) continue;
            m[n][0] = Nx * C / N2, m[n][1] = Ny * C / N2;
            d[n][0] = -Ny, d[n][1] = Nx;
            n++;
        }
        return n;
    }
    return 0;
}

/* Every tie of three of the listed sites (interior candidates): along each
 * tie line of a pair, where a third site is as far. Every triple has two
 * sites of one kind, whose tie set is lines. */
static void triple_ties(depth_search *ds, const int *idx, int n) {
    for (int i = 0; i < n; i++)
        for (int j = i + 1; j < n; j++) {
            double m[2][2], d[2][2];
            int nl = tie_lines(&ds->sites[idx[i]], &ds->sites[idx[j]], m, d);
            for (int l = 0; l < nl; l++)
                for (int k = 0; k < n; k++)
                    if (k != i && k != j) ties_on_line(ds, &ds->sites[idx[i]], &ds->sites[idx[k]], m[l], d[l], 0);
        }
}

#define CELL_SITES 12    /* a cell with at most this many possible nearest sites is resolved exactly */
#define CELL_MIN 1e-6    /* m: half side below which a cell is taken at its centre (many-way ties) */
#define CELL_STACK 256

/* Interior of the shape: branch and bound over square cells. The value is
 * 1-Lipschitz, so on a cell of half-diagonal h about c it is at most
 * dist(c, boundary) + h; cells that cannot beat the best are dropped.
 * Only sites within dist(c, boundary) + 2h of c can be nearest anywhere in
 * the cell; once they are few, the cell's local maxima are among their
 * triple ties (see the top of this file) and the cell is done. */
static void interior_search(depth_search *ds) {
    double st[CELL_STACK][3];
    int top = 0;
    double half = 0.5 * fmax(ds->box[2] - ds->box[0], ds->box[3] - ds->box[1]);
    st[top][0] = 0.5 * (ds->box[0] + ds->box[2]), st[top][1] = 0.5 * (ds->box[1] + ds->box[3]), st[top][2] = half;
    top++;
    int idx[2 * VEER_MAX_OUTLINE_VERTICES];
    while (top > 0) {
        top--;
        double cx = st[top][0], cy = st[top][1], hs = st[top][2], h = hs * 1.4142135623730951;
        int in_shape = veer__outline_inside(ds->shape, cx, cy);
        if (!in_shape && veer__outline_boundary_distance(ds->shape, cx, cy) > h) continue; /* misses the shape */
        double dc = veer__outline_boundary_distance(ds->area, cx, cy);
        int forbidden = veer__outline_inside(ds->area, cx, cy) != ds->allowed_inside;
        if (!forbidden && dc > h) continue; /* wholly on the allowed side */
        if (forbidden && in_shape && dc > ds->best) ds->best = dc;
        if ((forbidden ? dc + h : h) <= ds->best) continue;
        int n = 0;
        for (int i = 0; i < ds->ns; i++)
            if (site_distance(&ds->sites[i], cx, cy) <= dc + 2.0 * h + 1e-12) idx[n++] = i;
        if (n <= CELL_SITES) {
            triple_ties(ds, idx, n);
            continue;
        }
        if (hs < CELL_MIN || top + 4 > CELL_STACK) continue; /* within CELL_MIN of the value at the centre */
        double q = 0.5 * hs;
        for (int c = 0; c < 4; c++) {
            st[top][0] = cx + (c & 1 ? q : -q), st[top][1] = cy + (c & 2 ? q : -q), st[top][2] = q;
            top++;
        }
    }
}

static double violation_depth(const veer_outline *shape, const veer_outline *area, int allowed_inside) {
    depth_search ds;
    ds.shape = shape, ds.area = area, ds.allowed_inside = allowed_inside;
    veer__outline_box(shape, ds.box);
    ds.best = 0.0;
    double fv[VEER_MAX_OUTLINE_VERTICES];
    for (int i = 0; i < shape->count; i++) {
        fv[i] = outside_by(area, allowed_inside, PT(shape, i)[0], PT(shape, i)[1]);
        ds.best = fmax(ds.best, fv[i]);
    }
    ds.ns = 0;
    for (int i = 0, j = area->count - 1; i < area->count; j = i++) {
        const double *a = PT(area, j), *b = PT(area, i);
        site v = {0, b[0], b[1], 0.0, {b[0], b[1]}, {b[0], b[1]}};
        ds.sites[ds.ns++] = v;
        double ex = b[0] - a[0], ey = b[1] - a[1], L = hypot(ex, ey);
        double nx = -ey / L, ny = ex / L;
        site e = {1, nx, ny, nx * a[0] + ny * a[1], {a[0], a[1]}, {b[0], b[1]}};
        ds.sites[ds.ns++] = e;
    }
    /* Ties of two sites on the shape's edges that reach the forbidden side.
     * On an edge the value is at most (f(a) + f(b) + |ab|) / 2, so only sites
     * that near the edge can be nearest on it. */
    int idx[2 * VEER_MAX_OUTLINE_VERTICES];
    for (int e = 0, f = shape->count - 1; e < shape->count; f = e++) {
        const double *a = PT(shape, f), *b = PT(shape, e);
        if (fv[f] == 0.0 && fv[e] == 0.0) {
            int crosses = 0;
            for (int i = 0, j = area->count - 1; i < area->count && !crosses; j = i++)
                crosses = segments_meet(a, b, PT(area, j), PT(area, i));
            if (!crosses) continue; /* wholly on the allowed side */
        }
        double reach = 0.5 * (fv[f] + fv[e] + hypot(b[0] - a[0], b[1] - a[1])) + 1e-12;
        int n = 0;
        for (int i = 0; i < ds.ns; i++) {
            const site *st = &ds.sites[i];
            double dist = st->line ? segment_distance(a, b, st->e0, st->e1)
                                   : point_segment_distance(st->a, st->b, a, b);
            if (dist <= reach) idx[n++] = i;
        }
        double m[2] = {a[0], a[1]}, d[2] = {b[0] - a[0], b[1] - a[1]};
        for (int i = 0; i < n; i++)
            for (int k = i + 1; k < n; k++) ties_on_line(&ds, &ds.sites[idx[i]], &ds.sites[idx[k]], m, d, 1);
    }
    interior_search(&ds);
    return ds.best;
}

double veer__outline_clearance(const veer_outline *shape, const veer_outline *area, int keep_in) {
    double gap = boundary_gap(shape, area);
    if (gap > 0.0) {
        if (keep_in) {
            if (veer__outline_inside(area, PT(shape, 0)[0], PT(shape, 0)[1])) return gap;
        } else if (!veer__outline_inside(area, PT(shape, 0)[0], PT(shape, 0)[1]) &&
                   !veer__outline_inside(shape, PT(area, 0)[0], PT(area, 0)[1])) {
            return gap;
        }
    }
    double depth = violation_depth(shape, area, keep_in ? 1 : 0);
    return depth > 0.0 ? -depth : 0.0;
}

/* ---- validation ---------------------------------------------------------- */

/* Fails with "name: message". */
static veer_status fail(veer_diag *diag, veer_status st, const char *name, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 4, 5)))
#endif
    ;
static veer_status fail(veer_diag *diag, veer_status st, const char *name, const char *fmt, ...) {
    char what[140];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(what, sizeof what, fmt, ap);
    va_end(ap);
    return veer__fail(diag, st, -1, -1, -1, -1.0, veer__limit(VEER_LIMIT_NONE, -1), "%s: %s", name, what);
}

veer_status veer__outline_validate(const veer_outline *o, const char *name, veer_diag *diag) {
    if (!o) return veer__fail(diag, VEER_ERR_NULL, -1, -1, -1, -1.0, veer__limit(VEER_LIMIT_NONE, -1), "%s is NULL", name);
    int n = o->count;
    if (n > VEER_MAX_OUTLINE_VERTICES)
        return fail(diag, VEER_ERR_CAPACITY, name, "%d vertices, at most %d", n, VEER_MAX_OUTLINE_VERTICES);
    if (n < 3) return fail(diag, VEER_ERR_VALUE, name, "%d vertices, an area needs at least 3", n);
    for (int i = 0; i < n; i++)
        for (int k = 0; k < 2; k++)
            if (!isfinite(PT(o, i)[k]) || fabs(PT(o, i)[k]) > VEER_OUTLINE_COORD_MAX)
                return fail(diag, VEER_ERR_VALUE, name, "vertex %d has a coordinate that is not finite or beyond 1e6 m", i);
    for (int i = 0; i < n; i++) {
        int j = (i + 1) % n;
        if (hypot(PT(o, j)[0] - PT(o, i)[0], PT(o, j)[1] - PT(o, i)[1]) < VEER_OUTLINE_MIN_EDGE)
            return fail(diag, VEER_ERR_GEOMETRY, name, "vertices %d and %d coincide", i, j);
    }
    for (int i = 0; i < n; i++) {
        const double *a = PT(o, i), *b = PT(o, (i + 1) % n), *c = PT(o, (i + 2) % n);
        double e1x = b[0] - a[0], e1y = b[1] - a[1], e2x = c[0] - b[0], e2y = c[1] - b[1];
        double cr = e1x * e2y - e1y * e2x, dt = e1x * e2x + e1y * e2y;
        if (fabs(cr) <= 1e-12 * hypot(e1x, e1y) * hypot(e2x, e2y) && dt < 0.0)
            return fail(diag, VEER_ERR_GEOMETRY, name, "edges %d and %d fold back on each other", i, (i + 1) % n);
    }
    for (int i = 0; i < n; i++)
        for (int k = i + 2; k < n; k++) {
            if (i == 0 && k == n - 1) continue; /* neighbours through vertex 0 */
            if (segments_meet(PT(o, i), PT(o, (i + 1) % n), PT(o, k), PT(o, (k + 1) % n)))
                return fail(diag, VEER_ERR_GEOMETRY, name, "edges %d and %d cross or touch (self-intersection)", i, k);
        }
    double area2 = 0.0, scale = 0.0;
    for (int i = 0, j = n - 1; i < n; j = i++) {
        area2 += PT(o, j)[0] * PT(o, i)[1] - PT(o, i)[0] * PT(o, j)[1];
        scale = fmax(scale, fmax(fabs(PT(o, i)[0]), fabs(PT(o, i)[1])));
    }
    if (!(fabs(area2) > 1e-15 * (1.0 + scale * scale)))
        return fail(diag, VEER_ERR_GEOMETRY, name, "zero area");
    return VEER_OK;
}

veer_status veer__footprint_validate(const veer_footprint *fp, veer_diag *diag) {
    if (!fp) return veer__fail(diag, VEER_ERR_NULL, -1, -1, -1, -1.0, veer__limit(VEER_LIMIT_NONE, -1), "footprint is NULL");
    veer_status st = veer__outline_validate(&fp->shape, "footprint", diag);
    if (st) return st;
    if (!isfinite(fp->margin) || fp->margin < 0.0 || fp->margin > 100.0)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, veer__limit(VEER_LIMIT_NONE, -1),
                          "footprint: margin must be in [0, 100] m, got %g", fp->margin);
    return VEER_OK;
}

veer_status veer__range_validate(const veer_range *r, veer_diag *diag) {
    veer_limit_id none = veer__limit(VEER_LIMIT_NONE, -1);
    if (!r) return veer__fail(diag, VEER_ERR_NULL, -1, -1, -1, -1.0, none, "range is NULL");
    veer_status st;
    if (r->keep_in.count != 0 && (st = veer__outline_validate(&r->keep_in, "keep_in", diag))) return st;
    if (r->keep_out_count < 0 || r->keep_out_count > VEER_MAX_KEEP_OUT)
        return veer__fail(diag, r->keep_out_count < 0 ? VEER_ERR_VALUE : VEER_ERR_CAPACITY, -1, -1, -1, -1.0, none,
                          "keep_out_count must be in [0, %d], got %d", VEER_MAX_KEEP_OUT, r->keep_out_count);
    if (r->zone_count < 0 || r->zone_count > VEER_MAX_SPEED_ZONES)
        return veer__fail(diag, r->zone_count < 0 ? VEER_ERR_VALUE : VEER_ERR_CAPACITY, -1, -1, -1, -1.0, none,
                          "zone_count must be in [0, %d], got %d", VEER_MAX_SPEED_ZONES, r->zone_count);
    char name[32];
    for (int i = 0; i < r->keep_out_count; i++) {
        snprintf(name, sizeof name, "keep_out[%d]", i);
        if ((st = veer__outline_validate(&r->keep_out[i], name, diag))) return st;
    }
    for (int i = 0; i < r->zone_count; i++) {
        snprintf(name, sizeof name, "speed_zone[%d]", i);
        if ((st = veer__outline_validate(&r->zones[i].area, name, diag))) return st;
        double v = r->zones[i].speed;
        if (!isfinite(v) || v <= 0.0)
            return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, veer__limit(VEER_LIMIT_SPEED_ZONE, i),
                              "%s: speed must be finite and > 0 m/s, got %g", name, v);
    }
    return VEER_OK;
}

/* ---- footprints ---------------------------------------------------------- */

void veer__footprint_world(const veer_footprint *fp, const double pose[3], veer_outline *out) {
    double c = cos(pose[2]), s = sin(pose[2]);
    out->count = fp->shape.count;
    for (int i = 0; i < fp->shape.count; i++) {
        double x = PT(&fp->shape, i)[0], y = PT(&fp->shape, i)[1];
        out->points[i][0] = pose[0] + c * x - s * y;
        out->points[i][1] = pose[1] + s * x + c * y;
    }
}

double veer__footprint_radius(const veer_footprint *fp) {
    double r = 0.0;
    for (int i = 0; i < fp->shape.count; i++) r = fmax(r, hypot(PT(&fp->shape, i)[0], PT(&fp->shape, i)[1]));
    return r;
}

/* ---- public API ---------------------------------------------------------- */

veer_outline veer_default_outline(void) {
    veer_outline o;
    memset(&o, 0, sizeof o);
    return o;
}

veer_status veer_outline_set(veer_outline *out, const double *xy, int count, veer_diag *diag) {
    veer__diag_ok(diag);
    veer_limit_id none = veer__limit(VEER_LIMIT_NONE, -1);
    if (!out || !xy) return veer__fail(diag, VEER_ERR_NULL, -1, -1, -1, -1.0, none, "%s is NULL", !out ? "out" : "xy");
    if (count > VEER_MAX_OUTLINE_VERTICES)
        return veer__fail(diag, VEER_ERR_CAPACITY, -1, -1, -1, -1.0, none, "outline: %d vertices, at most %d", count,
                          VEER_MAX_OUTLINE_VERTICES);
    if (count < 3)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, none,
                          "outline: %d vertices, an area needs at least 3", count);
    veer_outline o = veer_default_outline();
    o.count = count;
    for (int i = 0; i < count; i++) o.points[i][0] = xy[2 * i], o.points[i][1] = xy[2 * i + 1];
    veer_status st = veer__outline_validate(&o, "outline", diag);
    if (st) return st;
    *out = o;
    return VEER_OK;
}

veer_status veer_outline_check(const veer_outline *outline, veer_diag *diag) {
    veer__diag_ok(diag);
    return veer__outline_validate(outline, "outline", diag);
}

veer_status veer_outline_contains(const veer_outline *outline, double x, double y, int *inside) {
    if (!outline || !inside) return VEER_ERR_NULL;
    veer_status st = veer__outline_validate(outline, "outline", NULL);
    if (st) return st;
    if (!isfinite(x) || !isfinite(y)) return VEER_ERR_VALUE;
    *inside = veer__outline_inside(outline, x, y);
    return VEER_OK;
}

veer_status veer_outline_point_distance(const veer_outline *outline, double x, double y, double *distance) {
    if (!outline || !distance) return VEER_ERR_NULL;
    veer_status st = veer__outline_validate(outline, "outline", NULL);
    if (st) return st;
    if (!isfinite(x) || !isfinite(y)) return VEER_ERR_VALUE;
    *distance = veer__outline_boundary_distance(outline, x, y);
    return VEER_OK;
}

veer_status veer_outline_distance(const veer_outline *a, const veer_outline *b, double *distance) {
    if (!a || !b || !distance) return VEER_ERR_NULL;
    veer_status st;
    if ((st = veer__outline_validate(a, "a", NULL)) || (st = veer__outline_validate(b, "b", NULL))) return st;
    *distance = veer__outline_gap(a, b);
    return VEER_OK;
}

veer_status veer_outline_clearance(const veer_outline *shape, const veer_outline *area, int keep_in,
                                   double *clearance) {
    if (!shape || !area || !clearance) return VEER_ERR_NULL;
    veer_status st;
    if ((st = veer__outline_validate(shape, "shape", NULL)) || (st = veer__outline_validate(area, "area", NULL)))
        return st;
    if (keep_in != 0 && keep_in != 1) return VEER_ERR_VALUE;
    *clearance = veer__outline_clearance(shape, area, keep_in);
    return VEER_OK;
}

veer_footprint veer_footprint_rectangle(double front, double rear, double left, double right, double margin) {
    veer_footprint fp;
    memset(&fp, 0, sizeof fp);
    fp.shape.count = 4;
    double pts[4][2] = {{front, left}, {-rear, left}, {-rear, -right}, {front, -right}};
    memcpy(fp.shape.points, pts, sizeof pts);
    fp.margin = margin;
    return fp;
}

veer_status veer_footprint_check(const veer_footprint *footprint, veer_diag *diag) {
    veer__diag_ok(diag);
    return veer__footprint_validate(footprint, diag);
}

veer_status veer_footprint_place(const veer_footprint *footprint, const double pose[3], veer_outline *out) {
    if (!footprint || !pose || !out) return VEER_ERR_NULL;
    veer_status st = veer__footprint_validate(footprint, NULL);
    if (st) return st;
    if (!isfinite(pose[0]) || !isfinite(pose[1]) || !isfinite(pose[2]) || fabs(pose[0]) > VEER_OUTLINE_COORD_MAX ||
        fabs(pose[1]) > VEER_OUTLINE_COORD_MAX)
        return VEER_ERR_VALUE;
    veer__footprint_world(footprint, pose, out);
    return VEER_OK;
}

veer_range veer_default_range(void) {
    veer_range r;
    memset(&r, 0, sizeof r);
    return r;
}

veer_status veer_range_add_keep_out(veer_range *range, const veer_outline *area, veer_diag *diag) {
    veer__diag_ok(diag);
    veer_limit_id none = veer__limit(VEER_LIMIT_NONE, -1);
    if (!range) return veer__fail(diag, VEER_ERR_NULL, -1, -1, -1, -1.0, none, "range is NULL");
    if (range->keep_out_count < 0 || range->keep_out_count >= VEER_MAX_KEEP_OUT)
        return veer__fail(diag, VEER_ERR_CAPACITY, -1, -1, -1, -1.0, none, "the range holds at most %d keep-out areas",
                          VEER_MAX_KEEP_OUT);
    char name[32];
    snprintf(name, sizeof name, "keep_out[%d]", range->keep_out_count);
    veer_status st = veer__outline_validate(area, name, diag);
    if (st) return st;
    range->keep_out[range->keep_out_count++] = *area;
    return VEER_OK;
}

veer_status veer_range_add_speed_zone(veer_range *range, const veer_outline *area, double speed, veer_diag *diag) {
    veer__diag_ok(diag);
    veer_limit_id none = veer__limit(VEER_LIMIT_NONE, -1);
    if (!range) return veer__fail(diag, VEER_ERR_NULL, -1, -1, -1, -1.0, none, "range is NULL");
    if (range->zone_count < 0 || range->zone_count >= VEER_MAX_SPEED_ZONES)
        return veer__fail(diag, VEER_ERR_CAPACITY, -1, -1, -1, -1.0, none, "the range holds at most %d speed zones",
                          VEER_MAX_SPEED_ZONES);
    char name[32];
    snprintf(name, sizeof name, "speed_zone[%d]", range->zone_count);
    veer_status st = veer__outline_validate(area, name, diag);
    if (st) return st;
    if (!isfinite(speed) || speed <= 0.0)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, veer__limit(VEER_LIMIT_SPEED_ZONE, range->zone_count),
                          "%s: speed must be finite and > 0 m/s, got %g", name, speed);
    range->zones[range->zone_count].area = *area;
    range->zones[range->zone_count].speed = speed;
    range->zone_count++;
    return VEER_OK;
}

veer_status veer_range_check(const veer_range *range, veer_diag *diag) {
    veer__diag_ok(diag);
    return veer__range_validate(range, diag);
}

size_t veer_area_name(veer_area_id id, char *buf, size_t size) {
    char tmp[48];
    const char *base = id.kind == VEER_AREA_KEEP_IN      ? "keep_in"
                       : id.kind == VEER_AREA_KEEP_OUT   ? "keep_out"
                       : id.kind == VEER_AREA_SPEED_ZONE ? "speed_zone"
                       : id.kind == VEER_AREA_CART       ? "cart"
                                                         : "none";
    int n = (id.kind == VEER_AREA_KEEP_OUT || id.kind == VEER_AREA_SPEED_ZONE || id.kind == VEER_AREA_CART) &&
                    id.index >= 0
                ? snprintf(tmp, sizeof tmp, "%s[%d]", base, id.index)
                : snprintf(tmp, sizeof tmp, "%s", base);
    if (n < 0) n = 0;
    if (buf && size > 0) {
        size_t len = (size_t)n < size - 1 ? (size_t)n : size - 1;
        memcpy(buf, tmp, len);
        buf[len] = '\0';
    }
    return (size_t)n;
}
