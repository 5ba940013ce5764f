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

#define VEER_JERK_DT 2e-3   /* s: sampling step while searching */
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

double veer__jerk_window(veer_plan *plan, int j) {
    /* Jerk that the path's own geometry causes at speed (a wheel's rate
     * changing along a curve) does not average away; a window longer than
     * half the stretch means the stretch must be driven slower. */
    double cap = fmin(VEER_JERK_TAU_MAX, fmax(0.5, 0.5 * plan->segs[j].raw_time));
    double hi = 0.02;
    while (hi < cap && jerk_ratio(plan, j, hi, VEER_JERK_DT) > VEER_JERK_AIM) hi *= 2.0;
    if (hi >= cap) {
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
    /* confirm at the checking step of the tests and users (1 ms) */
    for (int it = 0; it < 20 && jerk_ratio(plan, j, hi, 1e-3) > VEER_JERK_AIM; it++) hi *= 1.05;
    jerk_ratio(plan, j, hi, 1e-3); /* leaves tau = hi */
    veer_check_report r;
    memset(&r, 0, sizeof r);
    veer__check_segment(plan, j, 1e-3, VEER__CHECK_LIMITS, &r);
    return r.worst;
}
