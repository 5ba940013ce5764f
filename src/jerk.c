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
/* The window's acceptance samples at a quarter of the 1 ms that users and
 * tests check (fine_jerk_ratio). A 1 ms difference quotient is the mean of
 * the jerk over that millisecond, wherever the samples fall, so it stays
 * below the largest jerk, which the finer samples see (at tight corners the
 * jerk changes within a millisecond: 2 ms samples there read up to 4 %
 * low). */
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

static void set_window(veer_plan *plan, int j, double tau) {
    veer_plan_segment *sg = &plan->segs[j];
    sg->tau = tau;
    sg->move_time = sg->raw_time + tau - veer__segment_lead(plan, j);
}

static double jerk_ratio(veer_plan *plan, int j, double tau, double dt) {
    set_window(plan, j, tau);
    veer_check_report r;
    memset(&r, 0, sizeof r);
    veer__check_segment(plan, j, dt, VEER__CHECK_JERK, &r);
    return r.worst;
}

/* Sets segment j's window to tau and returns the worst ratio of the other
 * limits at 1 ms. */
static double other_limits(veer_plan *plan, int j, double tau) {
    set_window(plan, j, tau);
    veer_check_report r;
    memset(&r, 0, sizeof r);
    veer__check_segment(plan, j, 1e-3, VEER__CHECK_LIMITS, &r);
    return r.worst;
}

/* Jerk ratio between samples p and s, h apart: body acceleration and wheel
 * accelerations differenced, as the dense check (verify.c) does it. */
static double jerk_between(const veer_plan *plan, const veer_sample *p, const veer_sample *s, double h) {
    const veer_limits *l = &plan->limits;
    double r = 0.0;
    if (isfinite(l->body_jerk))
        r = hypot(s->accel_world[0] - p->accel_world[0], s->accel_world[1] - p->accel_world[1]) / h / l->body_jerk;
    for (int i = 0; i < plan->module_count; i++)
        if (!plan->drive.modules[i].out && isfinite(l->modules[i].wheel_jerk))
            r = fmax(r, fabs(s->modules[i].wheel_accel - p->modules[i].wheel_accel) / h / l->modules[i].wheel_jerk);
    return r;
}

static void law_sample(const veer_plan *plan, int j, double t, veer_sample *s) {
    double pos, v, u;
    veer__segment_law(plan, j, t, &pos, &v, &u);
    memset(s, 0, sizeof *s);
    veer__sample_state(plan, j, pos, v, u, s);
    s->t = t;
}

/* Largest jerk ratio between [a.t, b.t] at a quarter of its step. */
static double quarters(const veer_plan *plan, int j, const veer_sample *a, const veer_sample *b) {
    veer_sample p = *a, s;
    double h = 0.25 * (b->t - a->t), r = 0.0;
    for (int k = 1; k <= 4; k++) {
        if (k < 4) law_sample(plan, j, a->t + k * h, &s);
        else s = *b;
        r = fmax(r, jerk_between(plan, &p, &s, h));
        p = s;
    }
    return r;
}

/* The jerk ratio of window tau as the acceptance sees it: every 1 ms, and
 * at 0.25 ms wherever a 1 ms sampling of another phase could read more
 * than half the aim (its millisecond lies within two neighbouring ones of
 * ours, so it reads at most their sum). */
static double fine_jerk_ratio(veer_plan *plan, int j, double tau) {
    set_window(plan, j, tau);
    const double dt = 1e-3, T = plan->segs[j].move_time;
    long n = (long)ceil(T / dt);
    veer_sample s[3]; /* at steps q - 2, q - 1, q */
    memset(s, 0, sizeof s);
    double m[3] = {0.0, 0.0, 0.0}, worst = 0.0;
    law_sample(plan, j, 0.0, &s[2]);
    for (long q = 1; q <= n + 1; q++) {
        s[0] = s[1];
        s[1] = s[2];
        m[0] = m[1];
        m[1] = m[2];
        m[2] = 0.0;
        if (q <= n) {
            law_sample(plan, j, q < n ? q * dt : T, &s[2]);
            m[2] = jerk_between(plan, &s[1], &s[2], s[2].t - s[1].t);
            worst = fmax(worst, m[2]);
        }
        /* the step ending at s[1] (q - 1), between its neighbours */
        if (q >= 2 && m[1] + fmax(m[0], m[2]) > 0.5 * VEER_JERK_AIM) worst = fmax(worst, quarters(plan, j, &s[0], &s[1]));
    }
    return worst;
}

/* When no window holds the jerk: the law is driven slower in time, speeds
 * times f and accelerations times f^2, so that it runs 1/f times longer
 * and every jerk of it, and of its window stretched by 1/f, falls by f^3.
 * over (the jerk over its aim at the window chosen) gives f = over^(-1/3),
 * kept within [0.3, 0.99]. */
static double fail(veer_plan *plan, int j, double over, double slow[2]) {
    double f = fmin(0.99, fmax(0.3, cbrt(1.0 / over)));
    slow[0] = f;
    slow[1] = f * f;
    jerk_ratio(plan, j, 0.0, VEER_JERK_DT);
    return -1.0;
}

/* Moving start, first segment: seconds the solve holds the start speed
 * (coast_k grid points); -1 elsewhere. */
static double hold_time(const veer_plan *plan, int j) {
    const veer_plan_segment *sg = &plan->segs[j];
    if (j != 0 || !(plan->x_start > 0.0)) return -1.0;
    return (plan->s[sg->k0 + sg->coast_k] - plan->s[sg->k0]) / sqrt(plan->x_start);
}

