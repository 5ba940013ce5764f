/* Sampling: the plan's state at any time (pose, twist, acceleration and
 * every module's setpoint) and fixed-rate tables of it.
 * Within a grid interval sddot is constant, so s(t) is an exact quadratic.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "plan_internal.h"

#define VEER_STILL 1e-9

void veer__module_setpoints(const veer_plan *plan, int seg, const veer_point_kin *pk, double sdot, double sddot,
                            const double *ref, veer_module_setpoint *out) {
    (void)seg;
    const veer_drive_def *d = &plan->drive;
    int M = plan->module_count;
    double x = sdot * sdot;
    if (plan->steered) {
        for (int i = 0; i < M; i++) {
            double v[2], dv[2];
            veer__module_velocity(d, i, pk, v, dv);
            double sp2 = v[0] * v[0] + v[1] * v[1], sp = sqrt(sp2);
            veer_module_setpoint *o = &out[i];
            if (sp <= VEER_STILL || d->modules[i].out) { /* the module stands: keep the angle, rate along dv */
                double e = ref[i];
                o->steer = e;
                o->steer_rate = 0.0;
                o->wheel_rate = 0.0;
                o->wheel_accel = d->modules[i].out ? 0.0 : (dv[0] * cos(e) + dv[1] * sin(e)) * x / d->wheel_radius;
                continue;
            }
            double st = veer__steer_near(atan2(v[1], v[0]), ref[i]);
            double ex = cos(st), ey = sin(st);
            double along = v[0] * ex + v[1] * ey; /* +sp forward, -sp reversed */
            o->steer = st;
            o->steer_rate = (v[0] * dv[1] - v[1] * dv[0]) / sp2 * sdot;
            o->wheel_rate = along * sdot / d->wheel_radius;
            o->wheel_accel = (along * sddot + (dv[0] * ex + dv[1] * ey) * x) / d->wheel_radius;
        }
        return;
    }
    const double(*J)[3] = plan->rows.J;
    for (int i = 0; i < M; i++) {
        double f = J[i][0] * pk->xi[0] + J[i][1] * pk->xi[1] + J[i][2] * pk->xi[2];
        double df = J[i][0] * pk->dxi[0] + J[i][1] * pk->dxi[1] + J[i][2] * pk->dxi[2];
        out[i].steer = ref[i];
        out[i].steer_rate = 0.0;
        int on = !d->modules[i].out;
        out[i].wheel_rate = on ? f * sdot : 0.0;
        out[i].wheel_accel = on ? f * sddot + df * x : 0.0;
    }
}

/* Index of the last entry of a[0..n-1] that is <= v (0 if none). */
static int find(const double *a, int n, double v) {
    int lo = 0, hi = n - 1;
    if (v >= a[hi]) return hi;
    while (hi - lo > 1) {
        int mid = (lo + hi) / 2;
        if (a[mid] <= v) lo = mid;
        else hi = mid;
    }
    return lo;
}

static void fill_body(veer_sample *o, const veer_point_kin *pk, double sdot, double sddot) {
    double x = sdot * sdot;
    double c = cos(pk->q[2]), sn = sin(pk->q[2]);
    memcpy(o->pose, pk->q, sizeof o->pose);
    for (int a = 0; a < 3; a++) {
        o->twist_world[a] = pk->dq[a] * sdot;
        o->accel_world[a] = pk->dq[a] * sddot + pk->ddq[a] * x;
    }
    o->twist_body[0] = c * o->twist_world[0] + sn * o->twist_world[1];
    o->twist_body[1] = -sn * o->twist_world[0] + c * o->twist_world[1];
    o->twist_body[2] = o->twist_world[2];
    o->accel_body[0] = c * o->accel_world[0] + sn * o->accel_world[1];
    o->accel_body[1] = -sn * o->accel_world[0] + c * o->accel_world[1];
    o->accel_body[2] = o->accel_world[2];
}

/* The segment whose timeline holds t. */
static int segment_at_time(const veer_plan *plan, double t) {
    int j = 0;
    while (j + 1 < plan->segment_count && t >= plan->segs[j + 1].t_resteer) j++;
    return j;
}

/* The time-optimal law of segment j at r seconds after its motion starts
 * (before: the start state continued; after: rest at the end). Within a
 * grid interval sddot is constant: s(t) is a quadratic. */
