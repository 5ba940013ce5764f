/* Bad input to the planner: every case returns a named status and a message,
 * leaves *out NULL, and never crashes; random structs (fixed seed) never
 * crash and never produce a plan with a NaN. */
#include <criterion/criterion.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <veer/veer.h>
#include "plan_check.h"
#include "diag_text.h"

typedef struct {
    veer_drive_def d;
    veer_limits l;
    veer_route r;
} request;

static request good(void) {
    request q;
    q.d = veer_default_drive_def(VEER_DRIVE_STEERED);
    q.l = veer_default_limits();
    q.l.body_speed = 1.0;
    q.l.body_accel = 1.0;
    q.r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&q.r, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(2.0, 0.0);
    cr_assert_eq(veer_route_add_waypoint(&q.r, &w), VEER_OK);
    w = veer_default_waypoint(2.0, 2.0);
    w.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&q.r, &w), VEER_OK);
    return q;
}

static veer_diag expect(const request *q, const veer_plan_options *o, veer_status want) {
    veer_plan *p = (veer_plan *)(uintptr_t)1; /* must be overwritten with NULL */
    veer_diag diag;
    veer_status st = veer_plan_create(&q->d, &q->l, &q->r, o, &p, &diag);
    cr_assert_eq(st, want, "want %s, got %s (%s)", veer_status_name(want), veer_status_name(st), diag.message);
    cr_assert_null(p);
    cr_assert_eq(diag.status, want);
    cr_assert(diag.message[0] != '\0', "empty message");
    cr_assert(strlen(veer_status_str(st)) > 0);
    return diag;
}

Test(input, the_good_request_plans) {
    request q = good();
    veer_plan *p = NULL;
    cr_assert_eq(veer_plan_create(&q.d, &q.l, &q.r, NULL, &p, NULL), VEER_OK);
    veer_plan_destroy(p);
}

Test(input, null_pointers) {
    request q = good();
    veer_plan *p = NULL;
    veer_diag diag;
    cr_assert_eq(veer_plan_create(NULL, &q.l, &q.r, NULL, &p, &diag), VEER_ERR_NULL);
    cr_assert_eq(veer_plan_create(&q.d, NULL, &q.r, NULL, &p, &diag), VEER_ERR_NULL);
    cr_assert_eq(veer_plan_create(&q.d, &q.l, NULL, NULL, &p, &diag), VEER_ERR_NULL);
    cr_assert_eq(veer_plan_create(&q.d, &q.l, &q.r, NULL, NULL, &diag), VEER_ERR_NULL);
    cr_assert_eq(veer_plan_create(&q.d, &q.l, &q.r, NULL, NULL, NULL), VEER_ERR_NULL);
    veer_sample s;
    cr_assert_eq(veer_plan_sample(NULL, 0.0, &s), VEER_ERR_NULL);
    size_t n;
    cr_assert_eq(veer_plan_table(NULL, 50.0, NULL, 0, &n), VEER_ERR_NULL);
    cr_assert_eq(veer_plan_leg(NULL, 0, NULL), VEER_ERR_NULL);
    veer_plan_destroy(NULL);
    cr_assert_eq(veer_plan_duration(NULL), 0.0);
}

Test(input, limits_nan_negative_zero) {
    request q = good();
    q.l.body_speed = ((double)NAN);
    veer_diag d = expect(&q, NULL, VEER_ERR_VALUE);
    cr_assert_eq(d.limit.kind, VEER_LIMIT_BODY_SPEED);
    q = good();
    q.l.modules[2].wheel_accel = -3.0;
    d = expect(&q, NULL, VEER_ERR_VALUE);
    cr_assert_eq(d.limit.kind, VEER_LIMIT_WHEEL_ACCEL);
    cr_assert_eq(d.limit.module, 2);
    q = good();
    q.l.modules[1].steer_rate = 0.0; /* a limit of zero: infeasible, naming it */
    d = expect(&q, NULL, VEER_ERR_INFEASIBLE);
    cr_assert_eq(d.limit.kind, VEER_LIMIT_STEER_RATE);
    cr_assert_eq(d.limit.module, 1);
    cr_assert(diag_says(&d, "steer_rate[1]"), "%s", d.message);
    q = good();
    q.l.modules[0].steer_min = 1.0;
    q.l.modules[0].steer_max = 2.0; /* less than pi: not every direction reachable */
    expect(&q, NULL, VEER_ERR_VALUE);
}

