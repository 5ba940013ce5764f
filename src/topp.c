/* Solver: TOPP by reachability analysis (Pham & Pham, "A New Approach to
 * Time-Optimal Path Parameterization Based on Reachability Analysis",
 * IEEE T-RO 2018) on one rest-to-rest segment.
 *
 * Stage k has variables (u, x) = (sddot on [s_k, s_k+1], sdot^2 at s_k) and
 * x_{k+1} = x + 2 ds u. Its rows are the u-rows of point k, the u-rows of
 * point k+1 evaluated at (u, x_{k+1}) (the paper's first-order interpolation
 * scheme), the x-only bound of point k, and x_{k+1} in [0, K_{k+1}].
 *
 * Because every row has c >= 0, (u, x) = (0, 0) is always feasible: each
 * controllable set is [0, K_k], and K_k is the largest root of the concave
 * piecewise-linear F(x) = U(x) - L(x) (upper minus lower bound on u).
 * Newton's method from the right on a concave function lands on a new linear
 * piece each step and never overshoots the root, so a stage costs
 * O(m * steps) with steps typically 1 to 3: the solve is O(N m).
 * SPDX-License-Identifier: MIT */
#include <limits.h>
#include <string.h>
#include "plan_internal.h"

#define VEER_X_BIG 1e20 /* stands for an unbounded x */

/* A bound on u at stage k as a function of x: u <= p + q x (upper) or
 * u >= p + q x (lower). */
typedef struct {
    double p, q;
} bound;

#define VEER_STAGE_ROWS (5 * VEER_MAX_POINT_ROWS + 8) /* two points, up to three extra points */

typedef struct {
    bound up[VEER_STAGE_ROWS], lo[VEER_STAGE_ROWS];
    int nup, nlo;
    double cap; /* largest x the x-only rows allow */
} stage;


static inline void stage_add(stage *st, double a, double b, double c) {
    if (veer__row_x_only(a, b, c)) {
        if (b > 0.0 && c / b < st->cap) st->cap = c / b;
        return;
    }
    bound *d = a > 0.0 ? &st->up[st->nup++] : &st->lo[st->nlo++];
    d->p = c / a;
    d->q = -b / a;
}

/* Stage k's bounds on u: rows of point k at (u, x), rows of point k+1 at
 * (u, x + 2 ds u), and x + 2 ds u in [0, hi_next]. */
static void stage_build(const veer_topp_problem *pr, int k, double hi_next, stage *st) {
    const veer_row *r0 = pr->rows + pr->row_at[k], *r1 = pr->rows + pr->row_at[k + 1];
    int n0 = pr->row_at[k + 1] - pr->row_at[k], n1 = pr->row_at[k + 2] - pr->row_at[k + 1];
    double d2 = 2.0 * (pr->s[k + 1] - pr->s[k]);
    st->nup = st->nlo = 0;
    st->cap = pr->xmax[k];
    st->up[st->nup++] = (bound){hi_next / d2, -1.0 / d2};
    st->lo[st->nlo++] = (bound){0.0, -1.0 / d2};
    for (int j = 0; j < n0; j++) stage_add(st, r0[j].a, r0[j].b, r0[j].c);
    for (int j = 0; j < n1; j++) stage_add(st, r1[j].a + d2 * r1[j].b, r1[j].b, r1[j].c);
    if (pr->extra)
        for (int j = 0; j < pr->extra_n[k]; j++) {
            const veer_row *e = &pr->extra[pr->extra_at[k] + j];
            stage_add(st, e->a, e->b, e->c);
        }
}

/* The upper bound U(x) of stage k alone, straight from its rows: all the
 * forward pass needs (x lies in the stage's controllable set already, so
 * neither the lower bounds nor the x-only rows can cut it). The same
 * arithmetic as stage_add and stage_eval, without building the stage. */
