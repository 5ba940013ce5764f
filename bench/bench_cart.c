/* Benchmarks of the C library, printed as markdown tables (bench/run.sh runs
 * them and bench/bench.py adds the reference comparisons).
 *
 *   bench_cart plan REQUEST.pb REPS   time veer_plan_create on a PlanRequest's structs (best and median)
 *   bench_cart scaling                grid size, route length and module count
 *   bench_cart once N                 one plan of the demo at N grid points (run.sh counts its instructions)
 *   bench_cart player                 player step and plan sample time per control tick
 *   bench_cart stack                  stack high-water mark of the cart-side loop (arming, running, braking)
 *   bench_cart wire                   encoded plan sizes against the dense 50 Hz stream, airtime
 *   bench_cart request OUT.pb         writes the 5-minute scenario's PlanRequest (for bench.py)
 *
 * Times are wall-clock (CLOCK_MONOTONIC) of the calls alone: the request is
 * decoded into structs before the clock starts. The scenarios are invented:
 * the demo (examples/kestrel_demo.h) and a 5-minute patrol on a made-up lane.
 * SPDX-License-Identifier: MIT */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <veer/link.h>
#include <veer/player.h>
#include <veer/veer.h>
#include <veer/wire.h>
#include "kestrel_demo.h"
#include "wire_internal.h"