/* Limit names: "text" for body limits, "text[module]" for module limits;
 * always NUL-terminated, the return value the full length (the snprintf
 * convention, C11 7.21.6.5). */
static veer_limit_id limit_id(int kind, int module) {
    veer_limit_id id;
    id.kind = kind;
    id.module = module;
    return id;
}

Test(input, limit_names) {
    char b[32];
    cr_assert_eq(veer_limit_name(limit_id(VEER_LIMIT_BODY_SPEED, -1), b, sizeof b), strlen("body_speed"));
    cr_assert_str_eq(b, "body_speed");
    cr_assert_eq(veer_limit_name(limit_id(VEER_LIMIT_WHEEL_ACCEL, 3), b, sizeof b), strlen("wheel_accel[3]"));
    cr_assert_str_eq(b, "wheel_accel[3]");
    cr_assert_eq(veer_limit_name(limit_id(VEER_LIMIT_STEER_RATE, 12), b, sizeof b), strlen("steer_rate[12]"));
    cr_assert_str_eq(b, "steer_rate[12]");
    cr_assert_eq(veer_limit_name(limit_id(VEER_LIMIT_STEER_RATE, 0), b, 6), strlen("steer_rate[0]"));
    cr_assert_str_eq(b, "steer");
    cr_assert_eq(veer_limit_name(limit_id(VEER_LIMIT_STEER_RATE, 0), NULL, 0), strlen("steer_rate[0]"));
}

Test(input, nothing_bounds_the_speed) {
    request q = good();
    q.l = veer_default_limits();
    veer_diag d = expect(&q, NULL, VEER_ERR_UNBOUNDED);
    cr_assert_eq(d.leg, 0);
}

Test(input, route_geometry) {
    request q = good();
    q.r.waypoints[1].x = q.r.waypoints[0].x; /* coincident waypoints */
    q.r.waypoints[1].y = q.r.waypoints[0].y;
    veer_diag d = expect(&q, NULL, VEER_ERR_GEOMETRY);
    cr_assert_eq(d.leg, 0);
    q = good();
    q.r.waypoints[0].y = ((double)NAN);
    expect(&q, NULL, VEER_ERR_VALUE);
    q = good();
    q.r.waypoints[1].dwell = -1.0;
    expect(&q, NULL, VEER_ERR_VALUE);
    q = good();
    q.r.start_yaw = ((double)INFINITY);
    expect(&q, NULL, VEER_ERR_VALUE);
    q = good();
    q.r.legs[0].kind = (veer_leg_kind)77;
    expect(&q, NULL, VEER_ERR_VALUE);
}

Test(input, capacities) {
    request q = good();
    q.d.module_count = VEER_MAX_MODULES + 1;
    expect(&q, NULL, VEER_ERR_CAPACITY);
    q = good();
    q.r.waypoint_count = VEER_MAX_WAYPOINTS + 1;
    q.r.legs[0].waypoint_count = VEER_MAX_WAYPOINTS + 1;
    veer_status st = veer_plan_create(&q.d, &q.l, &q.r, NULL, &(veer_plan *){NULL}, NULL);
    cr_assert(st == VEER_ERR_CAPACITY || st == VEER_ERR_VALUE, "got %s", veer_status_name(st));
    q = good();
    q.r.leg_count = VEER_MAX_LEGS + 1;
    st = veer_plan_create(&q.d, &q.l, &q.r, NULL, &(veer_plan *){NULL}, NULL);
    cr_assert(st == VEER_ERR_CAPACITY || st == VEER_ERR_VALUE, "got %s", veer_status_name(st));
    /* the route builder refuses the waypoint past capacity and leaves the route as it was */
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &leg), VEER_OK);
    for (int i = 0; i < VEER_MAX_WAYPOINTS; i++) {
        veer_waypoint w = veer_default_waypoint(i + 1.0, 0.0);
        cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_OK);
    }
    veer_route before = r;
    veer_waypoint w = veer_default_waypoint(100.0, 0.0);
    cr_assert_eq(veer_route_add_waypoint(&r, &w), VEER_ERR_CAPACITY);
    cr_assert_eq(memcmp(&before, &r, sizeof r), 0);
}

