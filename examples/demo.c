/* Demo: an invented range scenario.
 *
 * Kestrel Flats training range, lane 4. The firing point is at (0, -40) m.
 * Target cart K4 (four steered modules, cabled: steer range +-270 degrees)
 * starts at the west end of the lane, crosses it sideways while its target
 * keeps facing the firing point, stops behind cover berm B (which spans
 * x = 3..8 m at y = -2.5..-1.5 m) for two seconds, then pivots out about the
 * berm's marker post at (8.5, -0.5) m.
 *
 * Prints the plan's duration, each leg's time, the share of the path each
 * limit binds, and peak module figures against their limits, sampled every
 * millisecond.
 *
 * CAUTION: veer's planner is not a safety-rated function. A hardware emergency
 * stop, the range's safety rules and its range safety officer always come
 * first; follow local codes and regulations.
 * SPDX-License-Identifier: MIT */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <veer/veer.h>
#include "kestrel_demo.h"

static void must(veer_status st, const char *what) {
    if (st != VEER_OK) {
        fprintf(stderr, "demo: %s failed: %s\n", what, veer_status_str(st));
        exit(1);
    }
}

int main(void) {
    veer_drive_def drive;
    veer_limits lim;
    veer_route route;
    must(kestrel_demo(&drive, &lim, &route), "scenario");
    veer_plan *plan = NULL;
    veer_diag diag;
    veer_status st = veer_plan_create(&drive, &lim, &route, NULL, &plan, &diag);
    if (st != VEER_OK) {
        char name[48];
        veer_limit_name(diag.limit, name, sizeof name);
        fprintf(stderr, "demo: planning failed: %s: %s (leg %d, s %.3f, limit %s)\n", veer_status_name(st),
                diag.message, diag.leg, diag.s, name);
        return 1;
    }

    printf("veer %s demo: Kestrel Flats range, lane 4, target cart K4 (4 steered modules)\n", veer_version_string());
    printf("CAUTION: not a safety-rated function; the hardware emergency stop, the range's safety rules\n"
           "and its safety officer always come first.\n\n");
    printf("plan duration  %.3f s over %.2f path units, %d grid points\n", veer_plan_duration(plan),
           veer_plan_length(plan), veer_plan_grid_count(plan));
    static const char *leg_names[] = {"cross lane, facing firing point", "pivot out about marker post"};
    for (int l = 0; l < veer_plan_leg_count(plan); l++) {
        veer_leg_summary ls;
        must(veer_plan_leg(plan, l, &ls), "leg");
        printf("  leg %d %-34s %7.3f s (re-steer %.3f s, dwell %.3f s)\n", l, leg_names[l], ls.duration,
               ls.resteer_time, ls.dwell_time);
    }

    /* Share of the path each limit binds, weighted by path length. */
    enum { MAXN = 64 };
    char names[MAXN][48];
    double share[MAXN] = {0};
    int nn = 0, G = veer_plan_grid_count(plan);
    double total = 0.0;
    for (int k = 0; k + 1 < G; k++) {
        double s0, s1, v;
        veer_limit_id id, id1;
        must(veer_plan_grid(plan, k, &s0, &v, &id), "grid");
        must(veer_plan_grid(plan, k + 1, &s1, &v, &id1), "grid");
        double w = s1 - s0;
        if (w <= 0.0) continue;
        total += w;
        char name[48];
        veer_limit_name(id, name, sizeof name);
        int f = 0;
        while (f < nn && strcmp(names[f], name)) f++;
        if (f == nn && nn < MAXN) snprintf(names[nn++], sizeof names[0], "%s", name);
        if (f < MAXN) share[f] += w;
    }
    printf("\nbinding limit share of the path:\n");
    for (int f = 0; f < nn; f++) printf("  %-16s %5.1f %%\n", names[f], 100.0 * share[f] / total);

    /* Peaks, sampled every millisecond. */
    double pk_rate[4] = {0}, pk_acc[4] = {0}, pk_steer[4] = {0}, pk_speed = 0, pk_acc_body = 0;
    double lo[4] = {1e9, 1e9, 1e9, 1e9}, hi[4] = {-1e9, -1e9, -1e9, -1e9};
    for (double t = 0.0; t <= veer_plan_duration(plan); t += 1e-3) {
        veer_sample s;
        must(veer_plan_sample(plan, t, &s), "sample");
        pk_speed = fmax(pk_speed, hypot(s.twist_world[0], s.twist_world[1]));
        pk_acc_body = fmax(pk_acc_body, hypot(s.accel_world[0], s.accel_world[1]));
        for (int i = 0; i < 4; i++) {
            pk_rate[i] = fmax(pk_rate[i], fabs(s.modules[i].wheel_rate));
            pk_acc[i] = fmax(pk_acc[i], fabs(s.modules[i].wheel_accel));
            pk_steer[i] = fmax(pk_steer[i], fabs(s.modules[i].steer_rate));
            lo[i] = fmin(lo[i], s.modules[i].steer);
            hi[i] = fmax(hi[i], s.modules[i].steer);
        }
    }
    printf("\npeaks sampled every 1 ms (limit in brackets):\n");
    printf("  body speed %.3f m/s [%.3f]   body accel %.3f m/s^2 [%.3f]\n", pk_speed, lim.body_speed, pk_acc_body,
           lim.body_accel);
    printf("  module  wheel rate rad/s    wheel accel rad/s^2  steer rate rad/s   steer range used deg\n");
    for (int i = 0; i < 4; i++)
        printf("  %d       %6.2f [%5.1f]      %6.2f [%5.1f]       %5.2f [%4.1f]       %7.1f .. %6.1f [+-270]\n", i,
               pk_rate[i], lim.modules[i].wheel_rate, pk_acc[i], lim.modules[i].wheel_accel, pk_steer[i],
               lim.modules[i].steer_rate, lo[i] / DEG, hi[i] / DEG);
    double fastest = veer_plan_duration(plan);
    veer_plan_destroy(plan);

    /* What gentler or degraded carts cost on the same route. */
    printf("\nvariants of the same route:\n");
    veer_limits soft = lim;
    soft.body_jerk = 4.0; /* m/s^3 */
    for (int i = 0; i < 4; i++) soft.modules[i].wheel_jerk = 150.0; /* rad/s^3 */
    veer_drive_def lame = drive;
    lame.modules[1].out = 1; /* front-right module lifted */
    veer_plan_options timed = veer_default_plan_options();
    timed.duration_target = ceil(fastest) + 2.0;
    struct {
        const char *what;
        const veer_drive_def *d;
        const veer_limits *l;
        const veer_plan_options *o;
    } variants[] = {
        {"jerk limits 4 m/s^3 body, 150 rad/s^3 wheels", &drive, &soft, NULL},
        {"front-right module out of service", &lame, &lim, NULL},
        {"duration target (whole seconds + 2)", &drive, &lim, &timed},
    };
    for (size_t v = 0; v < sizeof variants / sizeof variants[0]; v++) {
        veer_plan *p = NULL;
        st = veer_plan_create(variants[v].d, variants[v].l, &route, variants[v].o, &p, &diag);
        if (st != VEER_OK) {
            printf("  %-46s refused: %s\n", variants[v].what, diag.message);
            continue;
        }
        veer_check_report rep;
        must(veer_plan_check_limits(p, 1e-3, &rep), "check");
        printf("  %-46s %7.3f s (%+.3f s), worst sampled limit use %.1f %%\n", variants[v].what,
               veer_plan_duration(p), veer_plan_duration(p) - fastest, 100.0 * rep.worst);
        veer_plan_destroy(p);
    }
    return 0;
}