static void raw_at(const veer_plan *plan, int j, double r, double *s, double *v, double *u) {
    const veer_plan_segment *sg = &plan->segs[j];
    double v_start = sqrt(plan->x[sg->k0]);
    if (r <= 0.0) {
        *s = plan->s[sg->k0] + v_start * r;
        *v = v_start;
        *u = 0.0;
        return;
    }
    if (r >= sg->raw_time) {
        *s = plan->s[sg->k1];
        *v = *u = 0.0;
        return;
    }
    double t = sg->t_move + r;
    int k = sg->k0 + find(plan->t + sg->k0, sg->k1 - sg->k0 + 1, t);
    if (k >= sg->k1) k = sg->k1 - 1;
    double ds = plan->s[k + 1] - plan->s[k];
    double v0 = sqrt(plan->x[k]);
    double a = (plan->x[k + 1] - plan->x[k]) / (2.0 * ds);
    double tau = t - plan->t[k];
    double vel = v0 + a * tau;
    double pos = plan->s[k] + v0 * tau + 0.5 * a * tau * tau;
    *v = vel > 0.0 ? vel : 0.0;
    *u = a;
    *s = pos < plan->s[k] ? plan->s[k] : pos > plan->s[k + 1] ? plan->s[k + 1] : pos;
}

/* Integral of the raw law's s over [a, b] seconds (relative to the motion
 * start), interval by interval: exact for the piecewise quadratic. */
static double raw_integral(const veer_plan *plan, int j, double a, double b) {
    const veer_plan_segment *sg = &plan->segs[j];
    double sum = 0.0, v_start = sqrt(plan->x[sg->k0]);
    if (a < 0.0) { /* before the start: s0 + v0 r */
        double e = b < 0.0 ? b : 0.0;
        sum += plan->s[sg->k0] * (e - a) + 0.5 * v_start * (e * e - a * a);
        a = e;
    }
    if (b > sg->raw_time) { /* after the end: at rest at s1 */
        double e = a > sg->raw_time ? a : sg->raw_time;
        sum += plan->s[sg->k1] * (b - e);
        b = e;
    }
    if (b <= a) return sum;
    int k = sg->k0 + find(plan->t + sg->k0, sg->k1 - sg->k0 + 1, sg->t_move + a);
    for (; k < sg->k1; k++) {
        double t0 = plan->t[k] - sg->t_move, t1 = plan->t[k + 1] - sg->t_move;
        double lo = a > t0 ? a : t0, hi = b < t1 ? b : t1;
        if (hi > lo) {
            double v0 = sqrt(plan->x[k]), acc = (plan->x[k + 1] - plan->x[k]) / (2.0 * (plan->s[k + 1] - plan->s[k]));
            double p = lo - t0, q = hi - t0; /* s = s_k + v0 tau + acc tau^2 / 2 */
            sum += plan->s[k] * (q - p) + 0.5 * v0 * (q * q - p * p) + acc * (q * q * q - p * p * p) / 6.0;
        }
        if (t1 >= b) break;
    }
    return sum;
}

double veer__segment_lead(const veer_plan *plan, int j) {
    return j == 0 && plan->x_start > 0.0 && plan->segs[0].tau > 0.0 ? 0.5 * plan->segs[0].tau : 0.0;
}

void veer__segment_law(const veer_plan *plan, int j, double r, double *s, double *sdot, double *sddot) {
    const veer_plan_segment *sg = &plan->segs[j];
    if (!(sg->tau > 0.0)) {
        raw_at(plan, j, r, s, sdot, sddot);
        return;
    }
    /* Jerk limit: the raw law averaged over a window of tau seconds. Its
     * speed and acceleration are differences of the raw law's, so its jerk
     * is (sddot(r) - sddot(r - tau)) / tau. A moving start reads it tau / 2
     * ahead: the raw law holds the start speed v0 for at least tau / 2 and
     * continues the cart's motion at v0 before it (the cart is taken to move
     * at constant speed, as a start twist without acceleration says), so the
     * window [-tau/2, tau/2] averages to s0 with speed v0 and sddot 0 at
     * r = 0. */
    r += veer__segment_lead(plan, j);
    double tau = sg->tau, s1, v1, u1, s0, v0, u0;
    raw_at(plan, j, r, &s1, &v1, &u1);
    raw_at(plan, j, r - tau, &s0, &v0, &u0);
    double pos = raw_integral(plan, j, r - tau, r) / tau;
    double lo = plan->s[sg->k0], hi = plan->s[sg->k1];
    *s = pos < lo ? lo : pos > hi ? hi : pos;
    *sdot = (s1 - s0) / tau;
    if (*sdot < 0.0) *sdot = 0.0;
    *sddot = (v1 - v0) / tau;
}

