/* Timing: timed stops and a whole-plan duration target. Each stretch of
 * rest-to-rest segments that ends at a timed stop is slowed, when the
 * fastest plan would arrive early, by one cap on body speed and yaw rate
 * (lambda times the stretch's peaks, lambda found by bisection), so the cart
 * still accelerates and brakes at its limits rather than stretching time
 * uniformly; arriving late is refused with the lateness and the limit that
 * binds over most of the stretch.
 * SPDX-License-Identifier: MIT */
#include <string.h>
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
 * off; the caps are the segments' pace_speed and pace_yaw, which a moving
 * start brakes down to: plan.c, pace_caps); returns the arrival at the end
 * of b. */
static veer_status paced(veer_plan *plan, int a, int b, double lambda, double v0, double w0, veer_workspace *ws,
                         double *arrival, veer_diag *diag) {
    for (int j = a; j <= b; j++) {
        veer_plan_segment *sg = &plan->segs[j];
        sg->pace_speed = v0 > 0.0 && lambda * v0 < plan->limits.body_speed ? lambda * v0 : VEER_UNLIMITED;
        sg->pace_yaw = w0 > 0.0 && lambda * w0 < plan->limits.yaw_rate ? lambda * w0 : VEER_UNLIMITED;
        sg->tau = 0.0;
        veer_status st = veer__solve_segment(plan, j, &plan->rows, j == 0 ? plan->x_start : 0.0, ws, diag);
        if (st == VEER_OK) st = veer__shape_segment(plan, j, &plan->limits, j == 0 ? plan->x_start : 0.0, ws, diag);
        if (st != VEER_OK) return st;
    }
    *arrival = arrival_of(plan, b);
    return VEER_OK;
}

/* With jerk limits the arrival can jump across T as lambda moves (the
 * averaging window is fitted in steps, and a fit that fails re-solves 3 %
 * lower), so the bisection may close on a jump instead of on T. Then the
 * stretch is paced at lambda_hi, whose arrival is early, and the last
 * window of the stretch that can grow (not a moving start's first, whose
 * window sets its hold of the start speed) is lengthened by what is
 * missing: the motion time grows by exactly that, and the longer average
 * is kept only if the segment still holds every limit, jerk included, at
 * 1 ms samples. Otherwise the timed stop cannot be met and is refused. */
static veer_status settle(veer_plan *plan, int first, int j, int wpi, double lambda_hi, double v0, double w0,
                          double T, veer_workspace *ws, double *arrival, veer_diag *diag) {
    veer_status st = paced(plan, first, j, lambda_hi, v0, w0, ws, arrival, diag);
    if (st != VEER_OK) return st;
    double missing = T - *arrival;
    const veer_path_segment *ps = &plan->path.segments[j];
    for (int q = j; q >= first && missing > 0.0; q--) {
        veer_plan_segment *sg = &plan->segs[q];
        if (!(sg->tau > 0.0) || (q == 0 && plan->x_start > 0.0)) continue;
        double tau = sg->tau, move = sg->move_time;
        sg->tau = tau + missing;
        sg->move_time = move + missing;
        veer_check_report r;
        memset(&r, 0, sizeof r);
        veer__check_segment(plan, q, 1e-3, VEER__CHECK_LIMITS | VEER__CHECK_JERK, &r);
        if (r.worst <= VEER__JERK_OTHERS) {
            *arrival = arrival_of(plan, j);
            return VEER_OK;
        }
        sg->tau = tau, sg->move_time = move;
    }
    return veer__fail(diag, VEER_ERR_INFEASIBLE, ps->leg, wpi, -1, ps->s_end, veer__limit(VEER_LIMIT_NONE, -1),
                      "leg %d: %s at %.3f s cannot be met within 0.1 ms with the jerk limits: the nearest plans "
                      "arrive %.3f s early or later than it",
                      ps->leg, wpi >= 0 ? "the timed stop" : "the duration target", T, missing);
}

/* Timed stops and a duration target: each stretch of segments that ends at
 * a timed stop is slowed, when the fastest plan would arrive early, by a
 * common cap on body speed and yaw rate (lambda times the stretch's peaks,
 * lambda found by bisection) so the cart still accelerates and brakes at
 * its limits; arriving late is refused with the lateness and the limit that
 * binds over most of the stretch. */