/* The largest single allocation since the last reset (veer_set_allocator). */
static size_t g_largest;
static void *largest_alloc(size_t size, void *ctx) {
    (void)ctx;
    if (size > g_largest) g_largest = size;
    return malloc(size);
}
static void largest_free(void *ptr, size_t size, void *ctx) {
    (void)size, (void)ctx;
    free(ptr);
}

/* A count that a scrambled struct or a careless script leaves in a route
 * (leg_count or waypoint_count of INT_MAX, negative, just past the maximum)
 * is refused with a named status, and the plan's block is never sized by
 * it: an earlier planner sized its leg summaries by leg_count before
 * checking it and asked the allocator for 14 GB (found by memcheck on
 * random_structs_never_crash). A plan for the maxima (64 waypoints, 32 legs,
 * 8 modules) is a block of 94688 B, about 92 KiB (veer__plan_block_bytes at
 * the maxima, measured on this build); 1 MiB leaves the planner's grid
 * arrays for the small request room. */
Test(input, scrambled_counts_never_size_memory) {
    static const int counts[] = {INT32_MAX, INT32_MIN, -1, VEER_MAX_LEGS + 1, VEER_MAX_WAYPOINTS + 1, 1 << 20};
    cr_assert_eq(veer_set_allocator(largest_alloc, largest_free, NULL), VEER_OK);
    for (size_t i = 0; i < sizeof counts / sizeof counts[0]; i++)
        for (int which = 0; which < 3; which++) {
            request q = good();
            if (which == 0) q.r.leg_count = counts[i];
            else if (which == 1) q.r.waypoint_count = counts[i];
            else q.r.legs[0].waypoint_count = counts[i];
            g_largest = 0;
            veer_plan *p = (veer_plan *)(uintptr_t)1;
            veer_diag diag;
            veer_status st = veer_plan_create(&q.d, &q.l, &q.r, NULL, &p, &diag);
            cr_assert(st == VEER_ERR_VALUE || st == VEER_ERR_CAPACITY, "count %d in field %d: got %s", counts[i], which,
                      veer_status_name(st));
            cr_assert_null(p);
            cr_assert(diag.message[0] != '\0');
            cr_assert(g_largest <= (size_t)1 << 20, "count %d in field %d: an allocation of %zu B", counts[i], which,
                      g_largest);
        }
    cr_assert_eq(veer_set_allocator(NULL, NULL, NULL), VEER_OK);
}

Test(input, options) {
    request q = good();
    veer_plan_options o = veer_default_plan_options();
    o.grid_points = 3;
    expect(&q, &o, VEER_ERR_VALUE);
    o = veer_default_plan_options();
    o.grid_points = 10000000;
    expect(&q, &o, VEER_ERR_VALUE);
    o = veer_default_plan_options();
    o.accel_polygon_sides = 7;
    expect(&q, &o, VEER_ERR_VALUE);
}

/* A differential drive asked to move sideways (heading held while the path
 * goes left) is refused with the nonholonomic limit, the leg and s. */
Test(input, differential_sideways) {
    request q = good();
    q.d = veer_default_drive_def(VEER_DRIVE_DIFFERENTIAL);
    veer_diag d = expect(&q, NULL, VEER_ERR_INFEASIBLE);
    cr_assert_eq(d.limit.kind, VEER_LIMIT_NONHOLONOMIC);
    cr_assert_eq(d.leg, 0);
    cr_assert(d.s >= 0.0);
}

