/* A program outside the veer tree, built against the installed package only
 * (headers from <prefix>/include, the library from <prefix>/lib). It plans a
 * short route for the default four-module steered cart, prints the plan's
 * duration and the module setpoints halfway through, and exits non-zero if
 * anything fails. tests/run.sh builds it both ways:
 *
 *   CMake:      find_package(veer) and target veer::veer (see CMakeLists.txt)
 *   pkg-config: cc -std=c11 main.c $(pkg-config --cflags --libs veer) \
 *                  -Wl,-rpath,$(pkg-config --variable=libdir veer) -o consumer
 *
 * The same code is the README's API example.
 * SPDX-License-Identifier: MIT */
#include <stdio.h>
#include <veer/veer.h>

static int failed(const char *what, veer_status st, const veer_diag *diag) {
    fprintf(stderr, "%s: %s (%s)%s%s\n", what, veer_status_name(st), veer_status_str(st),
            diag && diag->message[0] ? ": " : "", diag ? diag->message : "");
    return 1;
}

int main(void) {
    if (veer_version() != VEER_VERSION_HEX) {
        fprintf(stderr, "header %s and library %s differ\n", VEER_VERSION_STRING, veer_version_string());
        return 1;
    }

    /* The cart: four steered modules at (+-0.3, +-0.3) m, 0.1 m wheels. */
    veer_drive_def drive = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits limits = veer_default_limits();
    for (int i = 0; i < veer_drive_module_count(&drive); i++) {
        limits.modules[i].wheel_rate = 20.0;  /* rad/s: 2 m/s of tread */
        limits.modules[i].wheel_accel = 10.0; /* rad/s^2: 1 m/s^2 of tread */
        limits.modules[i].steer_rate = 3.0;   /* rad/s */
    }
    limits.body_speed = 1.5; /* m/s */
    limits.body_accel = 1.0; /* m/s^2 */

    /* The route: from (0, 0) facing +x, travel through a rounded corner at
     * (3, 0) to a stop at (3, 2) keeping the heading, then spin to face +y. */
    veer_route route = veer_default_route(0.0, 0.0, 0.0);
    veer_leg travel = veer_default_leg(VEER_LEG_TRAVEL);
    travel.heading = VEER_HEADING_HOLD;
    veer_waypoint corner = veer_default_waypoint(3.0, 0.0);
    veer_waypoint end = veer_default_waypoint(3.0, 2.0);
    veer_leg spin = veer_default_leg(VEER_LEG_SPIN);
    spin.yaw = 1.5707963267948966; /* rad */

    veer_status st;
    if ((st = veer_route_add_leg(&route, &travel)) != VEER_OK ||
        (st = veer_route_add_waypoint(&route, &corner)) != VEER_OK ||
        (st = veer_route_add_waypoint(&route, &end)) != VEER_OK || (st = veer_route_add_leg(&route, &spin)) != VEER_OK)
        return failed("route", st, NULL);

    veer_plan *plan = NULL;
    veer_diag diag;
    st = veer_plan_create(&drive, &limits, &route, NULL, &plan, &diag);
    if (st != VEER_OK) return failed("veer_plan_create", st, &diag);

    double duration = veer_plan_duration(plan);
    printf("veer %s\n", veer_version_string());
    printf("duration %.3f s\n", duration);

    veer_sample sample;
    st = veer_plan_sample(plan, 0.5 * duration, &sample);
    if (st != VEER_OK) {
        veer_plan_destroy(plan);
        return failed("veer_plan_sample", st, NULL);
    }
    printf("at t = %.3f s: pose (%.3f m, %.3f m, %.3f rad)\n", sample.t, sample.pose[0], sample.pose[1],
           sample.pose[2]);
    for (int i = 0; i < sample.module_count; i++)
        printf("  module %d: steer %+.3f rad, wheel %+.3f rad/s\n", i, sample.modules[i].steer,
               sample.modules[i].wheel_rate);
    veer_plan_destroy(plan);
    return duration > 0.0 ? 0 : 1;
}