static double now(void) {
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static int cmp_double(const void *a, const void *b) {
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y;
}

#define DIE(...)                          \
    do {                                  \
        fprintf(stderr, __VA_ARGS__);     \
        fputc('\n', stderr);              \
        exit(1);                          \
    } while (0)

/* ---- scenarios ---------------------------------------------------------- */

/* Harrow Ridge range, lane 7 (invented): cart H7, four steered modules,
 * patrols the lane for about five minutes: a serpentine of passes facing the
 * firing point at (0, -60) m, stops behind three berms with dwells, a pivot
 * round each berm's post and a spin back to the lane. */
static void patrol(veer_drive_def *d, veer_limits *l, veer_route *r) {
    if (kestrel_demo(d, l, r) != VEER_OK) DIE("demo scenario");
    veer_route rt = veer_default_route(-40.0, 0.0, atan2(-60.0, 40.0));
    for (int lap = 0; lap < 6; lap++) {
        double y = (lap % 3) * 3.0;
        veer_leg pass = veer_default_leg(VEER_LEG_TRAVEL);
        pass.heading = VEER_HEADING_TOWARD;
        pass.toward_x = 0.0;
        pass.toward_y = -60.0;
        pass.corner_tolerance = 0.5;
        if (veer_route_add_leg(&rt, &pass)) DIE("patrol leg");
        double dir = lap % 2 ? -1.0 : 1.0;
        for (int k = 1; k <= 5; k++) {
            veer_waypoint w = veer_default_waypoint(-40.0 * dir + dir * 16.0 * k, y + (k % 2 ? 1.5 : -1.5));
            if (k == 5) {
                w.stop = 1;
                w.dwell = 6.0;
            }
            if (veer_route_add_waypoint(&rt, &w)) DIE("patrol waypoint");
        }
        veer_leg pv = veer_default_leg(VEER_LEG_PIVOT);
        pv.pivot_x = rt.waypoints[rt.waypoint_count - 1].x + dir * 1.5;
        pv.pivot_y = rt.waypoints[rt.waypoint_count - 1].y + 1.0;
        pv.angle = dir * 0.6;
        pv.dwell = 2.0;
        if (veer_route_add_leg(&rt, &pv)) DIE("patrol pivot");
        /* Where the pivot leaves the cart, and the spin to face the firing point from there. */
        const veer_waypoint *last = &rt.waypoints[rt.waypoint_count - 1];
        double ox = last->x - pv.pivot_x, oy = last->y - pv.pivot_y, ca = cos(pv.angle), sa = sin(pv.angle);
        double px = pv.pivot_x + ca * ox - sa * oy, py = pv.pivot_y + sa * ox + ca * oy;
        veer_leg sp = veer_default_leg(VEER_LEG_SPIN);
        sp.yaw = atan2(-60.0 - py, 0.0 - px);
        if (veer_route_add_leg(&rt, &sp)) DIE("patrol spin");
    }
    *r = rt;
}

static veer_plan *make_plan(const veer_drive_def *d, const veer_limits *l, const veer_route *r, int grid) {
    veer_plan_options o = veer_default_plan_options();
    if (grid > 0) o.grid_points = grid;
    veer_plan *p = NULL;
    veer_diag diag;
    veer_status st = veer_plan_create(d, l, r, &o, &p, &diag);
    if (st != VEER_OK) DIE("plan: %s: %s", veer_status_name(st), diag.message);
    return p;
}

/* Acceleration rows (u-rows) the planner builds at the plan's grid points,
 * plus one folded speed bound per point. */
static long count_rows(const veer_plan *plan) {
    static veer_row rows[VEER_MAX_POINT_ROWS];
    long total = 0;
    for (int j = 0; j < plan->segment_count; j++)
        for (int k = plan->segs[j].k0; k <= plan->segs[j].k1; k++) {
            veer_point_kin pk;
            veer__point_kin(&plan->path, j, plan->s[k], &pk);
            double xmax = INFINITY;
            veer_limit_id id;
            int n = veer__point_rows(&plan->rows, &pk, plan->x[k], rows, &xmax, &id);
            total += (n > 0 ? n : 0) + 1;
        }
    return total;
}

typedef struct {
    double best, median;
    int grid;
    long rows;
    double duration;
} plan_time;

static plan_time time_plans(const veer_drive_def *d, const veer_limits *l, const veer_route *r,
                            const veer_plan_options *o, int reps, double budget) {
    plan_time pt = {0};
    double *t = malloc((size_t)reps * sizeof *t);
    int n = 0;
    double start = now();
    for (; n < reps && (n < 3 || now() - start < budget); n++) {
        veer_plan *p = NULL;
        veer_diag diag;
        double t0 = now();
        veer_status st = veer_plan_create(d, l, r, o, &p, &diag);
        t[n] = now() - t0;
        if (st != VEER_OK) DIE("plan: %s: %s", veer_status_name(st), diag.message);
        if (n == 0) {
            pt.grid = veer_plan_grid_count(p);
            pt.rows = count_rows(p);
            pt.duration = veer_plan_duration(p);
        }
        veer_plan_destroy(p);
    }
    qsort(t, (size_t)n, sizeof *t, cmp_double);
    pt.best = t[0];
    pt.median = t[n / 2];
    free(t);
    return pt;
}

/* Times the demo route at several grid sizes in turns (one plan of each
 * size per round), so that every size sees the same spells of a busy
 * machine; at least 3 rounds, then until reps rounds or the budget (s). */
static void time_sizes(const veer_drive_def *d, const veer_limits *l, const veer_route *r, const int *sizes,
                       int count, int reps, double budget, plan_time *out) {
    double *t = malloc((size_t)reps * (size_t)count * sizeof *t);
    if (!t) DIE("out of memory");
    int n = 0;
    double start = now();
    for (; n < reps && (n < 3 || now() - start < budget); n++)
        for (int z = 0; z < count; z++) {
            veer_plan_options o = veer_default_plan_options();
            o.grid_points = sizes[z];
            veer_plan *p = NULL;
            veer_diag diag;
            double t0 = now();
            veer_status st = veer_plan_create(d, l, r, &o, &p, &diag);
            t[(size_t)z * (size_t)reps + (size_t)n] = now() - t0;
            if (st != VEER_OK) DIE("plan: %s: %s", veer_status_name(st), diag.message);
            if (n == 0) {
                out[z].grid = veer_plan_grid_count(p);
                out[z].rows = count_rows(p);
                out[z].duration = veer_plan_duration(p);
            }
            veer_plan_destroy(p);
        }
    for (int z = 0; z < count; z++) {
        double *tz = t + (size_t)z * (size_t)reps;
        qsort(tz, (size_t)n, sizeof *tz, cmp_double);
        out[z].best = tz[0];
        out[z].median = tz[n / 2];
    }
    free(t);
}

/* One plan of the demo route at N grid points (for instruction counts under
 * callgrind: bench/run.sh). */
static int cmd_once(int grid_points) {
    veer_drive_def d;
    veer_limits l;
    veer_route r;
    if (kestrel_demo(&d, &l, &r) != VEER_OK) DIE("demo");
    veer_plan_options o = veer_default_plan_options();
    o.grid_points = grid_points;
    veer_plan *p = NULL;
    veer_diag diag;
    if (veer_plan_create(&d, &l, &r, &o, &p, &diag) != VEER_OK) DIE("plan: %s", diag.message);
    printf("grid %d\n", veer_plan_grid_count(p));
    veer_plan_destroy(p);
    return 0;
}

/* ---- plan: a PlanRequest file ------------------------------------------- */

static veer_v1_PlanRequest req;

static int cmd_plan(const char *path, int reps) {
    static uint8_t buf[1 << 20];
    FILE *f = fopen(path, "rb");
    if (!f) DIE("cannot open %s", path);
    size_t n = fread(buf, 1, sizeof buf, f);
    fclose(f);
    veer_diag diag;
    veer_drive_def d;
    veer_limits l;
    veer_route r;
    veer_plan_options o = veer_default_plan_options();
    if (veer__wire_decode(veer_v1_PlanRequest_fields, &req, buf, n, "request", &diag) ||
        veer__wire_drive_from_pb(&req.drive, &d, &diag) ||
        veer__wire_limits_from_pb(&req.limits, veer_drive_module_count(&d), &l, &diag) ||
        veer__wire_route_from_pb(&req.route, veer_drive_module_count(&d), &r, &diag) ||
        (req.has_options && veer__wire_options_from_pb(&req.options, &o, &diag)))
        DIE("%s: %s", path, diag.message);
    plan_time pt = time_plans(&d, &l, &r, &o, reps, 20.0);
    printf("grid %d rows %ld best_s %.9f median_s %.9f duration_s %.9f\n", pt.grid, pt.rows, pt.best, pt.median,
           pt.duration);
    return 0;
}

/* ---- scaling ------------------------------------------------------------ */

static void zigzag(int waypoints, veer_route *r) {
    *r = veer_default_route(0.0, 0.0, atan2(2.0, 3.0));
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    leg.heading = VEER_HEADING_TANGENT;
    if (veer_route_add_leg(r, &leg)) DIE("zigzag");
    for (int w = 1; w <= waypoints; w++) {
        veer_waypoint wp = veer_default_waypoint(3.0 * w, (w % 2) ? 2.0 : -2.0);
        wp.stop = w == waypoints;
        if (veer_route_add_waypoint(r, &wp)) DIE("zigzag waypoint");
    }
}

static void steered_cart(int modules, veer_drive_def *d, veer_limits *l) {
    *d = veer_default_drive_def(VEER_DRIVE_STEERED);
    d->module_count = modules;
    *l = veer_default_limits();
    for (int i = 0; i < modules; i++) {
        double a = 2.0 * 3.14159265358979323846 * (i + 0.5) / modules;
        d->modules[i].x = 0.45 * cos(a);
        d->modules[i].y = 0.35 * sin(a);
        l->modules[i].wheel_rate = 30.0;
        l->modules[i].wheel_accel = 40.0;
        l->modules[i].steer_rate = 5.0;
    }
    l->body_speed = 2.5;
    l->body_accel = 2.0;
    l->yaw_rate = 2.0;
    l->yaw_accel = 4.0;
}

static int cmd_scaling(void) {
    veer_drive_def d;
    veer_limits l;
    veer_route r;
    printf("### Planning time against grid size (demo route, 4-module steered cart)\n\n");
    printf("The sizes are timed in turns, one plan of each per round, so that all see the same spells of a busy "
           "machine. Best of the rounds (the run least disturbed), median beside it; per point, per row and the "
           "cost ratio from the best.\n\n");
    printf("| grid points asked | grid points | rows | best ms | median ms | us per grid point | ns per row | "
           "cost / cost at 1000 |\n|---|---|---|---|---|---|---|---|\n");
    if (kestrel_demo(&d, &l, &r) != VEER_OK) DIE("demo");
    const int sizes[] = {250, 1000, 4000, 16000, 32000};
    plan_time pts[5];
    time_sizes(&d, &l, &r, sizes, 5, 41, 30.0, pts);
    for (int z = 0; z < 5; z++)
        printf("| %d | %d | %ld | %.3f | %.3f | %.3f | %.2f | %.1f (%.2gx the points) |\n", sizes[z], pts[z].grid,
               pts[z].rows, pts[z].best * 1e3, pts[z].median * 1e3, pts[z].best * 1e6 / pts[z].grid,
               pts[z].best * 1e9 / (double)pts[z].rows, pts[z].best / pts[1].best, (double)pts[z].grid / pts[1].grid);
    printf("\nsummary scale_16000_over_1000 %.2f (medians: %.2f)\n", pts[3].best / pts[1].best,
           pts[3].median / pts[1].median);

    printf("\n### Planning time against route length (zig-zag, tangent heading, 4 modules)\n\n");
    printf("| waypoints | path length m | grid points | rows | best ms | median ms | us per grid point | ns per row |\n"
           "|---|---|---|---|---|---|---|---|\n");
    steered_cart(4, &d, &l);
    const int wps[] = {4, 8, 16, 32, 64};
    for (int z = 0; z < 5; z++) {
        zigzag(wps[z], &r);
        veer_plan_options o = veer_default_plan_options();
        o.grid_points = 60 * wps[z]; /* grid grows with the route: constant spacing */
        plan_time pt = time_plans(&d, &l, &r, &o, 51, 20.0);
        veer_plan *p = make_plan(&d, &l, &r, o.grid_points);
        printf("| %d | %.1f | %d | %ld | %.3f | %.3f | %.3f | %.2f |\n", wps[z], veer_plan_length(p), pt.grid, pt.rows,
               pt.best * 1e3, pt.median * 1e3, pt.best * 1e6 / pt.grid, pt.best * 1e9 / (double)pt.rows);
        veer_plan_destroy(p);
    }

    printf("\n### Planning time against module count (demo route, steered, 1000 grid points)\n\n");
    printf("| modules | rows per grid point | best ms | median ms | us per grid point | ns per row |\n"
           "|---|---|---|---|---|---|\n");
    veer_drive_def dd;
    veer_limits ll;
    if (kestrel_demo(&dd, &ll, &r) != VEER_OK) DIE("demo");
    for (int m = 2; m <= 8; m += 2) {
        steered_cart(m, &d, &l);
        veer_plan_options o = veer_default_plan_options();
        plan_time pt = time_plans(&d, &l, &r, &o, 101, 20.0);
        printf("| %d | %.1f | %.3f | %.3f | %.3f | %.2f |\n", m, (double)pt.rows / pt.grid, pt.best * 1e3,
               pt.median * 1e3, pt.best * 1e6 / pt.grid, pt.best * 1e9 / (double)pt.rows);
    }
    return 0;
}

/* ---- the cart: player and link ------------------------------------------ */

typedef struct {
    uint8_t frames[160][VEER_LINK_FRAME_MAX];
    size_t sizes[160];
    int count;
    size_t plan_size, frame_bytes;
} sealed_plan;

static veer_player_def cart_def(const veer_drive_def *d, const veer_limits *l) {
    veer_player_def def = veer_default_player_def();
    def.link.cart = 7;
    for (int i = 0; i < VEER_LINK_KEY_BYTES; i++) def.link.key[i] = (uint8_t)(0x61 + 5 * i);
    def.drive = *d;
    def.limits = *l;
    return def;
}

static void seal(const veer_player_def *def, const veer_plan *p, uint64_t id, sealed_plan *out) {
    static uint8_t bytes[VEER_LINK_MAX_PLAN_BYTES];
    veer_diag diag;
    if (veer_plan_encode_pb(p, bytes, sizeof bytes, &out->plan_size, &diag)) DIE("encode: %s", diag.message);
    veer_link_sender *tx = NULL;
    if (veer_link_sender_create(&def->link, id, bytes, out->plan_size, &tx, &diag)) DIE("sender: %s", diag.message);
    out->count = veer_link_sender_chunk_count(tx);
    if (out->count > 160) DIE("%d chunks", out->count);
    out->frame_bytes = 0;
    for (int k = 0; k < out->count; k++) {
        if (veer_link_sender_frame(tx, k, out->frames[k], sizeof out->frames[k], &out->sizes[k])) DIE("frame");
        out->frame_bytes += out->sizes[k];
    }
    veer_link_sender_destroy(tx);
}

/* def with the capacities the plan needs and no more (veer_plan_needs_pb). */
static veer_player_def fitted(veer_player_def def, const veer_plan *p, veer_plan_needs *need) {
    static uint8_t bytes[VEER_LINK_MAX_PLAN_BYTES];
    size_t n;
    veer_diag diag;
    if (veer_plan_encode_pb(p, bytes, sizeof bytes, &n, &diag)) DIE("encode: %s", diag.message);
    if (veer_plan_needs_pb(bytes, n, need, &diag)) DIE("needs: %s", diag.message);
    def.link.max_plan_bytes = need->plan_bytes;
    def.max_knots = need->knots;
    def.max_waypoints = need->waypoints;
    def.max_legs = need->legs;
    return def;
}

static double player_mem[1 << 19]; /* 4 MiB, aligned for double */

/* Arms and starts the plan; returns the player. */
static veer_player *start_player(const veer_player_def *def, const sealed_plan *sp, uint64_t id, double t0,
                                 uint64_t *seq) {
    veer_player *pl = NULL;
    veer_diag diag;
    if (veer_player_init(player_mem, sizeof player_mem, def, &pl, &diag)) DIE("player: %s", diag.message);
    veer_player_event ev;
    for (int k = 0; k < sp->count; k++)
        if (veer_player_frame(pl, sp->frames[k], sp->sizes[k], t0, &ev)) DIE("frame");
    uint8_t f[VEER_LINK_FRAME_MAX];
    size_t n;
    if (veer_link_command_frame(&def->link, ++*seq, VEER_LINK_COMMAND_START, id, f, sizeof f, &n)) DIE("start");
    if (veer_player_frame(pl, f, n, t0, &ev) || !ev.started) DIE("START refused: %s", veer_link_reason_name(ev.reason));
    return pl;
}

typedef struct {
    double mean, p50, p99, max;
    long calls;
} step_time;

static step_time summarize(double *t, long n) {
    step_time s = {0};
    double sum = 0.0;
    for (long k = 0; k < n; k++) sum += t[k];
    qsort(t, (size_t)n, sizeof *t, cmp_double);
    s.mean = sum / (double)n;
    s.p50 = t[n / 2];
    s.p99 = t[(n * 99) / 100];
    s.max = t[n - 1];
    s.calls = n;
    return s;
}

/* Steps the player at rate_hz through the whole plan, runs times; a
 * heartbeat every 0.5 s (not timed) feeds the link watchdog. */
static step_time time_player(const veer_player_def *def, const veer_plan *plan, double rate_hz, int runs) {
    static sealed_plan sp;
    seal(def, plan, 1, &sp);
    double T = veer_plan_duration(plan), dt = 1.0 / rate_hz;
    long per = (long)ceil(T / dt) + 1, n = 0;
    double *t = malloc((size_t)(per * runs) * sizeof *t);
    uint64_t seq = 0;
    for (int run = 0; run < runs; run++) {
        veer_player *pl = start_player(def, &sp, 1, 0.0, &seq);
        veer_sample s;
        int beat = (int)(0.5 * rate_hz);
        for (long k = 1; k <= per; k++) {
            double tn = (double)k * dt;
            if (k % beat == 0) {
                uint8_t f[VEER_LINK_FRAME_MAX];
                size_t fn;
                veer_player_event ev;
                if (veer_link_command_frame(&def->link, ++seq, VEER_LINK_COMMAND_HEARTBEAT, 0, f, sizeof f, &fn) ||
                    veer_player_frame(pl, f, fn, tn, &ev))
                    DIE("heartbeat");
            }
            double t0 = now();
            veer_status st = veer_player_step(pl, tn, &s);
            t[n++] = now() - t0;
            if (st) DIE("step");
        }
        veer_link_report rep;
        if (veer_player_status(pl, &rep) || rep.stop_reason != VEER_STOP_END_OF_PLAN)
            DIE("the timed run did not reach the plan's end (stop reason %s)", veer_stop_reason_name(rep.stop_reason));
        seq = 0;
    }
    step_time st = summarize(t, n);
    free(t);
    return st;
}

static step_time time_sample(const veer_plan *plan, double rate_hz, int runs) {
    double T = veer_plan_duration(plan), dt = 1.0 / rate_hz;
    long per = (long)ceil(T / dt) + 1, n = 0;
    double *t = malloc((size_t)(per * runs) * sizeof *t);
    veer_sample s;
    for (int run = 0; run < runs; run++)
        for (long k = 0; k < per; k++) {
            double t0 = now();
            veer_status st = veer_plan_sample(plan, (double)k * dt, &s);
            t[n++] = now() - t0;
            if (st) DIE("sample");
        }
    step_time st = summarize(t, n);
    free(t);
    return st;
}

/* The clock's own cost per reading pair, subtracted from nothing but shown. */
static double clock_cost(void) {
    double best = 1.0;
    for (int k = 0; k < 10000; k++) {
        double a = now(), b = now();
        if (b - a < best) best = b - a;
    }
    return best;
}

static void decoded(const veer_plan *p, const veer_player_def *def, void *work, const veer_plan **out) {
    static sealed_plan sp;
    static uint8_t bytes[VEER_LINK_MAX_PLAN_BYTES];
    size_t n;
    veer_diag diag;
    (void)def;
    (void)sp;
    if (veer_plan_encode_pb(p, bytes, sizeof bytes, &n, &diag)) DIE("encode: %s", diag.message);
    if (veer_plan_load_pb(bytes, n, work, veer_plan_workspace_size(), out, &diag)) DIE("load: %s", diag.message);
}

static int cmd_player(void) {
    veer_drive_def d;
    veer_limits l;
    veer_route r;
    if (kestrel_demo(&d, &l, &r) != VEER_OK) DIE("demo");
    veer_plan *demo = make_plan(&d, &l, &r, 0);
    veer_limits lj = l;
    lj.body_jerk = 8.0; /* m/s^3 */
    for (int i = 0; i < 4; i++) lj.modules[i].wheel_jerk = 300.0;
    veer_plan *jerk = make_plan(&d, &lj, &r, 0);
    void *work = aligned_alloc(16, (veer_plan_workspace_size() + 15) & ~(size_t)15);
    const veer_plan *dec = NULL;
    veer_player_def def = cart_def(&d, &l), defj = cart_def(&d, &lj);

    printf("### Cart side: time per control tick (demo plan, 4-module steered cart, %.1f s)\n\n",
           veer_plan_duration(demo));
    printf("clock_gettime pair: %.0f ns (included in each figure)\n\n", clock_cost() * 1e9);
    printf("| call | rate | calls | mean us | median us | 99th percentile us | max us |\n|---|---|---|---|---|---|---|\n");
    step_time st = time_player(&def, demo, 50.0, 200);
    printf("| veer_player_step (running) | 50 Hz | %ld | %.3f | %.3f | %.3f | %.3f |\n", st.calls, st.mean * 1e6,
           st.p50 * 1e6, st.p99 * 1e6, st.max * 1e6);
    double step_mean = st.mean, step_p99 = st.p99;
    st = time_player(&def, demo, 1000.0, 10);
    printf("| veer_player_step (running) | 1 kHz | %ld | %.3f | %.3f | %.3f | %.3f |\n", st.calls, st.mean * 1e6,
           st.p50 * 1e6, st.p99 * 1e6, st.max * 1e6);
    decoded(demo, &def, work, &dec);
    st = time_sample(dec, 50.0, 200);
    printf("| veer_plan_sample (decoded plan) | 50 Hz | %ld | %.3f | %.3f | %.3f | %.3f |\n", st.calls,
           st.mean * 1e6, st.p50 * 1e6, st.p99 * 1e6, st.max * 1e6);
    st = time_player(&defj, jerk, 50.0, 20);
    printf("| veer_player_step, jerk-limited plan | 50 Hz | %ld | %.3f | %.3f | %.3f | %.3f |\n", st.calls,
           st.mean * 1e6, st.p50 * 1e6, st.p99 * 1e6, st.max * 1e6);
    printf("\nsummary step_mean_us %.4f step_p99_us %.4f\n", step_mean * 1e6, step_p99 * 1e6);
    free(work);
    veer_plan_destroy(demo);
    veer_plan_destroy(jerk);
    return 0;
}

/* ---- stack high-water mark ---------------------------------------------- */

#define STACK_BYTES (2u << 20)
static unsigned char *stack_base;

/* The player's configuration and the frames are made before (ground side;
 * a cart keeps its configuration in static storage): on this thread's stack
 * only the cart's calls run, not the scenario's set-up. The buffers the cart
 * exchanges with veer (the frames in and out, the setpoints) are the
 * caller's, static here as a radio driver's and a controller's would be, so
 * the figure is veer's own stack. */
static veer_player_def stack_def;
static sealed_plan stack_plan;
static uint8_t stack_start[VEER_LINK_FRAME_MAX], stack_out[VEER_LINK_FRAME_MAX];
static size_t stack_start_size;
static veer_sample stack_sample;
/* Heartbeats every 0.5 s (step 25 k, k = 1 .. stack_beats) until the link
 * goes quiet while the cart moves: its watchdog brakes it (a controlled
 * stop) one link timeout after the last. */
#define STACK_BEATS_MAX 64
static uint8_t stack_beat[STACK_BEATS_MAX][VEER_LINK_FRAME_MAX];
static size_t stack_beat_size[STACK_BEATS_MAX];
static int stack_beats, stack_braked;

static void *cart_loop(void *arg) {
    (void)arg;
    veer_player *pl = NULL;
    if (veer_player_init(player_mem, sizeof player_mem, &stack_def, &pl, NULL)) DIE("player");
    veer_player_event ev;
    for (int k = 0; k < stack_plan.count; k++)
        if (veer_player_frame(pl, stack_plan.frames[k], stack_plan.sizes[k], 0.0, &ev)) DIE("frame");
    if (veer_player_frame(pl, stack_start, stack_start_size, 0.0, &ev) || !ev.started) DIE("START refused");
    size_t n;
    veer_link_report rep;
    for (int k = 1; k < 50 * 30; k++) {
        if (k % 25 == 0 && k / 25 <= stack_beats &&
            veer_player_frame(pl, stack_beat[k / 25 - 1], stack_beat_size[k / 25 - 1], k * 0.02, &ev))
            DIE("heartbeat");
        if (veer_player_step(pl, k * 0.02, &stack_sample)) DIE("step");
        if (veer_player_status(pl, &rep)) DIE("status");
        if (rep.state == VEER_PLAYER_STOPPING) stack_braked = 1;
        if (k % 25 == 0) {
            if (veer_player_report_frame(pl, stack_out, sizeof stack_out, &n) ||
                veer_player_gap_frame(pl, stack_out, sizeof stack_out, &n))
                DIE("report");
        }
    }
    if (!stack_braked || rep.stop_reason != VEER_STOP_LINK_LOST) DIE("the cart loop did not brake on a quiet link");
    return NULL;
}

/* Bytes of a fresh stack that a thread running fn has touched. */
static size_t stack_used(void *(*fn)(void *)) {
    memset(stack_base, 0xA5, STACK_BYTES);
    pthread_attr_t at;
    pthread_attr_init(&at);
    pthread_attr_setstack(&at, stack_base, STACK_BYTES);
    pthread_t th;
    if (pthread_create(&th, &at, fn, NULL)) DIE("thread");
    pthread_join(th, NULL);
    pthread_attr_destroy(&at);
    size_t untouched = 0;
    while (untouched < STACK_BYTES && stack_base[untouched] == 0xA5) untouched++;
    return (size_t)STACK_BYTES - untouched;
}

static void *no_loop(void *arg) { return arg; }

static int cmd_stack(void) {
    veer_drive_def d;
    veer_limits l;
    veer_route r;
    if (kestrel_demo(&d, &l, &r) != VEER_OK) DIE("demo");
    veer_plan *p = make_plan(&d, &l, &r, 0);
    veer_player_def any = cart_def(&d, &l);
    veer_plan_needs demo_need, patrol_need;
    stack_def = fitted(any, p, &demo_need); /* the cart loop runs on a cart sized for the demo */
    seal(&stack_def, p, 1, &stack_plan);
    if (veer_link_command_frame(&stack_def.link, 1, VEER_LINK_COMMAND_START, 1, stack_start, sizeof stack_start,
                                &stack_start_size))
        DIE("start");
    /* The last heartbeat: the first at 0.5 s steps from a third of the plan on whose link timeout runs out
     * while the cart moves. */
    double T = veer_plan_duration(p);
    for (stack_beats = (int)(T / 1.5) + 1; stack_beats < STACK_BEATS_MAX; stack_beats++) {
        veer_sample s;
        double quiet = 0.5 * stack_beats + stack_def.link_timeout;
        if (veer_plan_sample(p, quiet, &s)) DIE("sample");
        if (quiet < T && s.phase == VEER_PHASE_MOVING && s.sdot > 0.0) break;
    }
    if (stack_beats == STACK_BEATS_MAX) DIE("the demo does not move a link timeout after a heartbeat");
    for (int k = 0; k < stack_beats; k++)
        if (veer_link_command_frame(&stack_def.link, (uint64_t)k + 2, VEER_LINK_COMMAND_HEARTBEAT, 0, stack_beat[k],
                                    sizeof stack_beat[k], &stack_beat_size[k]))
            DIE("heartbeat");
    /* Arming: the frame that completes the plan (tag, decode, checks), best of 50. */
    double arm = 1.0;
    for (int rep = 0; rep < 50; rep++) {
        veer_player *pl = NULL;
        veer_diag diag;
        if (veer_player_init(player_mem, sizeof player_mem, &stack_def, &pl, &diag)) DIE("player: %s", diag.message);
        veer_player_event ev;
        for (int k = 0; k < stack_plan.count - 1; k++)
            if (veer_player_frame(pl, stack_plan.frames[k], stack_plan.sizes[k], 0.0, &ev)) DIE("frame");
        double t0 = now();
        int last = stack_plan.count - 1;
        if (veer_player_frame(pl, stack_plan.frames[last], stack_plan.sizes[last], 0.0, &ev) || !ev.armed)
            DIE("not armed");
        double t1 = now();
        if (t1 - t0 < arm) arm = t1 - t0;
    }
    veer_plan_destroy(p);
    veer_drive_def pd;
    veer_limits pl;
    veer_route pr;
    patrol(&pd, &pl, &pr);
    veer_plan *pp = make_plan(&pd, &pl, &pr, 0);
    veer_player_def patrol_def = fitted(cart_def(&pd, &pl), pp, &patrol_need);
    veer_plan_destroy(pp);
    stack_base = aligned_alloc(4096, STACK_BYTES);
    printf("stack_high_water_bytes %zu\n", stack_used(cart_loop));
    /* Part of that is the C library's: the thread's descriptor and TLS sit
     * at the top of the stack it is given. */
    printf("stack_thread_overhead_bytes %zu\n", stack_used(no_loop));
    printf("player_size_bytes %zu\n", veer_player_size());
    printf("player_size_cart_bytes %zu\n", veer_player_size_for(&any));
    printf("player_size_demo_bytes %zu plan_bytes %u knots %u waypoints %u legs %u\n", veer_player_size_for(&stack_def),
           demo_need.plan_bytes, demo_need.knots, demo_need.waypoints, demo_need.legs);
    printf("player_size_patrol_bytes %zu plan_bytes %u knots %u waypoints %u legs %u\n",
           veer_player_size_for(&patrol_def), patrol_need.plan_bytes, patrol_need.knots, patrol_need.waypoints,
           patrol_need.legs);
    printf("arm_demo_us %.1f\n", arm * 1e6);
    printf("receiver_size_bytes %zu\n", veer_link_receiver_size());
    printf("plan_workspace_bytes %zu\n", veer_plan_workspace_size());
    free(stack_base);
    return 0;
}

/* ---- wire sizes --------------------------------------------------------- */

static void wire_row(const char *name, const veer_drive_def *d, const veer_limits *l, const veer_route *r,
                     double rate_bps) {
    veer_plan *p = make_plan(d, l, r, 0);
    veer_player_def def = cart_def(d, l);
    static sealed_plan sp;
    seal(&def, p, 1, &sp);
    double T = veer_plan_duration(p);
    int M = veer_plan_module_count(p);
    /* The dense stream: veer's own SetpointTable at 50 Hz, and a bare
     * minimum of float32 steer and wheel rate per module per tick. */
    static uint8_t bytes[VEER_LINK_MAX_PLAN_BYTES];
    size_t n;
    veer_diag diag;
    if (veer_plan_encode_pb(p, bytes, sizeof bytes, &n, &diag)) DIE("encode");
    size_t table = 0;
    veer_status st = veer_plan_table_pb(bytes, n, 50.0, NULL, 0, &table);
    if (st != VEER_ERR_BUFFER && st != VEER_OK) DIE("table: %s", veer_status_name(st));
    size_t ticks = (size_t)floor(T * 50.0) + 2;
    size_t bare = ticks * (size_t)M * 8;
    /* Frames for the dense streams: the plan's own frame overhead per chunk. */
    double per_frame_payload = (double)(sp.plan_size + VEER_LINK_PLAN_TAG_BYTES) / sp.count;
    double overhead = ((double)sp.frame_bytes - (double)(sp.plan_size + VEER_LINK_PLAN_TAG_BYTES)) / sp.count;
    double table_frames = ceil((double)table / per_frame_payload), bare_frames = ceil((double)bare / per_frame_payload);
    double table_air = (table + table_frames * overhead) * 8.0 / rate_bps;
    double bare_air = (bare + bare_frames * overhead) * 8.0 / rate_bps;
    printf("| %s | %.1f s | %zu B | %d frames, %zu B, %.2f s | %zu B, %.0f s | %zu B, %.0f s | %.0fx / %.0fx |\n", name,
           T, sp.plan_size, sp.count, sp.frame_bytes, (double)sp.frame_bytes * 8.0 / rate_bps, table, table_air, bare,
           bare_air, table_air / ((double)sp.frame_bytes * 8.0 / rate_bps),
           bare_air / ((double)sp.frame_bytes * 8.0 / rate_bps));
    veer_plan_destroy(p);
}

static int cmd_wire(double rate_bps) {
    veer_drive_def d;
    veer_limits l;
    veer_route r;
    printf("### Encoded plan against the dense 50 Hz setpoint stream (airtime at %.0f bit/s, %d-byte frames)\n\n",
           rate_bps, VEER_LINK_FRAME_DEFAULT);
    printf("| scenario | duration | Plan bytes | sealed and framed, airtime | SetpointTable at 50 Hz, airtime | "
           "float32 steer + wheel rate per module at 50 Hz, airtime | dense / plan airtime |\n"
           "|---|---|---|---|---|---|---|\n");
    if (kestrel_demo(&d, &l, &r) != VEER_OK) DIE("demo");
    wire_row("demo (Kestrel Flats lane 4)", &d, &l, &r, rate_bps);
    patrol(&d, &l, &r);
    wire_row("5-minute patrol (Harrow Ridge lane 7)", &d, &l, &r, rate_bps);
    return 0;
}

static int cmd_request(const char *path) {
    veer_drive_def d;
    veer_limits l;
    veer_route r;
    patrol(&d, &l, &r);
    int M = veer_drive_module_count(&d);
    memset(&req, 0, sizeof req);
    req.has_drive = req.has_limits = req.has_route = true;
    veer__wire_drive_to_pb(&d, &req.drive);
    veer__wire_limits_to_pb(&l, M, &req.limits);
    veer__wire_route_to_pb(&r, M, &req.route);
    static uint8_t buf[1 << 16];
    size_t n;
    veer_diag diag;
    if (veer__wire_encode(veer_v1_PlanRequest_fields, &req, buf, sizeof buf, &n, &diag)) DIE("%s", diag.message);
    FILE *f = fopen(path, "wb");
    if (!f || fwrite(buf, 1, n, f) != n || fclose(f)) DIE("cannot write %s", path);
    return 0;
}

int main(int argc, char **argv) {
    if (argc >= 4 && !strcmp(argv[1], "plan")) return cmd_plan(argv[2], atoi(argv[3]));
    if (argc >= 2 && !strcmp(argv[1], "scaling")) return cmd_scaling();
    if (argc >= 3 && !strcmp(argv[1], "once")) return cmd_once(atoi(argv[2]));
    if (argc >= 2 && !strcmp(argv[1], "player")) return cmd_player();
    if (argc >= 2 && !strcmp(argv[1], "stack")) return cmd_stack();
    if (argc >= 2 && !strcmp(argv[1], "wire")) return cmd_wire(argc >= 3 ? atof(argv[2]) : 9600.0);
    if (argc >= 3 && !strcmp(argv[1], "request")) return cmd_request(argv[2]);
    fprintf(stderr, "usage: %s plan REQUEST.pb REPS | scaling | once GRID_POINTS | player | stack | wire [BIT/S] | request OUT.pb\n",
            argv[0]);
    return 2;
}
