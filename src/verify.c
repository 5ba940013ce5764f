/* Dense check of a plan against every limit: sampled at a fixed step, the
 * worst ratio of a figure to its limit. Differenced figures (jerk, the
 * steer angle's own rate) come from consecutive samples. The jerk fit uses
 * it to choose its window; users use it to see a plan's margins.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "plan_internal.h"

static void note(veer_check_report *r, double ratio, int kind, int module, double t) {
    if (ratio > r->worst) {
        r->worst = ratio;
        r->limit = veer__limit(kind, module);
        r->t = t;
    }
}

static double ratio(double v, double limit) { return isfinite(limit) ? fabs(v) / limit : 0.0; }

/* Contact-point acceleration of a module at body offset r: a + alpha k x r -
 * w^2 r (rigid body). */
static double contact_accel(const veer_sample *s, const double r[2]) {
    double c = cos(s->pose[2]), sn = sin(s->pose[2]);
    double rx = c * r[0] - sn * r[1], ry = sn * r[0] + c * r[1], w = s->twist_world[2], al = s->accel_world[2];
    return hypot(s->accel_world[0] - al * ry - w * w * rx, s->accel_world[1] + al * rx - w * w * ry);
}

/* Notes sample s (with the previous sample p when have) in r. */
static void check_sample(const veer_plan *plan, const veer_sample *sp, const veer_sample *pp, int have, int which,
                         veer_check_report *r) {
    const veer_limits *l = &plan->limits;
    const veer_drive_def *d = &plan->drive;
    const veer_sample s = *sp, p = *pp;
    double t = s.t;
    {
        r->samples++;
        double h = have ? t - p.t : 0.0;
        if (which & VEER__CHECK_LIMITS) {
            note(r, ratio(hypot(s.twist_world[0], s.twist_world[1]), l->body_speed), VEER_LIMIT_BODY_SPEED, -1, t);
            note(r, ratio(hypot(s.accel_world[0], s.accel_world[1]), l->body_accel), VEER_LIMIT_BODY_ACCEL, -1, t);
            note(r, ratio(s.twist_world[2], l->yaw_rate), VEER_LIMIT_YAW_RATE, -1, t);
            note(r, ratio(s.accel_world[2], l->yaw_accel), VEER_LIMIT_YAW_ACCEL, -1, t);
        }
        if ((which & VEER__CHECK_JERK) && h > 0.0)
            note(r,
                 ratio(hypot(s.accel_world[0] - p.accel_world[0], s.accel_world[1] - p.accel_world[1]) / h,
                       l->body_jerk),
                 VEER_LIMIT_BODY_JERK, -1, t);
        for (int i = 0; i < plan->module_count; i++) {
            if (d->modules[i].out) continue;
            const veer_module_limits *ml = &l->modules[i];
            const veer_module_setpoint *m = &s.modules[i];
            if (which & VEER__CHECK_LIMITS) {
                note(r, ratio(m->wheel_rate, ml->wheel_rate), VEER_LIMIT_WHEEL_SPEED, i, t);
                note(r, ratio(m->wheel_accel, ml->wheel_accel), VEER_LIMIT_WHEEL_ACCEL, i, t);
                if (plan->steered) {
                    note(r, ratio(m->steer_rate, ml->steer_rate), VEER_LIMIT_STEER_RATE, i, t);
                    if (h > 0.0)
                        note(r, ratio((m->steer - p.modules[i].steer) / h, ml->steer_rate), VEER_LIMIT_STEER_RATE, i,
                             t);
                    if (m->steer > ml->steer_max + 1e-9 || m->steer < ml->steer_min - 1e-9)
                        note(r, 2.0, VEER_LIMIT_STEER_RANGE, i, t);
                }
                if (isfinite(ml->traction_mu))
                    note(r, contact_accel(&s, plan->rows.pos[i]) / (ml->traction_mu * VEER_GRAVITY),
                         VEER_LIMIT_TRACTION, i, t);
                if (isfinite(ml->motor_stall_accel)) {
                    double driving = m->wheel_rate >= 0.0 ? m->wheel_accel : -m->wheel_accel;
                    double avail = ml->motor_stall_accel * (1.0 - fabs(m->wheel_rate) / ml->motor_free_rate);
                    note(r, 1.0 + (driving - avail) / ml->motor_stall_accel, VEER_LIMIT_MOTOR, i, t);
                }
            }
            if ((which & VEER__CHECK_JERK) && h > 0.0)
                note(r, ratio((m->wheel_accel - p.modules[i].wheel_accel) / h, ml->wheel_jerk), VEER_LIMIT_WHEEL_JERK, i,
                     t);
        }
    }
}

void veer__check_segment(const veer_plan *plan, int j, double dt, int which, veer_check_report *r) {
    const veer_plan_segment *sg = &plan->segs[j];
    veer_sample s, p;
    memset(&p, 0, sizeof p);
    long steps = (long)ceil(sg->move_time / dt);
    for (long q = 0; q <= steps; q++) {
        double t = q * dt < sg->move_time ? q * dt : sg->move_time, pos, v, u;
        veer__segment_law(plan, j, t, &pos, &v, &u);
        memset(&s, 0, sizeof s);
        veer__sample_state(plan, j, pos, v, u, &s);
        s.t = t;
        check_sample(plan, &s, &p, q > 0, which, r);
        p = s;
    }
}

veer_status veer_plan_check_limits(const veer_plan *plan, double dt, veer_check_report *out) {
    if (!plan || !out) return VEER_ERR_NULL;
    if (!(dt >= 1e-5 && dt <= 1.0)) return VEER_ERR_VALUE;
    veer_check_report r;
    memset(&r, 0, sizeof r);
    r.limit = veer__limit(VEER_LIMIT_NONE, -1);
    veer_sample s, p;
    memset(&p, 0, sizeof p);
    long steps = (long)ceil(plan->duration / dt);
    if (steps > 100000000L) return VEER_ERR_VALUE;
    for (long q = 0; q <= steps; q++) {
        double t = q * dt < plan->duration ? q * dt : plan->duration;
        if (veer_plan_sample(plan, t, &s) != VEER_OK) continue;
        check_sample(plan, &s, &p, q > 0, VEER__CHECK_LIMITS | VEER__CHECK_JERK, &r);
        p = s;
    }
    *out = r;
    return VEER_OK;
}
