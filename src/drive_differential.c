/* Differential drive, two sides; skid steer through the skid factor chi >= 1.
 * Model of Siegwart & Nourbakhsh, Introduction to Autonomous Mobile Robots,
 * ch. 3, with the track widened to chi * track_width (ICR-based skid-steer
 * model): u_left = (vx - chi b wz) / r, u_right = (vx + chi b wz) / r, b half
 * the track. A differential drive cannot move sideways: the inverse ignores
 * vy (the planner refuses routes that need it) and the forward gives vy = 0.
 * SPDX-License-Identifier: MIT */
#include "internal.h"

veer_status veer__drive_differential_check(const veer_drive_def *drive, veer_diag *diag) {
    if (!veer__length_ok(drive->track_width))
        return VEER__DRIVE_FAIL(diag, VEER_ERR_VALUE, "differential track width must be in [1e-4, 1e3] m, got %g",
                                drive->track_width);
    if (!(veer__finite(drive->skid_factor) && drive->skid_factor >= 1.0))
        return VEER__DRIVE_FAIL(diag, VEER_ERR_VALUE, "differential skid factor must be finite and >= 1, got %g",
                                drive->skid_factor);
    return VEER_OK;
}

int veer__drive_differential_matrix(const veer_drive_def *drive, double J[VEER_MAX_MODULES][3]) {
    const double k = 1.0 / drive->wheel_radius;
    const double arm = 0.5 * drive->skid_factor * drive->track_width;
    J[0][0] = k;
    J[0][1] = 0.0;
    J[0][2] = -k * arm;
    J[1][0] = k;
    J[1][1] = 0.0;
    J[1][2] = k * arm;
    return 2;
}

void veer__drive_differential_forward(const veer_drive_def *drive, const double *wheel_rate, double twist[3]) {
    const double r = drive->wheel_radius;
    const double arm = 0.5 * drive->skid_factor * drive->track_width;
    twist[0] = 0.5 * r * (wheel_rate[0] + wheel_rate[1]);
    twist[1] = 0.0;
    twist[2] = 0.5 * r * (wheel_rate[1] - wheel_rate[0]) / arm;
}
