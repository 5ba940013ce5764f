/* Benchmark: plan a 20-waypoint route for a 4-module steered cart and print
 * the time per plan and per grid point, over grid sizes, so the solver's
 * O(N m) cost shows. Reference printed beside it: the method's authors
 * report 267 ms for a 100-point, 242-row problem in Python (Pham & Pham,
 * IEEE T-RO 2018). The route is invented (a zig-zag on a made-up lane).
 * SPDX-License-Identifier: MIT */
#define _POSIX_C_SOURCE 199309L
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>
#include <veer/veer.h>

static double now(void) {
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

int main(int argc, char **argv) {
    int reps = argc > 1 ? atoi(argv[1]) : 200;
    if (reps < 1) reps = 1;
    veer_drive_def d = veer_default_drive_def(VEER_DRIVE_STEERED);
    veer_limits lim = veer_default_limits();
    for (int i = 0; i < 4; i++) {
        lim.modules[i].wheel_rate = 30.0;
        lim.modules[i].wheel_accel = 40.0;
        lim.modules[i].steer_rate = 5.0;
    }
    lim.body_speed = 2.5;
    lim.body_accel = 2.0;
    lim.yaw_rate = 2.0;
    lim.yaw_accel = 4.0;
    veer_route r = veer_default_route(0.0, 0.0, atan2(2.0, 3.0)); /* facing the first waypoint */
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    leg.heading = VEER_HEADING_TANGENT;
    if (veer_route_add_leg(&r, &leg)) return 1;
    for (int w = 1; w <= 20; w++) {
        veer_waypoint wp = veer_default_waypoint(3.0 * w, (w % 2) ? 2.0 : -2.0);
        wp.stop = (w == 20);
        if (veer_route_add_waypoint(&r, &wp)) return 1;
    }
    printf("veer %s plan benchmark: 20-waypoint route, 4-module steered cart, %d plans per size\n",
           veer_version_string(), reps);
    printf("reference: 267 ms for a 100-point, 242-row problem (Python, reported by Pham & Pham 2018)\n\n");
    printf("%8s %12s %14s %12s\n", "grid", "ms/plan", "us/gridpoint", "duration s");
    const int sizes[] = {250, 1000, 4000, 16000};
    for (int z = 0; z < 4; z++) {
        veer_plan_options o = veer_default_plan_options();
        o.grid_points = sizes[z];
        int n = sizes[z] >= 4000 ? (reps / 10 > 0 ? reps / 10 : 1) : reps;
        double best = 1e9, dur = 0.0;
        int G = 0;
        for (int rep = 0; rep < n; rep++) {
            veer_plan *p = NULL;
            double t0 = now();
            veer_diag diag;
            veer_status st = veer_plan_create(&d, &lim, &r, &o, &p, &diag);
            double t1 = now();
            if (st != VEER_OK) {
                printf("planning failed: %s: %s\n", veer_status_name(st), diag.message);
                return 1;
            }
            if (t1 - t0 < best) best = t1 - t0;
            dur = veer_plan_duration(p);
            G = veer_plan_grid_count(p);
            veer_plan_destroy(p);
        }
        printf("%8d %12.3f %14.3f %12.3f\n", G, best * 1e3, best * 1e6 / G, dur);
    }
    printf("\n(best of the runs; target: under 1 ms per plan at 1000 grid points)\n");
    return 0;
}
