/* Timing: timed stops and a whole-plan duration target. Each stretch of
 * rest-to-rest segments that ends at a timed stop is slowed, when the
 * fastest plan would arrive early, by one cap on body speed and yaw rate
 * (lambda times the stretch's peaks, lambda found by bisection), so the cart
 * still accelerates and brakes at its limits rather than stretching time
 * uniformly; arriving late is refused with the lateness and the limit that
 * binds over most of the stretch.
 * SPDX-License-Identifier: MIT */
#include "plan_internal.h"

/* When the motion of segment j ends (the cart comes to rest at its end). */
static double arrival_of(const veer_plan *plan, int j) {
    double t = 0.0;
    for (int i = 0; i <= j; i++) {
        t += plan->segs[i].resteer_time + plan->segs[i].move_time;
        if (i < j) t += plan->segs[i].dwell;
    }
    return t;
}

/* The limit that binds over most of segments a..b (kind NONE if none does). */
static veer_limit_id main_binding(const veer_plan *plan, int a, int b) {
    veer_limit_id ids[64];
    double share[64];
    int n = 0;
    veer_limit_id best = veer__limit(VEER_LIMIT_NONE, -1);
    double top = 0.0;
    for (int j = a; j <= b; j++)
        for (int k = plan->segs[j].k0; k < plan->segs[j].k1; k++) {
            veer_limit_id id = plan->binding[k];
            if (id.kind == VEER_LIMIT_NONE) continue;
            int f = 0;
            while (f < n && (ids[f].kind != id.kind || ids[f].module != id.module)) f++;
            if (f == n) {
                if (n == 64) continue;
                ids[n] = id;
                share[n++] = 0.0;
            }
            share[f] += plan->s[k + 1] - plan->s[k];
            if (share[f] > top) {
                top = share[f];
                best = id;
            }
        }
    return best;
}

/* Re-solves segments a..b with body speed and yaw rate capped at lambda
 * times their peaks v0, w0 on the fastest plan (a cap of 0 peak is left
 * off); returns the arrival at the end of b. */
static veer_status paced(veer_plan *plan, int a, int b, double lambda, double v0, double w0, veer_workspace *ws,
                         double *arrival, veer_diag *diag) {
    veer_limits lim = plan->limits;
    if (v0 > 0.0 && lambda * v0 < lim.body_speed) lim.body_speed = lambda * v0;
    if (w0 > 0.0 && lambda * w0 < lim.yaw_rate) lim.yaw_rate = lambda * w0;
    veer_row_ctx ctx;
    veer__row_ctx_init(&ctx, &plan->drive, &lim, &plan->options);
    for (int j = a; j <= b; j++) {
        plan->segs[j].tau = 0.0;
        veer_status st = veer__solve_segment(plan, j, &ctx, j == 0 ? plan->x_start : 0.0, ws, diag);
        if (st == VEER_OK) st = veer__shape_segment(plan, j, &lim, j == 0 ? plan->x_start : 0.0, ws, diag);
        if (st != VEER_OK) return st;
    }
    *arrival = arrival_of(plan, b);
    return VEER_OK;
}

/* Timed stops and a duration target: each stretch of segments that ends at
 * a timed stop is slowed, when the fastest plan would arrive early, by a
 * common cap on body speed and yaw rate (lambda times the stretch's peaks,
 * lambda found by bisection) so the cart still accelerates and brakes at
 * its limits; arriving late is refused with the lateness and the limit that
 * binds over most of the stretch. */
veer_status veer__meet_arrivals(veer_plan *plan, veer_workspace *ws, veer_diag *diag) {
    const veer_path *path = &plan->path;
    for (int w = 0; w < plan->route.waypoint_count; w++) {
        if (!plan->route.waypoints[w].timed) continue;
        int found = 0;
        for (int j = 0; j < path->segment_count && !found; j++) found = path->segments[j].waypoint == w;
        if (!found)
            return veer__fail(diag, VEER_ERR_VALUE, -1, w, -1, -1.0, veer__limit(VEER_LIMIT_NONE, -1),
                              "waypoint %d is timed but the cart passes through it: make it a stop", w);
    }
    int first = 0;
    double last_target = -1.0;
    for (int j = 0; j < path->segment_count; j++) {
        const veer_path_segment *ps = &path->segments[j];
        double T;
        int wpi = ps->waypoint;
        if (wpi >= 0 && plan->route.waypoints[wpi].timed && (j + 1 == path->segment_count ||
                                                          path->segments[j + 1].waypoint != wpi)) {
            T = plan->route.waypoints[wpi].arrival;
        } else if (j + 1 == path->segment_count && plan->options.duration_target > 0.0) {
            T = plan->options.duration_target - plan->segs[j].dwell;
            wpi = -1;
        } else {
            continue;
        }
        if (!(T > last_target))
            return veer__fail(diag, VEER_ERR_VALUE, ps->leg, wpi, -1, -1.0, veer__limit(VEER_LIMIT_NONE, -1),
                              "leg %d: arrival %.3f s is not after the previous timed arrival %.3f s", ps->leg, T,
                              last_target);
        double fast = arrival_of(plan, j);
        if (fast > T + 1e-6) {
            veer_limit_id id = main_binding(plan, first, j);
            char name[48];
            veer_limit_name(id, name, sizeof name);
            veer_status st = veer__fail(diag, VEER_ERR_LATE, ps->leg, wpi, -1, ps->s_end, id,
                                        "leg %d: %s at %.3f s is %.3f s too early for the fastest plan (%.3f s); "
                                        "%s binds most of the way",
                                        ps->leg, wpi >= 0 ? "the timed stop" : "the duration target", T, fast - T,
                                        fast, name);
            if (diag) diag->value = fast - T;
            return st;
        }
        if (fast < T - 1e-5) {
            double v0 = 0.0, w0 = 0.0;
            for (int q = first; q <= j; q++)
                for (int k = plan->segs[q].k0; k <= plan->segs[q].k1; k++) {
                    double qq[3], dq[3], ddq[3];
                    veer__path_eval(path, q, plan->s[k], qq, dq, ddq);
                    double v = sqrt(plan->x[k]);
                    v0 = fmax(v0, v * hypot(dq[0], dq[1]));
                    w0 = fmax(w0, v * fabs(dq[2]));
                }
            double lo = 1.0, hi = 1.0, arr = fast;
            veer_status st = VEER_OK;
            for (int it = 0; it < 60 && arr < T; it++) { /* bracket: slow enough */
                hi = lo;
                lo *= 0.5;
                if ((st = paced(plan, first, j, lo, v0, w0, ws, &arr, diag))) return st;
            }
            for (int it = 0; it < 60 && fabs(arr - T) > 1e-5; it++) {
                double mid = 0.5 * (lo + hi);
                if ((st = paced(plan, first, j, mid, v0, w0, ws, &arr, diag))) return st;
                if (arr > T)
                    lo = mid;
                else
                    hi = mid;
            }
        }
        last_target = T;
        first = j + 1;
    }
    return VEER_OK;
}

