/* Separation of several carts on one clock: the smallest distance between
 * their footprints over time and the first instant two come closer than a
 * required distance.
 *
 * Each pair is swept in time with a certified step: the separation changes
 * no faster than the sum of the two carts' largest footprint-point speeds,
 * bounded on each grid interval of a plan by the per-s bound of
 * range_check.c times the larger sdot at the interval's ends (sdot is
 * monotonic on an interval since sdot^2 is linear in s there), and 0 while a
 * cart stands. A step of (sep - sep_worst + tol) / V then cannot pass over a
 * separation lower than sep_worst - tol (Lipschitz bound), and steps stop at
 * every grid time of either cart so that the bounds stay valid.
 * SPDX-License-Identifier: MIT */
#include <stdio.h>
#include <string.h>
#include "range_internal.h"

#define BISECT_TIME 1e-6 /* s */

typedef struct {
    const veer_cart *c;
    double *L;
} cart_ctx;

typedef struct {
    double pose[3];
    double speed; /* bound on footprint-point speed until next */
    double next;  /* common-clock time at which the bound must be renewed */
} cart_state;

static void path_pose(const veer_plan *plan, int seg, double s, double pose[3]) {
    double dq[3], ddq[3];
    veer__path_eval(&plan->path, seg, s, pose, dq, ddq);
}

static void state_at(const cart_ctx *cc, double T, cart_state *out) {
    const veer_plan *plan = cc->c->plan;
    double t = T - cc->c->start_time;
    out->speed = 0.0;
    if (t < 0.0) {
        path_pose(plan, 0, plan->s[0], out->pose);
        out->next = cc->c->start_time;
        return;
    }
    if (t >= plan->duration) {
        int j = plan->segment_count - 1;
        path_pose(plan, j, plan->s[plan->segs[j].k1], out->pose);
        out->next = VEER_UNLIMITED;
        return;
    }
    int seg;
    double s, sdot, sddot;
    int phase = veer__plan_state(plan, t, &seg, &s, &sdot, &sddot);
    path_pose(plan, seg, s, out->pose);
    const veer_plan_segment *sg = &plan->segs[seg];
    if (phase != VEER_PHASE_MOVING) {
        double until = t < sg->t_move ? sg->t_move
                       : seg + 1 < plan->segment_count ? plan->segs[seg + 1].t_resteer
                                                       : plan->duration;
        if (!(until > t)) until = t + 1e-9; /* keep moving forward */
        out->next = cc->c->start_time + until;
        return;
    }
    int lo = sg->k0, hi = sg->k1;
    while (hi - lo > 1) {
        int mid = (lo + hi) / 2;
        if (plan->t[mid] <= t) lo = mid;
        else hi = mid;
    }
    out->speed = cc->L[lo] * fmax(sqrt(plan->x[lo]), sqrt(plan->x[lo + 1]));
    double until = plan->t[lo + 1] > t ? plan->t[lo + 1] : t + 1e-9;
    out->next = cc->c->start_time + until;
}

static double separation(const cart_ctx *a, const cart_ctx *b, double T, cart_state *sa, cart_state *sb) {
    veer_outline Fa, Fb;
    state_at(a, T, sa);
    state_at(b, T, sb);
    veer__footprint_world(&a->c->footprint, sa->pose, &Fa);
    veer__footprint_world(&b->c->footprint, sb->pose, &Fb);
    return veer__outline_gap(&Fa, &Fb) - a->c->footprint.margin - b->c->footprint.margin;
}

