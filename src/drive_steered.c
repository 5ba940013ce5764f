/* Steered modules: each module points its wheel along its own velocity.
 * Rigid-body kinematics: module i at body offset r_i moves with
 * v_i = v + w x r_i = (vx - wz*y_i, vy + wz*x_i).
 * SPDX-License-Identifier: MIT */
#include "internal.h"

/* Below this module speed (m/s) the direction is meaningless: keep the steer. */
#define STAND_SPEED 1e-9
/* Modules closer than this (m) count as coincident: almost surely a typing mistake. */
#define COINCIDENT 1e-6

veer_status veer__drive_steered_check(const veer_drive_def *drive, veer_diag *diag) {
    int n = drive->module_count;
    for (int i = 0; i < n; i++) {
        const veer_module_def *m = &drive->modules[i];
        if (!veer__offset_ok(m->x) || !veer__offset_ok(m->y))
            return VEER__DRIVE_FAIL(diag, VEER_ERR_VALUE, "module %d: position (%g, %g) m is not finite or beyond 1e3 m", i, m->x,
                                    m->y);
    }
    for (int i = 0; i < n; i++)
        for (int j = i + 1; j < n; j++) {
            const veer_module_def *a = &drive->modules[i], *b = &drive->modules[j];
            const double dx = a->x - b->x, dy = a->y - b->y;
            if (dx * dx + dy * dy < COINCIDENT * COINCIDENT)
                return VEER__DRIVE_FAIL(diag, VEER_ERR_GEOMETRY,
                                        "modules %d and %d are both at (%g, %g) m; steered modules need distinct "
                                        "positions",
                                        i, j, a->x, a->y);
        }
    return VEER_OK;
}

void veer__drive_steered_inverse(const veer_drive_def *drive, const double twist[3], const double *prev_steer,
                                 double *steer, double *wheel_rate) {
    const double vx = twist[0], vy = twist[1], wz = twist[2], r = drive->wheel_radius;
    for (int i = 0; i < drive->module_count; i++) {
        const double ux = vx - wz * drive->modules[i].y;
        const double uy = vy + wz * drive->modules[i].x;
        const double speed = hypot(ux, uy);
        if (!(speed >= STAND_SPEED) || drive->modules[i].out) { /* standing, or out of service: keep the angle */
            steer[i] = prev_steer ? prev_steer[i] : 0.0;
            wheel_rate[i] = 0.0;
            continue;
        }
        double phi = atan2(uy, ux);
        if (!prev_steer) {
            if (phi <= -VEER_PI) phi = VEER_PI; /* atan2(-0, -x) = -pi; report (-pi, pi] */
            steer[i] = phi;
            wheel_rate[i] = speed / r;
            continue;
        }
        /* Representative of phi modulo pi nearest to the previous steer (no
         * wrapping): prev + remainder(phi - prev, pi). An odd quotient means the
         * wheel points backwards, so it turns backwards. */
        int q;
        const double d = remquo(phi - prev_steer[i], VEER_PI, &q);
        steer[i] = prev_steer[i] + d;
        wheel_rate[i] = (q % 2 != 0) ? -speed / r : speed / r;
    }
}

int veer__drive_steered_forward(const veer_drive_def *drive, const double *steer, const double *wheel_rate,
                                double twist[3]) {
    /* Least squares over the 2n equations u_i = (vx - wz*y_i, vy + wz*x_i):
     * normal equations A^T A t = A^T u with rows (1, 0, -y_i) and (0, 1, x_i). */
    double N[3][3] = {{0.0}}, b[3] = {0.0, 0.0, 0.0};
    const double r = drive->wheel_radius;
    for (int i = 0; i < drive->module_count; i++) {
        if (drive->modules[i].out) continue;
        const double x = drive->modules[i].x, y = drive->modules[i].y;
        const double tread = wheel_rate[i] * r;
        const double ux = tread * cos(steer[i]), uy = tread * sin(steer[i]);
        N[0][0] += 1.0;
        N[1][1] += 1.0;
        N[0][2] -= y;
        N[1][2] += x;
        N[2][2] += x * x + y * y;
        b[0] += ux;
        b[1] += uy;
        b[2] += x * uy - y * ux;
    }
    N[2][0] = N[0][2];
    N[2][1] = N[1][2];
    return veer__drive_solve3((const double(*)[3])N, b, twist);
}