static inline void upper_row(double a, double b, double c, double x, double *U) {
    if (!(a > 0.0) || veer__row_x_only(a, b, c)) return;
    double v = c / a + (-b / a) * x;
    if (v < *U) *U = v;
}

static double stage_upper(const veer_topp_problem *pr, int k, double hi_next, double x) {
    const veer_row *r0 = pr->rows + pr->row_at[k], *r1 = pr->rows + pr->row_at[k + 1];
    int n0 = pr->row_at[k + 1] - pr->row_at[k], n1 = pr->row_at[k + 2] - pr->row_at[k + 1];
    double d2 = 2.0 * (pr->s[k + 1] - pr->s[k]);
    double U = hi_next / d2 + (-1.0 / d2) * x;
    for (int j = 0; j < n0; j++) upper_row(r0[j].a, r0[j].b, r0[j].c, x, &U);
    for (int j = 0; j < n1; j++) upper_row(r1[j].a + d2 * r1[j].b, r1[j].b, r1[j].c, x, &U);
    if (pr->extra)
        for (int j = 0; j < pr->extra_n[k]; j++) {
            const veer_row *e = &pr->extra[pr->extra_at[k] + j];
            upper_row(e->a, e->b, e->c, x, &U);
        }
    return U;
}

/* The lower bound L(x) of stage k from its rows, as upper_row does for U
 * (a row a u + b x <= c with a < 0 is u >= c / a - (b / a) x). */
static inline void lower_row(double a, double b, double c, double x, double *L) {
    if (!(a < 0.0) || veer__row_x_only(a, b, c)) return;
    double v = c / a + (-b / a) * x;
    if (v > *L) *L = v;
}

void veer__topp_brake(const veer_topp_problem *pr, double x_start, int hold, double *xb) {
    int n = pr->n;
    for (int k = 0; k < n; k++) {
        if (k == 0 || k <= hold) {
            xb[k] = x_start;
            continue;
        }
        int i = k - 1;
        const veer_row *r0 = pr->rows + pr->row_at[i], *r1 = pr->rows + pr->row_at[i + 1];
        int n0 = pr->row_at[i + 1] - pr->row_at[i], n1 = pr->row_at[i + 2] - pr->row_at[i + 1];
        double d2 = 2.0 * (pr->s[i + 1] - pr->s[i]), x = xb[i];
        double L = -x / d2; /* x_{k+1} >= 0 */
        for (int j = 0; j < n0; j++) lower_row(r0[j].a, r0[j].b, r0[j].c, x, &L);
        for (int j = 0; j < n1; j++) lower_row(r1[j].a + d2 * r1[j].b, r1[j].b, r1[j].c, x, &L);
        double next = x + d2 * L;
        xb[k] = next > 0.0 ? next : 0.0;
    }
}

/* U(x) and L(x), and the bounds that define them (ties go to the steeper
 * piece to the right: the right derivative of F). */
static void stage_eval(const stage *st, double x, double *U, const bound **bu, double *L, const bound **bl) {
    const bound *hi = &st->up[0], *lo = &st->lo[0];
    double u_hi = hi->p + hi->q * x;
    for (int j = 1; j < st->nup; j++) {
        double v = st->up[j].p + st->up[j].q * x;
        if (v < u_hi || (v == u_hi && st->up[j].q < hi->q)) {
            u_hi = v;
            hi = &st->up[j];
        }
    }
    double u_lo = lo->p + lo->q * x;
    for (int j = 1; j < st->nlo; j++) {
        double v = st->lo[j].p + st->lo[j].q * x;
        if (v > u_lo || (v == u_lo && st->lo[j].q > lo->q)) {
            u_lo = v;
            lo = &st->lo[j];
        }
    }
    *U = u_hi;
    *L = u_lo;
    if (bu) *bu = hi;
    if (bl) *bl = lo;
}

/* Largest x in [0, cap] with L(x) <= U(x). Each Newton step goes to where
 * the active upper and lower bounds cross, computed from their own
 * coefficients (exact even when x is huge). */
