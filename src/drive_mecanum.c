/* Mecanum drive: four wheels with rollers at roller_angle to the wheel plane.
 * Lynch & Park, Modern Robotics, 13.2: with the wheels driving along body x,
 *   u_i = (1/r) [ (vx - y_i wz) + tan(gamma_i) (vy + x_i wz) ],
 * wheels 0 front-left (l, w), 1 front-right (l, -w), 2 rear-right (-l, -w),
 * 3 rear-left (-l, w), gamma = (-a, +a, -a, +a). For a = pi/4 this is the
 * book's H(0) = (1/r)[[-l-w, 1, -1], [l+w, 1, 1], [l+w, 1, -1], [-l-w, 1, 1]]
 * acting on (wz, vx, vy).
 * SPDX-License-Identifier: MIT */
#include "internal.h"

#define ROLLER_MIN (VEER_PI / 180.0)        /* 1 degree */
#define ROLLER_MAX (89.0 * VEER_PI / 180.0) /* 89 degrees */

veer_status veer__drive_mecanum_check(const veer_drive_def *drive, veer_diag *diag) {
    if (!veer__length_ok(drive->half_wheelbase))
        return VEER__DRIVE_FAIL(diag, VEER_ERR_VALUE, "mecanum half wheelbase must be in [1e-4, 1e3] m, got %g",
                                drive->half_wheelbase);
    if (!veer__length_ok(drive->half_track))
        return VEER__DRIVE_FAIL(diag, VEER_ERR_VALUE, "mecanum half track must be in [1e-4, 1e3] m, got %g",
                                drive->half_track);
    if (!(drive->roller_angle >= ROLLER_MIN && drive->roller_angle <= ROLLER_MAX))
        return VEER__DRIVE_FAIL(diag, VEER_ERR_VALUE,
                                "mecanum roller angle must be between 1 and 89 degrees (%.6f..%.6f rad), got %g rad",
                                ROLLER_MIN, ROLLER_MAX, drive->roller_angle);
    return VEER_OK;
}

int veer__drive_mecanum_matrix(const veer_drive_def *drive, double J[VEER_MAX_MODULES][3]) {
    static const double sx[4] = {1.0, 1.0, -1.0, -1.0}, sy[4] = {1.0, -1.0, -1.0, 1.0};
    static const double sg[4] = {-1.0, 1.0, -1.0, 1.0};
    const double l = drive->half_wheelbase, w = drive->half_track, t = tan(drive->roller_angle);
    const double k = 1.0 / drive->wheel_radius;
    for (int i = 0; i < 4; i++) {
        const double x = sx[i] * l, y = sy[i] * w, tg = sg[i] * t;
        J[i][0] = k;
        J[i][1] = k * tg;
        J[i][2] = k * (tg * x - y);
    }
    return 4;
}