Test(input, sampling_and_tables) {
    request q = good();
    veer_plan *p = NULL;
    cr_assert_eq(veer_plan_create(&q.d, &q.l, &q.r, NULL, &p, NULL), VEER_OK);
    veer_sample s;
    memset(&s, 0x5a, sizeof s);
    veer_sample before = s;
    cr_assert_eq(veer_plan_sample(p, ((double)NAN), &s), VEER_ERR_VALUE);
    cr_assert_eq(memcmp(&s, &before, sizeof s), 0, "output written on failure");
    cr_assert_eq(veer_plan_sample(p, -5.0, &s), VEER_OK); /* clamped to the start */
    cr_assert_float_eq(s.pose[0], 0.0, 1e-12);
    cr_assert_eq(veer_plan_sample(p, 1e9, &s), VEER_OK); /* clamped to the end */
    cr_assert_eq(s.phase, VEER_PHASE_DONE);
    cr_assert_float_eq(s.pose[1], 2.0, 1e-9);
    size_t n = 0;
    cr_assert_eq(veer_plan_table(p, 0.0, NULL, 0, &n), VEER_ERR_VALUE);
    cr_assert_eq(veer_plan_table(p, ((double)NAN), NULL, 0, &n), VEER_ERR_VALUE);
    cr_assert_eq(veer_plan_table(p, -50.0, NULL, 0, &n), VEER_ERR_VALUE);
    cr_assert_eq(veer_plan_table(p, 50.0, NULL, 0, &n), VEER_ERR_BUFFER);
    veer_sample small[3];
    memset(small, 0x5a, sizeof small);
    cr_assert_eq(veer_plan_table(p, 50.0, small, 3, &n), VEER_ERR_BUFFER);
    cr_assert(n > 3);
    for (int i = 0; i < 3; i++) cr_assert_eq(memcmp(&small[i], &before, sizeof before), 0);
    double q3[3], dq[3], ddq[3];
    cr_assert_eq(veer_plan_path_at(p, ((double)NAN), q3, dq, ddq), VEER_ERR_VALUE);
    cr_assert_eq(veer_plan_grid(p, -1, NULL, NULL, NULL), VEER_ERR_VALUE);
    cr_assert_eq(veer_plan_grid(p, veer_plan_grid_count(p), NULL, NULL, NULL), VEER_ERR_VALUE);
    cr_assert_eq(veer_plan_leg(p, 5, &(veer_leg_summary){0}), VEER_ERR_VALUE);
    veer_plan_destroy(p);
}

/* What a careless script or a corrupted file could hand over: structs with
 * random bytes, and good requests with one field scrambled. No crash; any
 * plan that comes back samples without NaN. Fixed seed. */
static uint64_t rng_state = 0x9e3779b97f4a7c15ull;
static uint64_t rng(void) {
    rng_state ^= rng_state << 13;
    rng_state ^= rng_state >> 7;
    rng_state ^= rng_state << 17;
    return rng_state;
}

static void scramble_double(double *v) {
    static const double odd[] = {((double)NAN), ((double)INFINITY), -(double)INFINITY, 0.0, -0.0, 1e300, -1e300, 1e-300, -1.0, 4.9e-324};
    *v = (rng() % 2) ? odd[rng() % 10] : ((double)(int64_t)rng() / 9.2e18) * 50.0;
}

Test(input, random_structs_never_crash) {
    int planned = 0;
    for (int iter = 0; iter < 600; iter++) {
        request q = good();
        if (iter < 100) {
            unsigned char *b = (unsigned char *)&q;
            size_t at = rng() % sizeof q;
            for (int k = 0; k < 16 && at + (size_t)k < sizeof q; k++) b[at + (size_t)k] = (unsigned char)rng();
        } else {
            /* one double field anywhere in the request */
            double *fields = (double *)&q.l;
            size_t nd = sizeof q.l / sizeof(double);
            switch (rng() % 4) {
            case 0: scramble_double(&fields[rng() % nd]); break;
            case 1: scramble_double(&q.r.waypoints[rng() % 2].x); break;
            case 2: scramble_double(&q.d.wheel_radius); break;
            default: scramble_double(&q.d.modules[rng() % 4].x); break;
            }
        }
        veer_plan *p = NULL;
        veer_diag diag;
        veer_status st = veer_plan_create(&q.d, &q.l, &q.r, NULL, &p, &diag);
        cr_assert(st >= VEER_OK && st <= VEER_ERR_LATE, "unnamed status %d", st);
        if (st != VEER_OK) {
            cr_assert_null(p);
            cr_assert(diag.message[0] != '\0', "status %s without message", veer_status_name(st));
            continue;
        }
        planned++;
        double T = veer_plan_duration(p);
        cr_assert(isfinite(T) && T > 0.0, "duration %g", T);
        for (int k = 0; k <= 200; k++) {
            veer_sample s;
            cr_assert_eq(veer_plan_sample(p, T * k / 200.0, &s), VEER_OK);
            cr_assert(pc_finite_sample(&s), "NaN in a sample of iteration %d", iter);
        }
        veer_plan_destroy(p);
    }
    cr_assert(planned > 50, "the scrambles should leave many requests plannable (%d)", planned);
}