static double stage_max_x(const stage *st) {
    double x = st->cap < VEER_X_BIG ? st->cap : VEER_X_BIG;
    double lo = 0.0;
    for (int it = 0; it < 100; it++) {
        double U, L;
        const bound *bu, *bl;
        stage_eval(st, x, &U, &bu, &L, &bl);
        double F = U - L;
        if (F >= -1e-13 * (1.0 + fabs(U) + fabs(L))) return x;
        double dF = bu->q - bl->q, next;
        if (dF < 0.0) {
            next = (bl->p - bu->p) / dF; /* p_u + q_u x = p_l + q_l x */
            if (!(next < x)) next = x * (1.0 - 1e-15);
        } else {
            next = 0.5 * (lo + x); /* cannot happen for a concave F with F(0) >= 0; guard */
        }
        if (next < lo) next = lo;
        if (x - next <= 1e-15 * x) return next;
        x = next;
    }
    return lo;
}

/* The solve. With marks (a re-solve): x and K hold the solution of the
 * same problem before rows were added to the stages k with
 * marks[k] & VEER_TOPP_CHANGED, and only what those stages can change is
 * worked out again: K[k] depends on stage k and K[k + 1] alone, x[k + 1] on
 * x[k], stage k and K[k + 1], so a value is recomputed only where one of
 * these changed (VEER_TOPP_K_CHANGED marks the K that did). The result is
 * the full solve's, bit for bit. */
/* U(x) from a stage's upper bounds as stage_build wrote them: the value
 * stage_upper computes from the rows, bit for bit (same bounds, same order,
 * p + q x with p = c / a, q = -b / a). */
static double kept_upper(const bound *b, int nb, double x) {
    double U = b[0].p + b[0].q * x;
    for (int j = 1; j < nb; j++) {
        double v = b[j].p + b[j].q * x;
        if (v < U) U = v;
    }
    return U;
}

static veer_status solve(const veer_topp_problem *p, double x_start, double *x, double *K, unsigned char *marks,
                         int *bad_index) {
    int n = p->n;
    stage st;
    /* A full solve without extra rows keeps each stage's upper bounds from
     * the backward pass for the forward pass (which would otherwise divide
     * them out of the rows again), packed down from the end of p->keep:
     * stage k's at keep_at[k] .. keep_at[k + 1]. Without room for the most
     * the stages can have, the forward pass works from the rows. */
    bound *keep = NULL;
    int top = 0; /* where the stage kept last starts (backward pass), stage k starts (forward) */
    if (!marks && !p->extra && p->keep && n >= 2 &&
        veer__topp_keep_room(n, p->row_at[n] - p->row_at[0]) <= p->keep_cap && p->keep_cap / 2 <= INT_MAX) {
        keep = (bound *)p->keep;
        top = p->keep_at[n - 1] = (int)(p->keep_cap / 2);
    }
    /* Backward pass: controllable sets K_k = [0, K[k]], rest at the end. */
    K[n - 1] = 0.0;
    if (marks) marks[n - 1] &= (unsigned char)~VEER_TOPP_K_CHANGED;
    int dirty = 1; /* K[k + 1] changed */
    if (marks) dirty = 0;
    for (int k = n - 2; k >= 0; k--) {
        if (marks) {
            marks[k] &= (unsigned char)~VEER_TOPP_K_CHANGED;
            if (!dirty && !(marks[k] & VEER_TOPP_CHANGED)) continue;
        }
        stage_build(p, k, K[k + 1], &st);
        double v = stage_max_x(&st);
        if (keep) {
            top -= st.nup;
            memcpy(keep + top, st.up, (size_t)st.nup * sizeof *keep);
            p->keep_at[k] = top;
        }
        if (marks) {
            dirty = !(v == K[k]);
            if (dirty) marks[k] |= VEER_TOPP_K_CHANGED;
        }
        K[k] = v;
    }
    /* A moving start must lie in the first controllable set: room to stop. */
    if (x_start > K[0] * (1.0 + 1e-9) + 1e-12) {
        if (bad_index) *bad_index = 0;
        return VEER_ERR_INFEASIBLE;
    }
    /* Forward pass: the greatest acceleration that stays controllable. */
    dirty = !marks || !(x[0] == x_start); /* x[k] changed */
    x[0] = x_start;
    for (int k = 0; k < n - 1; k++) {
        if (!dirty && !(marks[k] & VEER_TOPP_CHANGED) && !(marks[k + 1] & VEER_TOPP_K_CHANGED)) continue;
        double U;
        if (keep) {
            int end = p->keep_at[k + 1];
            U = kept_upper(keep + top, end - top, x[k]);
            top = end;
        } else {
            U = stage_upper(p, k, K[k + 1], x[k]);
        }
        double next = x[k] + 2.0 * (p->s[k + 1] - p->s[k]) * U;
        if (next > K[k + 1]) next = K[k + 1];
        if (!(next > 0.0)) next = 0.0;
        dirty = !marks || !(next == x[k + 1]);
        x[k + 1] = next;
    }
    x[n - 1] = 0.0;
    /* Interior points where nothing can move make the duration infinite. */
    for (int k = 1; k < n - 1; k++) {
        if (!(x[k] > 1e-14) && !(x[k - 1] > 1e-14)) {
            if (bad_index) *bad_index = k;
            return VEER_ERR_INFEASIBLE;
        }
    }
    if (n == 2 && !(x_start > 0.0)) { /* a single interval cannot move from rest to rest */
        if (bad_index) *bad_index = 0;
        return VEER_ERR_INFEASIBLE;
    }
    return VEER_OK;
}