/* The motion time, raw plus window, once slowed so that window tau holds
 * the jerk ratio r (up to the factor aim^(-1/3)). */
static double slowed_time(double raw, double tau, double r) { return (raw + tau) * cbrt(fmax(r, 1e-9)); }

double veer__jerk_window(veer_plan *plan, int j, double slow[2]) {
    /* Jerk that the path's own geometry causes at speed (a wheel's rate
     * changing along a curve) does not average away: a longer window even
     * carries the speed of the straights into the curve. A window longer
     * than half the stretch, or none that holds the jerk when checked
     * finely, means the stretch must be driven slower: at the window that
     * makes the slowed motion shortest. */
    slow[0] = slow[1] = 1.0;
    double raw = plan->segs[j].raw_time;
    double cap = fmin(VEER_JERK_TAU_MAX, fmax(0.5, 0.5 * raw));
    /* A moving start's window reads the raw law tau / 2 ahead, which must
     * still hold the start speed there (sample.c, veer__segment_law). */
    double hold = hold_time(plan, j);
    int held = hold >= 0.0 && 2.0 * hold < cap;
    if (hold >= 0.0) cap = fmin(cap, 2.0 * hold);
    if (!(cap >= 0.02)) return fail(plan, j, 1.0, slow) - (held ? 1.0 : 0.0);
    double hi = 0.02, r = jerk_ratio(plan, j, hi, VEER_JERK_DT), at = hi, r_at = r;
    while (r > VEER_JERK_AIM && hi < cap) {
        hi = fmin(2.0 * hi, cap); /* the cap itself is a window too */
        r = jerk_ratio(plan, j, hi, VEER_JERK_DT);
        if (slowed_time(raw, hi, r) < slowed_time(raw, at, r_at)) at = hi, r_at = r;
    }
    double lo = hi > 0.02 ? 0.5 * hi : 0.0;
    if (r > VEER_JERK_AIM) {
        /* Refine the best doubling between its neighbours (golden section
         * in log tau); a window there may even hold the jerk. */
        double a = log(0.5 * at), b = log(fmin(2.0 * at, cap)), g = 0.6180339887498949;
        double c = b - g * (b - a), d = a + g * (b - a);
        double rc = jerk_ratio(plan, j, exp(c), VEER_JERK_DT), rd = jerk_ratio(plan, j, exp(d), VEER_JERK_DT);
        for (int it = 0; it < 5 && rc > VEER_JERK_AIM && rd > VEER_JERK_AIM; it++) {
            if (slowed_time(raw, exp(c), rc) < slowed_time(raw, exp(d), rd)) {
                b = d, d = c, rd = rc;
                c = b - g * (b - a);
                rc = jerk_ratio(plan, j, exp(c), VEER_JERK_DT);
            } else {
                a = c, c = d, rc = rd;
                d = a + g * (b - a);
                rd = jerk_ratio(plan, j, exp(d), VEER_JERK_DT);
            }
        }
        if (rc > VEER_JERK_AIM && rd > VEER_JERK_AIM) {
            double tc = exp(c), td = exp(d);
            if (slowed_time(raw, tc, rc) < slowed_time(raw, at, r_at)) at = tc, r_at = rc;
            if (slowed_time(raw, td, rd) < slowed_time(raw, at, r_at)) at = td, r_at = rd;
            return fail(plan, j, r_at / VEER_JERK_AIM, slow) - (held ? 1.0 : 0.0);
        }
        hi = rc <= VEER_JERK_AIM ? exp(c) : exp(d); /* holds the jerk; the bisection keeps a window that does */
        lo = 0.5 * at;
    }
    while (hi - lo > 0.02 * hi) {
        double mid = 0.5 * (lo + hi);
        if (jerk_ratio(plan, j, mid, VEER_JERK_DT) > VEER_JERK_AIM)
            lo = mid;
        else
            hi = mid;
    }
    /* A peak the coarse samples missed may need a slightly longer window (a
     * switch of the law averaged away), found at 1 ms and accepted at the
     * fine step; where a longer window no longer helps, the jerk comes from
     * the geometry. The fine step is taken once the other limits hold (else
     * the law is solved again anyway). */
    r = jerk_ratio(plan, j, hi, 1e-3);
    for (int it = 0; it < 8 && r > VEER_JERK_AIM && 1.05 * hi <= cap; it++) {
        double longer = jerk_ratio(plan, j, 1.05 * hi, 1e-3);
        if (!(longer < r)) break;
        hi *= 1.05;
        r = longer;
    }
    if (r > VEER_JERK_AIM) return fail(plan, j, r / VEER_JERK_AIM, slow) - (held ? 1.0 : 0.0);
    double others = other_limits(plan, j, hi);
    if (others > VEER__JERK_OTHERS) return others;
    double h0 = hi;
    r = fine_jerk_ratio(plan, j, hi);
    for (int it = 0; it < 3 && r > VEER_JERK_AIM && 1.05 * hi <= cap; it++) {
        double longer = fine_jerk_ratio(plan, j, 1.05 * hi);
        if (!(longer < r)) break;
        hi *= 1.05;
        r = longer;
    }
    if (r > VEER_JERK_AIM) return fail(plan, j, r / VEER_JERK_AIM, slow) - (held ? 1.0 : 0.0);
    return hi != h0 ? other_limits(plan, j, hi) : others;
}
