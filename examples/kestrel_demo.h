/* The demo scenario, shared by the demo program and the tests: an invented
 * range. Kestrel Flats training range, lane 4; the firing point is at
 * (0, -40) m. Target cart K4 (four steered modules, cabled: steer range
 * +-270 degrees) starts at the west end of the lane, crosses it sideways
 * while its target keeps facing the firing point, stops behind cover berm B
 * (x = 3..8 m, y = -2.5..-1.5 m) for two seconds, then pivots out about the
 * berm's marker post at (8.5, -0.5) m.
 * SPDX-License-Identifier: MIT */
#ifndef KESTREL_DEMO_H
#define KESTREL_DEMO_H

#include <math.h>
#include <veer/veer.h>

#define DEG (3.14159265358979323846 / 180.0)

#define KESTREL_TRY(call)                 \
    do {                                  \
        veer_status kestrel_st_ = (call); \
        if (kestrel_st_ != VEER_OK) return kestrel_st_; \
    } while (0)

static inline veer_status kestrel_demo(veer_drive_def *drive_out, veer_limits *lim_out, veer_route *route_out) {
    /* Cart K4: modules at the corners of a 0.7 m x 0.6 m frame, 0.1 m wheels. */
    veer_drive_def drive = veer_default_drive_def(VEER_DRIVE_STEERED);
    drive.module_count = 4;
    const double mx[4] = {0.35, 0.35, -0.35, -0.35}, my[4] = {0.30, -0.30, -0.30, 0.30};
    for (int i = 0; i < 4; i++) {
        drive.modules[i].x = mx[i];
        drive.modules[i].y = my[i];
    }
    drive.wheel_radius = 0.1;

    veer_limits lim = veer_default_limits();
    for (int i = 0; i < 4; i++) {
        lim.modules[i].wheel_rate = 25.0;  /* rad/s: 2.5 m/s at the tread */
        lim.modules[i].wheel_accel = 30.0; /* rad/s^2 */
        lim.modules[i].steer_rate = 4.0;   /* rad/s */
        lim.modules[i].steer_min = -270.0 * DEG;
        lim.modules[i].steer_max = 270.0 * DEG;
    }
    lim.body_speed = 2.2;
    lim.body_accel = 2.0;
    lim.yaw_rate = 1.5;
    lim.yaw_accel = 3.0;

    const double fire_x = 0.0, fire_y = -40.0;
    double x0 = -12.0, y0 = 0.5;
    veer_route route = veer_default_route(x0, y0, atan2(fire_y - y0, fire_x - x0));

    veer_leg cross = veer_default_leg(VEER_LEG_TRAVEL);
    cross.heading = VEER_HEADING_TOWARD;
    cross.toward_x = fire_x;
    cross.toward_y = fire_y;
    cross.corner_tolerance = 0.4;
    KESTREL_TRY(veer_route_add_leg(&route, &cross));
    veer_waypoint wp = veer_default_waypoint(-6.0, 2.0);
    KESTREL_TRY(veer_route_add_waypoint(&route, &wp));
    wp = veer_default_waypoint(1.0, 2.0);
    KESTREL_TRY(veer_route_add_waypoint(&route, &wp));
    wp = veer_default_waypoint(6.5, 0.0); /* behind the berm */
    wp.stop = 1;
    wp.dwell = 2.0;
    KESTREL_TRY(veer_route_add_waypoint(&route, &wp));

    veer_leg pivot = veer_default_leg(VEER_LEG_PIVOT);
    pivot.pivot_x = 8.5;
    pivot.pivot_y = -0.5;
    pivot.angle = -50.0 * DEG;
    KESTREL_TRY(veer_route_add_leg(&route, &pivot));

    *drive_out = drive;
    *lim_out = lim;
    *route_out = route;
    return VEER_OK;
}

#endif
