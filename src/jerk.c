/* Jerk limits. A time-optimal law switches its acceleration instantly,
 * which shakes a target and its mount. Averaging the law s(t) over a
 * sliding window of tau seconds keeps it on the path, from rest to rest,
 * and bounds its jerk by (sddot(t) - sddot(t - tau)) / tau (a moving
 * average of a bang-bang acceleration: the classic S-curve construction).
 * The window is the smallest (to 2 %) whose sampled jerk, body and wheel,
 * stays within the limits; it costs tau seconds per rest-to-rest segment.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "plan_internal.h"

#define VEER_JERK_DT 2e-3       /* s: sampling step while searching */
/* s: sampling step of the window's acceptance. A 1 ms difference quotient
 * is the mean of the jerk over that millisecond, wherever the samples fall,
 * so it stays below the largest jerk; sampled four times finer than users
 * and tests check, the acceptance sees that largest jerk (at tight corners
 * the jerk changes within a millisecond: 2 ms samples there read up to 4 %
 * low). */
#define VEER_JERK_DT_FINE 2.5e-4
#define VEER_JERK_TAU_MAX 60.0
/* Sampled jerk peaks depend a little on where the samples fall; aim below
 * the limit so that any 1 ms sampling stays within it. */
#define VEER_JERK_AIM 0.97

int veer__has_jerk_limit(const veer_plan *plan) {
    if (isfinite(plan->limits.body_jerk)) return 1;
    for (int i = 0; i < plan->module_count; i++)
        if (isfinite(plan->limits.modules[i].wheel_jerk) && !plan->drive.modules[i].out) return 1;
    return 0;
}

static double jerk_ratio(veer_plan *plan, int j, double tau, double dt) {
    veer_plan_segment *sg = &plan->segs[j];
    sg->tau = tau;
    sg->move_time = sg->raw_time + tau;
    veer_check_report r;
    memset(&r, 0, sizeof r);
    veer__check_segment(plan, j, dt, VEER__CHECK_JERK, &r);
    return r.worst;
}

double veer__jerk_window(veer_plan *plan, int j, double *over) {
    /* Jerk that the path's own geometry causes at speed (a wheel's rate
     * changing along a curve) does not average away: a longer window even
     * carries the speed of the straights into the curve. A window longer
     * than half the stretch, or none that holds the jerk when checked
     * finely, means the stretch must be driven slower. */
    double cap = fmin(VEER_JERK_TAU_MAX, fmax(0.5, 0.5 * plan->segs[j].raw_time));
    double hi = 0.02, r = jerk_ratio(plan, j, hi, VEER_JERK_DT), best = r;
    while (r > VEER_JERK_AIM) {
        hi *= 2.0;
        if (hi >= cap) break;
        r = jerk_ratio(plan, j, hi, VEER_JERK_DT);
        best = fmin(best, r);
    }
    if (r > VEER_JERK_AIM) {
        *over = best / VEER_JERK_AIM;
        jerk_ratio(plan, j, 0.0, VEER_JERK_DT);
        return -1.0;
    }
    double lo = hi > 0.02 ? 0.5 * hi : 0.0;
    while (hi - lo > 0.02 * hi) {
        double mid = 0.5 * (lo + hi);
        if (jerk_ratio(plan, j, mid, VEER_JERK_DT) > VEER_JERK_AIM)
            lo = mid;
        else
            hi = mid;
    }
    /* Accept at the fine step. A peak the coarse samples missed may need a
     * slightly longer window (a switch of the law averaged away), but where
     * a longer window no longer helps the jerk comes from the geometry. */
    r = jerk_ratio(plan, j, hi, VEER_JERK_DT_FINE);
    for (int it = 0; it < 8 && r > VEER_JERK_AIM; it++) {
        double longer = jerk_ratio(plan, j, 1.05 * hi, VEER_JERK_DT_FINE);
        if (!(longer < r)) break;
        hi *= 1.05;
        r = longer;
    }
    if (r > VEER_JERK_AIM) {
        *over = r / VEER_JERK_AIM;
        jerk_ratio(plan, j, 0.0, VEER_JERK_DT);
        return -1.0;
    }
    veer_plan_segment *sg = &plan->segs[j];
    sg->tau = hi;
    sg->move_time = sg->raw_time + hi;
    *over = r / VEER_JERK_AIM;
    veer_check_report rep;
    memset(&rep, 0, sizeof rep);
    veer__check_segment(plan, j, 1e-3, VEER__CHECK_LIMITS, &rep);
    return rep.worst;
}