veer_status veer__topp_solve(const veer_topp_problem *p, double x_start, double *x, double *K, int *bad_index) {
    return solve(p, x_start, x, K, NULL, bad_index);
}

veer_status veer__topp_resolve(const veer_topp_problem *p, double x_start, double *x, double *K, unsigned char *marks,
                               int *bad_index) {
    return solve(p, x_start, x, K, marks, bad_index);
}

/* One row's relative slack at (u, x), kept in *tight / *best when it is the
 * smallest so far (the first of equals). */
static inline void binding_row(const veer_row *r, double a, double u, double x, double *tight, veer_limit_id *best) {
    if (!(r->c > 0.0)) return;
    double slack = (r->c - a * u - r->b * x) / r->c;
    if (slack < *tight) {
        *tight = slack;
        *best = r->id;
    }
}

veer_limit_id veer__topp_binding(const veer_topp_problem *p, const double *x, int k) {
    veer_limit_id best = veer__limit(VEER_LIMIT_NONE, -1);
    if (k >= p->n - 1) return best;
    if (x[k] >= p->xmax[k] * (1.0 - 2e-3) && p->xmax_id) return p->xmax_id[k];
    const veer_row *r0 = p->rows + p->row_at[k], *r1 = p->rows + p->row_at[k + 1];
    int n0 = p->row_at[k + 1] - p->row_at[k], n1 = p->row_at[k + 2] - p->row_at[k + 1];
    double d2 = 2.0 * (p->s[k + 1] - p->s[k]);
    double u = (x[k + 1] - x[k]) / d2;
    double tight = 2e-3;
    /* rows of point k, of point k + 1 in the stage's variables, then the extra rows */
    for (int j = 0; j < n0; j++) binding_row(&r0[j], r0[j].a, u, x[k], &tight, &best);
    for (int j = 0; j < n1; j++) binding_row(&r1[j], r1[j].a + d2 * r1[j].b, u, x[k], &tight, &best);
    if (p->extra)
        for (int j = 0; j < p->extra_n[k]; j++) {
            const veer_row *e = &p->extra[p->extra_at[k] + j];
            binding_row(e, e->a, u, x[k], &tight, &best);
        }
    return best;
}