int veer__plan_state(const veer_plan *plan, double t, int *seg, double *s, double *sdot, double *sddot) {
    int j = segment_at_time(plan, t);
    const veer_plan_segment *sg = &plan->segs[j];
    *seg = j;
    *sdot = *sddot = 0.0;
    if (t < sg->t_move) {
        *s = plan->s[sg->k0];
        return VEER_PHASE_RESTEER;
    }
    if (t >= sg->t_move + sg->move_time) {
        *s = plan->s[sg->k1];
        return (j + 1 == plan->segment_count && t >= plan->duration) ? VEER_PHASE_DONE : VEER_PHASE_DWELL;
    }
    veer__segment_law(plan, j, t - sg->t_move, s, sdot, sddot);
    return VEER_PHASE_MOVING;
}

void veer__sample_state(const veer_plan *plan, int seg, double s, double sdot, double sddot, veer_sample *o) {
    const veer_plan_segment *sg = &plan->segs[seg];
    int M = plan->module_count;
    /* Steer references: the grid's continuous angles, interpolated in s. */
    int k = sg->k0 + find(plan->s + sg->k0, sg->k1 - sg->k0 + 1, s);
    if (k >= sg->k1) k = sg->k1 - 1;
    double ds = plan->s[k + 1] - plan->s[k];
    double f = ds > 0.0 ? (s - plan->s[k]) / ds : 0.0;
    f = f < 0.0 ? 0.0 : f > 1.0 ? 1.0 : f;
    double ref[VEER_MAX_MODULES] = {0};
    for (int i = 0; i < M; i++) {
        double a = veer__plan_steer(plan, k, i), b = veer__plan_steer(plan, k + 1, i);
        ref[i] = a + (b - a) * f;
    }
    veer_point_kin pk;
    veer__point_kin(&plan->path, seg, s, &pk);
    o->module_count = M;
    o->leg = plan->path.segments[seg].leg;
    o->s = s;
    o->sdot = sdot;
    o->sddot = sddot;
    fill_body(o, &pk, sdot, sddot);
    veer__module_setpoints(plan, seg, &pk, sdot, sddot, ref, o->modules);
    if (!(sdot > 0.0))
        for (int i = 0; i < M; i++) o->modules[i].steer = ref[i];
}

static void sample_at(const veer_plan *plan, double t, veer_sample *o) {
    memset(o, 0, sizeof *o);
    int j;
    double s, sdot, sddot;
    int phase = veer__plan_state(plan, t, &j, &s, &sdot, &sddot);
    if (phase == VEER_PHASE_RESTEER) { /* modules turn at steady rates, body at rest */
        const veer_plan_segment *sg = &plan->segs[j];
        double T = sg->resteer_time, f = T > 0.0 ? (t - sg->t_resteer) / T : 1.0;
        if (f < 0.0) f = 0.0;
        veer_point_kin pk;
        veer__point_kin(&plan->path, j, s, &pk);
        o->module_count = plan->module_count;
        o->leg = plan->path.segments[j].leg;
        o->s = s;
        fill_body(o, &pk, 0.0, 0.0);
        for (int i = 0; i < plan->module_count; i++) {
            double a = veer__resteer_from(plan, j, i), b = veer__resteer_to(plan, j, i);
            o->modules[i].steer = a + (b - a) * f;
            o->modules[i].steer_rate = T > 0.0 ? (b - a) / T : 0.0;
        }
    } else {
        veer__sample_state(plan, j, s, sdot, sddot, o);
    }
    o->t = t;
    o->phase = phase;
}

veer_status veer_plan_sample(const veer_plan *plan, double t, veer_sample *out) {
    if (!plan || !out) return VEER_ERR_NULL;
    if (isnan(t)) return VEER_ERR_VALUE;
    if (t < 0.0) t = 0.0;
    if (t > plan->duration) t = plan->duration;
    sample_at(plan, t, out);
    return VEER_OK;
}

veer_status veer_plan_table(const veer_plan *plan, double rate_hz, veer_sample *out, size_t capacity, size_t *count) {
    if (!plan || !count) return VEER_ERR_NULL;
    if (!(rate_hz > 0.0) || !isfinite(rate_hz) || rate_hz > 1e6) return VEER_ERR_VALUE;
    double dt = 1.0 / rate_hz;
    double rows = floor(plan->duration / dt + 1e-9) + 1.0;
    if (rows > 1e8) return VEER_ERR_VALUE;
    size_t n = (size_t)rows;
    int extra = plan->duration - (double)(n - 1) * dt > 1e-9;
    n += (size_t)extra;
    *count = n;
    if (!out || capacity < n) return VEER_ERR_BUFFER;
    for (size_t r = 0; r < n; r++) {
        double t = (extra && r == n - 1) ? plan->duration : (double)r * dt;
        sample_at(plan, t > plan->duration ? plan->duration : t, &out[r]);
    }
    return VEER_OK;
}
