/* Controlled stop: brake along the planned path as hard as every limit
 * allows (in the manner of IEC 60204-1 stop categories 1 and 2: decelerate
 * under control, then stand). Used by the player on the cart and by the
 * range checks on the ground, so both brake the same way.
 *
 * At each step the deceleration is the most negative sddot the point's
 * rows allow at the current speed, L(x) = max over rows with a < 0 of
 * (c - b x) / a. Braking at least as hard as the plan keeps sdot(s) below
 * the plan's at every s (comparison of dx/ds = 2 sddot), so every speed
 * limit the plan respects holds during the stop as well.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "plan_internal.h"

#define VEER_STOP_STEP 1e-3 /* s: integration step */

/* Hardest deceleration the limits allow at (s, x) in segment seg; -inf when
 * no limit bounds braking. The rows are evaluated as they are built, not
 * stored (a cart's stack is small). */
static double hardest_decel(const veer_plan *plan, int seg, double s, double x) {
    veer_point_kin pk;
    double lo, xmax;
    veer_limit_id id;
    veer__point_kin(&plan->path, seg, s, &pk);
    (void)veer__point_decel(&plan->rows, &pk, x, &lo, &xmax, &id);
    return lo < 0.0 ? lo : 0.0; /* never speeds up */
}

int veer__stop_step(const veer_plan *plan, int seg, double *s, double *sdot, double *sddot, double dt) {
    double s_end = plan->path.segments[seg].s_end;
    double pos = *s, v = *sdot, u = 0.0;
    while (dt > 0.0 && v > 0.0) {
        double h = dt < VEER_STOP_STEP ? dt : VEER_STOP_STEP;
        u = hardest_decel(plan, seg, pos, v * v);
        if (!isfinite(u) || v + u * h <= 0.0) { /* comes to rest within this step */
            double th = isfinite(u) ? -v / u : 0.0;
            pos += 0.5 * v * th;
            v = 0.0;
        } else {
            pos += (v + 0.5 * u * h) * h;
            v += u * h;
        }
        if (pos >= s_end) { /* the path's own rest comes first */
            pos = s_end;
            v = 0.0;
        }
        dt -= h;
    }
    *s = pos;
    *sdot = v;
    *sddot = v > 0.0 && isfinite(u) ? u : 0.0;
    return v > 0.0;
}

veer_status veer_plan_stop_info(const veer_plan *plan, double t, veer_stop_info *out) {
    if (!plan || !out) return VEER_ERR_NULL;
    if (!isfinite(t)) return VEER_ERR_VALUE;
    if (t < 0.0) t = 0.0;
    if (t > plan->duration) t = plan->duration;
    veer_stop_info info;
    memset(&info, 0, sizeof info);
    int seg;
    double s, v, u;
    int phase = veer__plan_state(plan, t, &seg, &s, &v, &u);
    info.t = t;
    info.leg = plan->path.segments[seg].leg;
    info.s_start = s;
    info.sdot_start = phase == VEER_PHASE_MOVING ? v : 0.0;
    double T = 0.0;
    v = info.sdot_start;
    /* Bounded: the stop cannot outlast the rest of the segment's motion by
     * much, and never more than 10^6 steps. */
    for (long k = 0; k < 1000000 && veer__stop_step(plan, seg, &s, &v, &u, VEER_STOP_STEP); k++) T += VEER_STOP_STEP;
    if (info.sdot_start > 0.0) T += VEER_STOP_STEP; /* the step that came to rest */
    info.s_end = s;
    info.duration = T;
    *out = info;
    return VEER_OK;
}

veer_status veer_plan_stop_sample(const veer_plan *plan, double t_stop, double tau, veer_sample *out) {
    if (!plan || !out) return VEER_ERR_NULL;
    if (!isfinite(t_stop) || isnan(tau)) return VEER_ERR_VALUE;
    if (t_stop < 0.0) t_stop = 0.0;
    if (t_stop > plan->duration) t_stop = plan->duration;
    if (tau < 0.0) tau = 0.0;
    int seg;
    double s, v, u;
    int phase = veer__plan_state(plan, t_stop, &seg, &s, &v, &u);
    if (phase != VEER_PHASE_MOVING) { /* already standing: the stop is immediate */
        veer_status st = veer_plan_sample(plan, t_stop, out);
        if (st == VEER_OK) {
            out->t = t_stop + tau;
            out->phase = VEER_PHASE_DONE;
            out->sdot = out->sddot = 0.0;
            for (int i = 0; i < out->module_count; i++) out->modules[i].steer_rate = 0.0;
        }
        return st;
    }
    u = 0.0;
    int moving = veer__stop_step(plan, seg, &s, &v, &u, tau > 1e4 ? 1e4 : tau);
    veer_sample o;
    memset(&o, 0, sizeof o);
    veer__sample_state(plan, seg, s, v, u, &o);
    o.t = t_stop + tau;
    o.phase = moving ? VEER_PHASE_MOVING : VEER_PHASE_DONE;
    *out = o;
    return VEER_OK;
}