veer_status veer_carts_check_separation(const veer_cart *carts, int count, double required,
                                        veer_separation_report *report, veer_diag *diag) {
    veer__diag_ok(diag);
    veer_limit_id none = veer__limit(VEER_LIMIT_NONE, -1);
    if (!carts || !report)
        return veer__fail(diag, VEER_ERR_NULL, -1, -1, -1, -1.0, none, "%s is NULL", !carts ? "carts" : "report");
    if (count < 2 || count > VEER_MAX_CARTS)
        return veer__fail(diag, count < 2 ? VEER_ERR_VALUE : VEER_ERR_CAPACITY, -1, -1, -1, -1.0, none,
                          "count must be in [2, %d] carts, got %d", VEER_MAX_CARTS, count);
    if (!isfinite(required) || required < 0.0 || required > 1e6)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, none,
                          "required separation must be in [0, 1e6] m, got %g", required);
    double t_begin = VEER_UNLIMITED, t_end = -VEER_UNLIMITED;
    for (int i = 0; i < count; i++) {
        if (!carts[i].plan)
            return veer__fail(diag, VEER_ERR_NULL, -1, -1, -1, -1.0, none, "cart %d has no plan", i);
        if (!isfinite(carts[i].start_time) || fabs(carts[i].start_time) > 1e9)
            return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, none,
                              "cart %d: start_time must be finite (|t| <= 1e9 s), got %g", i, carts[i].start_time);
        veer_status st = veer__footprint_validate(&carts[i].footprint, diag);
        if (st) {
            char msg[VEER_DIAG_MESSAGE_SIZE];
            snprintf(msg, sizeof msg, "%s", diag ? diag->message : "");
            return veer__fail(diag, st, -1, -1, -1, -1.0, none, "cart %d: %s", i, msg);
        }
        t_begin = fmin(t_begin, carts[i].start_time);
        t_end = fmax(t_end, carts[i].start_time + carts[i].plan->duration);
    }
    cart_ctx cc[VEER_MAX_CARTS];
    for (int i = 0; i < count; i++) {
        cc[i].c = &carts[i];
        cc[i].L = veer__range_speed_bounds(carts[i].plan, veer__footprint_radius(&carts[i].footprint));
        if (!cc[i].L) {
            for (int k = 0; k < i; k++) veer__free(cc[k].L, (size_t)carts[k].plan->n * sizeof(double));
            return veer__fail(diag, VEER_ERR_NO_MEMORY, -1, -1, -1, -1.0, none, "out of memory");
        }
    }

    veer_separation_report r;
    memset(&r, 0, sizeof r);
    r.min_separation = VEER_UNLIMITED;
    r.min_a = r.min_b = r.conflict_a = r.conflict_b = -1;
    r.conflict_t = -1.0;
    r.t_begin = t_begin;
    r.t_end = t_end;
    /* An incumbent first: every pair at every grid time of either cart.
     * Steps are then fine only where a pair comes near the lowest value. */
    for (int a = 0; a < count; a++)
        for (int b = a + 1; b < count; b++)
            for (int side = 0; side < 2; side++) {
                const veer_cart *c = &carts[side ? b : a];
                for (int k = 0; k < c->plan->n; k++) {
                    cart_state sa, sb;
                    double T = c->start_time + c->plan->t[k];
                    double sep = separation(&cc[a], &cc[b], T, &sa, &sb);
                    r.poses++;
                    if (sep < r.min_separation) r.min_separation = sep, r.min_t = T, r.min_a = a, r.min_b = b;
                }
            }
    for (int a = 0; a < count; a++)
        for (int b = a + 1; b < count; b++) {
            cart_state sa, sb;
            double T = t_begin, prev_T = t_begin;
            int have_prev = 0, conflict = 0;
            for (;;) {
                double sep = separation(&cc[a], &cc[b], T, &sa, &sb);
                r.poses++;
                if (sep < r.min_separation) r.min_separation = sep, r.min_t = T, r.min_a = a, r.min_b = b;
                if (!conflict && sep < required) {
                    conflict = 1;
                    double lo = prev_T, hi = T;
                    if (have_prev)
                        while (hi - lo > BISECT_TIME) {
                            cart_state ma, mb;
                            double mid = 0.5 * (lo + hi);
                            r.poses++;
                            if (separation(&cc[a], &cc[b], mid, &ma, &mb) < required) hi = mid;
                            else lo = mid;
                        }
                    if (!r.conflict || hi < r.conflict_t) {
                        r.conflict = 1;
                        r.conflict_t = hi;
                        r.conflict_a = a;
                        r.conflict_b = b;
                    }
                }
                if (T >= t_end) break;
                double V = sa.speed + sb.speed;
                double next = fmin(fmin(sa.next, sb.next), t_end);
                if (V > 0.0) {
                    /* until this pair's conflict is found the floor stays
                     * >= required, so none deeper than the tolerance is missed */
                    double floor = conflict ? r.min_separation : fmax(r.min_separation, required);
                    double step = (sep - floor + VEER_RANGE_TOL) / V;
                    next = fmin(next, T + step);
                }
                if (!(next > T)) next = fmin(t_end, T + 1e-9);
                prev_T = T;
                have_prev = 1;
                T = next;
            }
        }
    for (int i = 0; i < count; i++) veer__free(cc[i].L, (size_t)carts[i].plan->n * sizeof(double));
    *report = r;
    return VEER_OK;
}
