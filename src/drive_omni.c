/* Omni drive: wheel i at (x_i, y_i) pushes along drive_angle b_i, its free
 * rollers let it slide across. Rigid-body kinematics projected on the push
 * direction (Lynch & Park, Modern Robotics, 13.2, with gamma = 0):
 *   u_i = (1/r) [ cos b_i (vx - y_i wz) + sin b_i (vy + x_i wz) ].
 * SPDX-License-Identifier: MIT */
#include "internal.h"

/* Wheels closer than this (m) to their centroid all count as one point. */
#define ONE_POINT 1e-6
/* Largest accepted condition number (Frobenius) of the scaled normal matrix. */
#define MAX_CONDITION 1e8

static double frob2(const double M[3][3]) {
    double s = 0.0;
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) s += M[i][j] * M[i][j];
    return s;
}

veer_status veer__drive_omni_check(const veer_drive_def *drive, veer_diag *diag) {
    const int n = drive->module_count;
    double cx = 0.0, cy = 0.0;
    for (int i = 0; i < n; i++) {
        const veer_module_def *m = &drive->modules[i];
        if (!veer__offset_ok(m->x) || !veer__offset_ok(m->y))
            return VEER__DRIVE_FAIL(diag, VEER_ERR_VALUE, "module %d: position (%g, %g) m is not finite or beyond 1e3 m", i, m->x,
                                    m->y);
        if (!veer__finite(m->drive_angle))
            return VEER__DRIVE_FAIL(diag, VEER_ERR_VALUE, "module %d: drive angle %g rad is not finite", i,
                                    m->drive_angle);
        cx += m->x / n;
        cy += m->y / n;
    }
    int parallel = 1;
    for (int i = 1; i < n; i++)
        if (fabs(sin(drive->modules[i].drive_angle - drive->modules[0].drive_angle)) > 1e-6) parallel = 0;
    if (parallel)
        return VEER__DRIVE_FAIL(diag, VEER_ERR_GEOMETRY,
                                "all %d omni wheels push in parallel (module 0 along %g rad): the drive cannot "
                                "move across them",
                                n, drive->modules[0].drive_angle);
    double L = 0.0;
    for (int i = 0; i < n; i++) {
        const double d = hypot(drive->modules[i].x - cx, drive->modules[i].y - cy);
        if (d > L) L = d;
    }
    if (L < ONE_POINT)
        return VEER__DRIVE_FAIL(diag, VEER_ERR_GEOMETRY,
                                "all %d omni wheels are at one point (%g, %g) m: the drive cannot tell a turn "
                                "about that point from standing still",
                                n, cx, cy);
    /* Rank test on the wheel matrix about the centroid (rank does not depend
     * on the body origin), its turn column scaled by L so all columns are
     * speeds: condition of N = A^T A through its adjugate. */
    double N[3][3] = {{0.0}};
    for (int i = 0; i < n; i++) {
        const veer_module_def *m = &drive->modules[i];
        const double c = cos(m->drive_angle), s = sin(m->drive_angle);
        const double a[3] = {c, s, ((m->x - cx) * s - (m->y - cy) * c) / L};
        for (int r = 0; r < 3; r++)
            for (int k = 0; k < 3; k++) N[r][k] += a[r] * a[k];
    }
    double adj[3][3];
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            const int i1 = (i + 1) % 3, i2 = (i + 2) % 3, j1 = (j + 1) % 3, j2 = (j + 2) % 3;
            adj[j][i] = N[i1][j1] * N[i2][j2] - N[i1][j2] * N[i2][j1];
        }
    const double det = N[0][0] * adj[0][0] + N[0][1] * adj[1][0] + N[0][2] * adj[2][0];
    const double cond = det > 0.0 ? sqrt(frob2((const double(*)[3])N) * frob2((const double(*)[3])adj)) / det
                                  : HUGE_VAL;
    if (!(cond <= MAX_CONDITION))
        return VEER__DRIVE_FAIL(diag, VEER_ERR_GEOMETRY,
                                "the %d omni wheels' push lines leave a body motion unmeasured (wheel matrix "
                                "rank-deficient, condition %.3g): e.g. all push lines meet in one point",
                                n, cond);
    return VEER_OK;
}

int veer__drive_omni_matrix(const veer_drive_def *drive, double J[VEER_MAX_MODULES][3]) {
    const double k = 1.0 / drive->wheel_radius;
    for (int i = 0; i < drive->module_count; i++) {
        const veer_module_def *m = &drive->modules[i];
        const double c = cos(m->drive_angle), s = sin(m->drive_angle);
        J[i][0] = k * c;
        J[i][1] = k * s;
        J[i][2] = k * (m->x * s - m->y * c);
    }
    return drive->module_count;
}
