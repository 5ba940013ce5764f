/* Dense-sampling checks shared by the plan suites: every limit, every
 * millisecond, no NaN, steer continuity. Test-only. */
#ifndef VEER_TEST_PLAN_CHECK_H
#define VEER_TEST_PLAN_CHECK_H

#include <criterion/criterion.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <veer/veer.h>

typedef struct {
    double worst;        /* largest ratio of a sampled figure to its limit */
    char worst_name[64]; /* which */
    double worst_t;
    int nan_seen;
    int samples;
} plan_check_result;

static inline void pc_note(plan_check_result *r, double value, double limit, const char *name, int module, double t) {
    if (!isfinite(limit)) return;
    double ratio = fabs(value) / limit;
    if (ratio > r->worst) {
        r->worst = ratio;
        r->worst_t = t;
        if (module >= 0)
            snprintf(r->worst_name, sizeof r->worst_name, "%s[%d]", name, module);
        else
            snprintf(r->worst_name, sizeof r->worst_name, "%s", name);
    }
}

static inline int pc_finite3(const double *v) { return isfinite(v[0]) && isfinite(v[1]) && isfinite(v[2]); }

static inline int pc_finite_sample(const veer_sample *s) {
    if (!isfinite(s->s) || !isfinite(s->sdot) || !isfinite(s->sddot)) return 0;
    if (!pc_finite3(s->pose) || !pc_finite3(s->twist_world) || !pc_finite3(s->twist_body) ||
        !pc_finite3(s->accel_world) || !pc_finite3(s->accel_body))
        return 0;
    for (int i = 0; i < s->module_count; i++) {
        const veer_module_setpoint *m = &s->modules[i];
        if (!isfinite(m->steer) || !isfinite(m->steer_rate) || !isfinite(m->wheel_rate) || !isfinite(m->wheel_accel))
            return 0;
    }
    return 1;
}

/* Samples plan every dt seconds and records the worst ratio to a limit,
 * including the steer angle and wheel rate differenced in time. */
static inline plan_check_result plan_check(const veer_plan *plan, const veer_drive_def *drive,
                                           const veer_limits *lim, double dt) {
    plan_check_result r;
    memset(&r, 0, sizeof r);
    int M = veer_plan_module_count(plan);
    double T = veer_plan_duration(plan);
    veer_sample prev = {0}, s;
    int have_prev = 0;
    long steps = (long)ceil(T / dt);
    for (long q = 0; q <= steps; q++) {
        double t = q * dt < T ? q * dt : T;
        if (veer_plan_sample(plan, t, &s) != VEER_OK || !pc_finite_sample(&s)) {
            r.nan_seen = 1;
            continue;
        }
        r.samples++;
        pc_note(&r, hypot(s.twist_world[0], s.twist_world[1]), lim->body_speed, "body_speed", -1, t);
        pc_note(&r, hypot(s.accel_world[0], s.accel_world[1]), lim->body_accel, "body_accel", -1, t);
        pc_note(&r, s.twist_world[2], lim->yaw_rate, "yaw_rate", -1, t);
        pc_note(&r, s.accel_world[2], lim->yaw_accel, "yaw_accel", -1, t);
        for (int i = 0; i < M; i++) {
            const veer_module_limits *ml = &lim->modules[i];
            pc_note(&r, s.modules[i].wheel_rate, ml->wheel_rate, "wheel_speed", i, t);
            pc_note(&r, s.modules[i].wheel_accel, ml->wheel_accel, "wheel_accel", i, t);
            if (drive->kind == VEER_DRIVE_STEERED) {
                pc_note(&r, s.modules[i].steer_rate, ml->steer_rate, "steer_rate", i, t);
                if (s.modules[i].steer > ml->steer_max + 1e-9 || s.modules[i].steer < ml->steer_min - 1e-9)
                    pc_note(&r, 2.0, 1.0, "steer_range", i, t);
            }
            if (have_prev && t > prev.t) {
                double h = t - prev.t;
                /* differenced in time: the angle itself must respect the rate */
                if (drive->kind == VEER_DRIVE_STEERED)
                    pc_note(&r, (s.modules[i].steer - prev.modules[i].steer) / h, ml->steer_rate * 1.0,
                            "steer_rate_differenced", i, t);
                pc_note(&r, (s.modules[i].wheel_rate - prev.modules[i].wheel_rate) / h, ml->wheel_accel,
                        "wheel_accel_differenced", i, t);
            }
        }
        prev = s;
        have_prev = 1;
    }
    return r;
}

/* Criterion assertion: every limit within tol (0.01 = 1 %), no NaN. */
#define assert_plan_within_limits(plan, drive, lim, tol)                                                     \
    do {                                                                                                     \
        plan_check_result pcr_ = plan_check((plan), (drive), (lim), 1e-3);                                   \
        cr_assert(!pcr_.nan_seen, "a sample had a NaN or failed");                                           \
        cr_assert(pcr_.samples > 0);                                                                         \
        cr_assert(pcr_.worst <= 1.0 + (tol), "limit %s exceeded: %.4f of its value at t = %.3f s",           \
                  pcr_.worst_name, pcr_.worst, pcr_.worst_t);                                                \
    } while (0)

#endif