veer_status veer__meet_arrivals(veer_plan *plan, veer_workspace *ws, veer_diag *diag) {
    const veer_path *path = &plan->path;
    for (int w = 0; w < plan->route->waypoint_count; w++) {
        if (!plan->route->waypoints[w].timed) continue;
        int found = 0;
        for (int j = 0; j < path->segment_count && !found; j++) found = path->segments[j].waypoint == w;
        if (!found)
            return veer__fail(diag, VEER_ERR_VALUE, -1, w, -1, -1.0, veer__limit(VEER_LIMIT_NONE, -1),
                              "waypoint %d is timed but the cart passes through it: make it a stop", w);
    }
    /* The end timed twice (a timed last stop and a duration target) must
     * agree: one of them would be ignored otherwise. */
    const veer_path_segment *end = &path->segments[path->segment_count - 1];
    if (plan->options.duration_target > 0.0 && end->waypoint >= 0 && plan->route->waypoints[end->waypoint].timed) {
        double want = plan->route->waypoints[end->waypoint].arrival + plan->segs[path->segment_count - 1].dwell;
        if (fabs(want - plan->options.duration_target) > 1e-6)
            return veer__fail(diag, VEER_ERR_VALUE, end->leg, end->waypoint, -1, -1.0,
                              veer__limit(VEER_LIMIT_NONE, -1),
                              "duration_target %.3f s disagrees with the timed last stop (waypoint %d at %.3f s, "
                              "then %.3f s of dwell): give one of them, or both alike",
                              plan->options.duration_target, end->waypoint,
                              plan->route->waypoints[end->waypoint].arrival, plan->segs[path->segment_count - 1].dwell);
    }
    int first = 0;
    double last_target = -1.0;
    for (int j = 0; j < path->segment_count; j++) {
        const veer_path_segment *ps = &path->segments[j];
        double T;
        int wpi = ps->waypoint;
        if (wpi >= 0 && plan->route->waypoints[wpi].timed && (j + 1 == path->segment_count ||
                                                          path->segments[j + 1].waypoint != wpi)) {
            T = plan->route->waypoints[wpi].arrival;
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
            double lo = 1.0, hi = 1.0, arr = fast, arr_hi = fast;
            veer_status st = VEER_OK;
            for (int it = 0; it < 60 && arr < T; it++) { /* bracket: slow enough */
                hi = lo, arr_hi = arr;
                lo *= 0.5;
                if ((st = paced(plan, first, j, lo, v0, w0, ws, &arr, diag))) return st;
            }
            /* The root of arrival(lambda) = T within the bracket [lo, hi]
             * (hi early, lo late), by regula falsi in 1 / lambda, in which
             * the arrival is close to linear (cruise time is length over
             * speed), with the Illinois halving (Dowell & Jarratt, BIT 11,
             * 1971) so that neither end sticks; every third step halves the
             * bracket instead, so a jump in the arrival (jerk windows) still
             * closes in as many steps as bisection would need. A bracket
             * closed to 1e-9, or to 1e-6 with both ends more than 0.1 ms
             * off (a continuous arrival would be within 0.03 ms there: it
             * changes by about T d(lambda) / lambda), holds a jump, not T:
             * settle takes over. */
            double ua = 1.0 / hi, ub = 1.0 / lo, ga = arr_hi - T, gb = arr - T;
            double early = T - arr_hi, late = arr - T; /* the true ends, without the halving */
            int side = 0;
            /* the bracket in lambda is [1 / ub, 1 / ua] */
            for (int it = 0; it < 90 && fabs(arr - T) > 1e-5 &&
                             1.0 / ua - 1.0 / ub > (fmin(early, late) > 1e-4 ? 1e-6 : 1e-9) * (1.0 / ua);
                 it++) {
                double u = ub - gb * (ub - ua) / (gb - ga);
                if (it % 3 == 2 || !(u > ua && u < ub)) u = 0.5 * (ua + ub);
                double mid = 1.0 / u;
                if ((st = paced(plan, first, j, mid, v0, w0, ws, &arr, diag))) return st;
                if (arr > T) {
                    ub = u, gb = late = arr - T;
                    if (side == 1) ga *= 0.5;
                    side = 1;
                } else {
                    ua = u, ga = arr - T, early = T - arr;
                    if (side == -1) gb *= 0.5;
                    side = -1;
                }
            }
            if (fabs(arr - T) > 1e-5 && (st = settle(plan, first, j, wpi, 1.0 / ua, v0, w0, T, ws, &arr, diag)))
                return st;
        }
        last_target = T;
        first = j + 1;
    }
    return VEER_OK;
}

