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
#include "plan_internal.h"

#define VEER_X_BIG 1e20 /* stands for an unbounded x */

typedef struct {
    const veer_row *r0, *r1; /* rows of point k and k+1 */
    int m0, m1;
    double d2;               /* 2 ds */
    double hi;               /* K_{k+1} upper end */
} stage;

static void stage_at(const veer_topp_problem *p, int k, double hi_next, stage *st) {
    st->r0 = p->rows + (size_t)k * (size_t)p->m;
    st->r1 = p->rows + (size_t)(k + 1) * (size_t)p->m;
    st->m0 = p->row_count[k];
    st->m1 = p->row_count[k + 1];
    st->d2 = 2.0 * (p->s[k + 1] - p->s[k]);
    st->hi = hi_next;
}

/* A row is treated as x-only when its u coefficient is negligible. */
static int x_only(double a, double b, double c) { return fabs(a) <= 1e-12 * (fabs(b) + fabs(c)); }

/* Largest x that the x-only rows of the stage allow. */
static double stage_cap(const stage *st, double xmax) {
    double cap = xmax;
    for (int j = 0; j < st->m0 + st->m1; j++) {
        const veer_row *r = j < st->m0 ? &st->r0[j] : &st->r1[j - st->m0];
        double a = j < st->m0 ? r->a : r->a + st->d2 * r->b;
        if (x_only(a, r->b, r->c) && r->b > 0.0 && r->c / r->b < cap) cap = r->c / r->b;
    }
    return cap;
}

/* U(x), L(x) and the slopes of the rows that define them (ties go to the
 * steeper piece to the right, the right derivative of F). */
static void stage_eval(const stage *st, double x, double *U, double *dU, double *L, double *dL) {
    double u_hi = (st->hi - x) / st->d2, s_hi = -1.0 / st->d2;
    double u_lo = -x / st->d2, s_lo = -1.0 / st->d2;
    for (int j = 0; j < st->m0 + st->m1; j++) {
        const veer_row *r = j < st->m0 ? &st->r0[j] : &st->r1[j - st->m0];
        double a = j < st->m0 ? r->a : r->a + st->d2 * r->b;
        if (x_only(a, r->b, r->c)) continue;
        double v = (r->c - r->b * x) / a, sl = -r->b / a;
        if (a > 0.0) {
            if (v < u_hi || (v == u_hi && sl < s_hi)) {
                u_hi = v;
                s_hi = sl;
            }
        } else if (v > u_lo || (v == u_lo && sl > s_lo)) {
            u_lo = v;
            s_lo = sl;
        }
    }
    *U = u_hi;
    *dU = s_hi;
    *L = u_lo;
    *dL = s_lo;
}

/* Largest x in [0, cap] with L(x) <= U(x). */
static double stage_max_x(const stage *st, double cap) {
    double x = cap < VEER_X_BIG ? cap : VEER_X_BIG;
    double lo = 0.0, hi = x;
    for (int it = 0; it < 100; it++) {
        double U, dU, L, dL;
        stage_eval(st, x, &U, &dU, &L, &dL);
        double F = U - L, dF = dU - dL;
        if (F >= -1e-13 * (1.0 + fabs(U) + fabs(L))) return x;
        hi = x;
        double next = dF < 0.0 ? x - F / dF : 0.5 * (lo + hi);
        if (!(next < hi) || next < lo) next = 0.5 * (lo + hi); /* guard against rounding */
        if (hi - next <= 1e-15 * hi) return next;
        x = next;
    }
    return lo;
}

veer_status veer__topp_solve(const veer_topp_problem *p, double *x, double *K, int *bad_index) {
    int n = p->n;
    stage st;
    /* Backward pass: controllable sets K_k = [0, K[k]], rest at the end. */
    K[n - 1] = 0.0;
    for (int k = n - 2; k >= 0; k--) {
        stage_at(p, k, K[k + 1], &st);
        double cap = stage_cap(&st, p->xmax[k]);
        K[k] = k == 0 ? 0.0 : stage_max_x(&st, cap);
    }
    /* Forward pass: from rest, the greatest acceleration that stays controllable. */
    x[0] = 0.0;
    for (int k = 0; k < n - 1; k++) {
        stage_at(p, k, K[k + 1], &st);
        double U, dU, L, dL;
        stage_eval(&st, x[k], &U, &dU, &L, &dL);
        double next = x[k] + st.d2 * U;
        if (next > K[k + 1]) next = K[k + 1];
        x[k + 1] = next > 0.0 ? next : 0.0;
    }
    x[n - 1] = 0.0;
    /* Interior points where nothing can move make the duration infinite. */
    for (int k = 1; k < n - 1; k++) {
        if (!(x[k] > 1e-14) && !(x[k - 1] > 1e-14)) {
            if (bad_index) *bad_index = k;
            return VEER_ERR_INFEASIBLE;
        }
    }
    if (n == 2) { /* a single interval cannot move from rest to rest */
        if (bad_index) *bad_index = 0;
        return VEER_ERR_INFEASIBLE;
    }
    return VEER_OK;
}

veer_limit_id veer__topp_binding(const veer_topp_problem *p, const double *x, int k) {
    veer_limit_id best = veer__limit(VEER_LIMIT_NONE, -1);
    if (k >= p->n - 1) return best;
    if (x[k] >= p->xmax[k] * (1.0 - 2e-3) && p->xmax_id) return p->xmax_id[k];
    stage st;
    stage_at(p, k, 0.0, &st);
    double u = (x[k + 1] - x[k]) / st.d2;
    double tight = 2e-3;
    for (int j = 0; j < st.m0 + st.m1; j++) {
        const veer_row *r = j < st.m0 ? &st.r0[j] : &st.r1[j - st.m0];
        double a = j < st.m0 ? r->a : r->a + st.d2 * r->b;
        if (!(r->c > 0.0)) continue;
        double slack = (r->c - a * u - r->b * x[k]) / r->c;
        if (slack < tight) {
            tight = slack;
            best = r->id;
        }
    }
    return best;
}
