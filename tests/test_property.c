/* Property suite: random carts on random routes (fixed seeds), at least 2000
 * of them, planned and sampled every millisecond.
 *
 * For every case: the status is VEER_OK or a named refusal of the route
 * (ERR_INFEASIBLE, ERR_GEOMETRY) with a message; a plan has no NaN or
 * infinity in any sample; every limit holds within 1 %, checked by
 * veer_plan_check_limits and, independently, from the samples with formulas
 * of our own (sources beside each); steer angles are continuous (the angle
 * differenced over 1 ms respects the steer-rate limit, which the generator
 * always sets); the pose's time derivative is the sampled twist. For a
 * share of the plans, the cart side (veer_plan_load_pb, veer_plan_sample_pb,
 * the player) runs under a counting allocator and must not allocate.
 *
 * Half of the routes that start with a held-heading line start on the
 * move (a start twist along the line), as re-planning while driving does.
 *
 * The generator (splitmix64, fixed seeds) invents carts and routes; it only
 * makes requests a careful user could make (limits > 0, modules apart,
 * routes that say what they mean), so that a refusal other than the named
 * ones is a finding. VEER_PROPERTY_CASES (environment) scales the number of
 * cases down for slow runs (valgrind); the default is the full 2000+.
 * SPDX-License-Identifier: MIT */
#include <criterion/criterion.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <veer/veer.h>
#include <veer/link.h>
#include <veer/player.h>
#include <veer/wire.h>

#define PI 3.14159265358979323846
#define G0 9.80665 /* m/s^2, standard gravity (3rd CGPM, 1901) */
#define TOL 0.01   /* every limit within 1 % (issue 7) */
#define DT 1e-3    /* s: sampled every millisecond */

/* ---- random numbers: splitmix64 (S. Vigna, public-domain reference code,
 * constants from Steele, Lea & Flood, "Fast splittable pseudorandom number
 * generators", OOPSLA 2014) ------------------------------------------------ */

typedef struct {
    uint64_t s;
} rng;

static uint64_t next_u64(rng *r) {
    uint64_t z = (r->s += 0x9E3779B97F4A7C15ull);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    return z ^ (z >> 31);
}
static double uni(rng *r, double a, double b) { return a + (b - a) * (double)(next_u64(r) >> 11) * 0x1.0p-53; }
static int pick(rng *r, int n) { return (int)(next_u64(r) % (uint64_t)n); }
static int chance(rng *r, double p) { return uni(r, 0.0, 1.0) < p; }

static double wrap(double a) { return a - 2.0 * PI * floor((a + PI) / (2.0 * PI)); }

/* ---- case generator ----------------------------------------------------- */

/* 1 in the moving_jerk runs: every cart has jerk limits and every route
 * starts on the move along a held-heading line (the rare combination of the
 * random runs, which re-planning while driving with jerk limits exercises). */
static int force_moving_jerk;

typedef struct {
    veer_drive_def drive;
    veer_limits limits;
    veer_route route;
    veer_plan_options options;
    int jerk; /* 1: jerk limits set */
    int moving; /* 1: planned on the move (start twist) */
} case_def;

/* A cart of the given kind with a random layout and random limits. */
static void random_cart(rng *r, veer_drive_kind kind, case_def *c) {
    veer_drive_def d = veer_default_drive_def(kind);
    d.wheel_radius = uni(r, 0.04, 0.2);
    if (kind == VEER_DRIVE_STEERED || kind == VEER_DRIVE_OMNI) {
        int n = kind == VEER_DRIVE_STEERED ? 2 + pick(r, 7) : 3 + pick(r, 4);
        d.module_count = n;
        for (int i = 0; i < n; i++) {
            /* Modules round the body at random radii and spread angles, so
             * none coincide and the omni wheels' push lines stay apart. */
            double ang = 2.0 * PI * (i + uni(r, 0.1, 0.9)) / n, rad = uni(r, 0.15, 0.6);
            d.modules[i].x = rad * cos(ang);
            d.modules[i].y = rad * sin(ang);
            d.modules[i].drive_angle = ang + PI / 2.0 + uni(r, -0.5, 0.5);
        }
    } else if (kind == VEER_DRIVE_MECANUM) {
        d.half_wheelbase = uni(r, 0.15, 0.5);
        d.half_track = uni(r, 0.15, 0.5);
        d.roller_angle = uni(r, 30.0, 60.0) * PI / 180.0;
    } else {
        d.track_width = uni(r, 0.3, 1.0);
        d.skid_factor = chance(r, 0.5) ? 1.0 : uni(r, 1.0, 1.8);
    }
    int M = veer_drive_module_count(&d);
    veer_limits l = veer_default_limits();
    double rate = uni(r, 8.0, 40.0), acc = uni(r, 6.0, 60.0), steer = uni(r, 1.0, 8.0);
    int cabled = kind == VEER_DRIVE_STEERED && chance(r, 0.2);
    for (int i = 0; i < M; i++) {
        int own = chance(r, 0.3); /* some carts have unequal modules */
        l.modules[i].wheel_rate = own ? rate * uni(r, 0.7, 1.0) : rate;
        l.modules[i].wheel_accel = own ? acc * uni(r, 0.7, 1.0) : acc;
        if (kind == VEER_DRIVE_STEERED) l.modules[i].steer_rate = steer;
        if (cabled) {
            double span = uni(r, 1.2, 2.0) * PI;
            l.modules[i].steer_min = -span;
            l.modules[i].steer_max = span;
        }
    }
    if (chance(r, 0.15)) {
        double mu = uni(r, 0.3, 1.0);
        for (int i = 0; i < M; i++) l.modules[i].traction_mu = mu;
    }
    if (chance(r, 0.6)) l.body_speed = uni(r, 0.5, 3.0);
    if (chance(r, 0.6)) l.body_accel = uni(r, 0.4, 3.0);
    if (chance(r, 0.3)) l.yaw_rate = uni(r, 0.5, 3.0);
    if (chance(r, 0.3)) l.yaw_accel = uni(r, 0.5, 6.0);
    /* Jerk limits on some carts: planning them costs about a hundred times
     * more than planning without. */
    c->jerk = force_moving_jerk || chance(r, 0.06);
    if (c->jerk) {
        l.body_jerk = uni(r, 2.0, 20.0);
        for (int i = 0; i < M; i++) l.modules[i].wheel_jerk = uni(r, 50.0, 400.0);
    }
    c->drive = d;
    c->limits = l;
}

typedef struct {
    double x, y, yaw;
} pose2;

static int add_spin_to(veer_route *rt, pose2 *at, double yaw) {
    if (fabs(wrap(yaw - at->yaw)) < 0.05) return 1; /* close enough for the 5-degree ease-in */
    veer_leg s = veer_default_leg(VEER_LEG_SPIN);
    s.yaw = yaw;
    if (veer_route_add_leg(rt, &s) != VEER_OK) return 0;
    at->yaw = yaw;
    return 1;
}

/* A travel leg through 1..4 random waypoints. */
static int random_travel(rng *r, const case_def *c, veer_route *rt, pose2 *at) {
    int diff = c->drive.kind == VEER_DRIVE_DIFFERENTIAL;
    int n = 1 + pick(r, 4);
    double px[4], py[4], dir = uni(r, -PI, PI);
    double x = at->x, y = at->y;
    for (int k = 0; k < n; k++) {
        if (k > 0) dir += uni(r, -2.6, 2.6); /* never a corner of more than ~150 degrees */
        double len = uni(r, 0.6, 6.0);
        x += len * cos(dir);
        y += len * sin(dir);
        px[k] = x;
        py[k] = y;
    }
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    leg.corner_tolerance = uni(r, 0.05, 0.6);
    if (chance(r, 0.2)) leg.dwell = uni(r, 0.0, 1.0);
    /* a differential drive faces its travel; the forced runs hold the first leg's heading */
    int h = diff ? 1 : (force_moving_jerk && rt->leg_count == 0) ? 0 : pick(r, 4);
    double first = atan2(py[0] - at->y, px[0] - at->x);
    double tx = 0.0, ty = 0.0;
    switch (h) {
    case 0: leg.heading = VEER_HEADING_HOLD; break;
    case 1:
        leg.heading = VEER_HEADING_TANGENT;
        leg.reversed = !diff && chance(r, 0.2);
        if (!add_spin_to(rt, at, first + (leg.reversed ? PI : 0.0))) return 0;
        break;
    case 2: {
        /* A point well off the route: 15..30 m from the leg's start, beyond
         * the 24 m the leg can cover, so the path never comes near it. */
        double a = uni(r, -PI, PI), dist = uni(r, 30.0, 45.0);
        tx = at->x + dist * cos(a);
        ty = at->y + dist * sin(a);
        leg.heading = VEER_HEADING_TOWARD;
        leg.toward_x = tx;
        leg.toward_y = ty;
        if (!add_spin_to(rt, at, atan2(ty - at->y, tx - at->x))) return 0;
        break;
    }
    default: leg.heading = VEER_HEADING_BLEND; break;
    }
    if (veer_route_add_leg(rt, &leg) != VEER_OK) return 0;
    double yaw = at->yaw;
    for (int k = 0; k < n; k++) {
        veer_waypoint w = veer_default_waypoint(px[k], py[k]);
        w.stop = k == n - 1 || chance(r, 0.25);
        if (w.stop && chance(r, 0.2)) w.dwell = uni(r, 0.0, 1.5);
        if (leg.heading == VEER_HEADING_BLEND && chance(r, 0.7)) {
            w.has_yaw = 1;
            w.yaw = yaw + uni(r, -2.5, 2.5);
            yaw = w.yaw;
        }
        if (veer_route_add_waypoint(rt, &w) != VEER_OK) return 0;
    }
    double last = n > 1 ? atan2(py[n - 1] - py[n - 2], px[n - 1] - px[n - 2]) : first;
    at->x = px[n - 1];
    at->y = py[n - 1];
    if (leg.heading == VEER_HEADING_TANGENT) at->yaw = last + (leg.reversed ? PI : 0.0);
    if (leg.heading == VEER_HEADING_TOWARD) at->yaw = atan2(ty - at->y, tx - at->x);
    if (leg.heading == VEER_HEADING_BLEND) at->yaw = yaw;
    return 1;
}

static int random_route(rng *r, case_def *c) {
    pose2 at = {uni(r, -20.0, 20.0), uni(r, -20.0, 20.0), uni(r, -PI, PI)};
    veer_route rt = veer_default_route(at.x, at.y, at.yaw);
    int legs = 1 + pick(r, 3);
    int diff = c->drive.kind == VEER_DRIVE_DIFFERENTIAL;
    for (int k = 0; k < legs; k++) {
        int kind = (force_moving_jerk && k == 0) ? 0 : pick(r, 10);
        if (kind < 6) {
            if (!random_travel(r, c, &rt, &at)) return 0;
        } else if (kind < 8) {
            veer_leg s = veer_default_leg(VEER_LEG_SPIN);
            double turn = (chance(r, 0.5) ? 1.0 : -1.0) * uni(r, 0.2, 3.0);
            s.yaw = at.yaw + turn;
            s.direction = pick(r, 3) - 1;
            if (fabs(wrap(turn)) < 0.05) s.direction = 0;
            if (veer_route_add_leg(&rt, &s) != VEER_OK) return 0;
            /* The shorter way, or all the way round the given direction. */
            double w = wrap(turn);
            if (s.direction == 0) at.yaw += w;
            else at.yaw += s.direction > 0 ? (w > 0 ? w : w + 2 * PI) : (w < 0 ? w : w - 2 * PI);
        } else {
            veer_leg p = veer_default_leg(VEER_LEG_PIVOT);
            double a = uni(r, -PI, PI), dist = uni(r, 0.5, 3.0);
            if (diff) a = at.yaw + (chance(r, 0.5) ? PI / 2 : -PI / 2); /* on the wheel axis */
            p.pivot_x = at.x + dist * cos(a);
            p.pivot_y = at.y + dist * sin(a);
            p.angle = (chance(r, 0.5) ? 1.0 : -1.0) * uni(r, 0.2, 2.0);
            p.hold_yaw = !diff && chance(r, 0.3);
            if (veer_route_add_leg(&rt, &p) != VEER_OK) return 0;
            double ox = at.x - p.pivot_x, oy = at.y - p.pivot_y, ca = cos(p.angle), sa = sin(p.angle);
            at.x = p.pivot_x + ca * ox - sa * oy;
            at.y = p.pivot_y + sa * ox + ca * oy;
            if (!p.hold_yaw) at.yaw += p.angle;
        }
    }
    c->route = rt;
    /* The default grid (1000 points), as most users plan. */
    c->options = veer_default_plan_options();
    /* Half of the routes that start with a held-heading travel leg are
     * planned on the move (re-planning while the cart drives): the cart
     * already moves along the first line at a share of its body speed. The
     * planner may refuse one with no room to stop (a named refusal). */
    const veer_leg *l0 = &c->route.legs[0];
    if (l0->kind == VEER_LEG_TRAVEL && l0->heading == VEER_HEADING_HOLD && !diff && (force_moving_jerk || chance(r, 0.5))) {
        const veer_waypoint *w0 = &c->route.waypoints[0];
        double dir = atan2(w0->y - c->route.start_y, w0->x - c->route.start_x) - c->route.start_yaw;
        double v0 = uni(r, 0.05, 0.5) * fmin(c->limits.body_speed, 3.0);
        c->route.has_start_twist = 1;
        c->route.start_twist[0] = v0 * cos(dir); /* body frame */
        c->route.start_twist[1] = v0 * sin(dir);
        c->route.start_twist[2] = 0.0;
        c->moving = 1;
    }
    return 1;
}

/* ---- independent checks from the samples -------------------------------- */

typedef struct {
    double worst;
    char what[48];
    double t;
} worst_ratio;

static void note(worst_ratio *w, double value, double limit, const char *what, int module, double t) {
    if (!isfinite(limit)) return;
    double q = fabs(value) / limit;
    if (q > w->worst) {
        w->worst = q;
        w->t = t;
        if (module >= 0)
            snprintf(w->what, sizeof w->what, "%s[%d]", what, module);
        else
            snprintf(w->what, sizeof w->what, "%s", what);
    }
}

static int finite3(const double *v) { return isfinite(v[0]) && isfinite(v[1]) && isfinite(v[2]); }

static int sample_finite(const veer_sample *s) {
    if (!isfinite(s->t) || !isfinite(s->s) || !isfinite(s->sdot) || !isfinite(s->sddot)) return 0;
    if (!finite3(s->pose) || !finite3(s->twist_world) || !finite3(s->twist_body) || !finite3(s->accel_world) ||
        !finite3(s->accel_body))
        return 0;
    for (int i = 0; i < s->module_count; i++) {
        const veer_module_setpoint *m = &s->modules[i];
        if (!isfinite(m->steer) || !isfinite(m->steer_rate) || !isfinite(m->wheel_rate) || !isfinite(m->wheel_accel))
            return 0;
    }
    return 1;
}

/* Wheel rates (rad/s) of a fixed-wheel drive for a body twist, from the
 * textbook kinematics, written out here independently of src/drive_*.c:
 *   mecanum and omni: u_i = (1/r) [cos b_i + ..] (Lynch & Park, "Modern
 *   Robotics", Cambridge 2017, eq. 13.5 and 13.10, the same forms as
 *   tests/python/reference.py); differential: v -+ (d/2) w over r with the
 *   effective track d = skid_factor * track (Siciliano et al., "Robotics:
 *   Modelling, Planning and Control", Springer 2009, 11.2; the ICR model of
 *   skid steer). Steered modules: |v + w x r_i| / r (rigid body, Lynch &
 *   Park 13.2). */
static void wheel_rates(const veer_drive_def *d, const double tw[3], double *u, double *dir) {
    double r = d->wheel_radius, vx = tw[0], vy = tw[1], w = tw[2];
    switch (d->kind) {
    case VEER_DRIVE_STEERED:
    case VEER_DRIVE_OMNI:
        for (int i = 0; i < d->module_count; i++) {
            double x = d->modules[i].x, y = d->modules[i].y;
            double px = vx - w * y, py = vy + w * x;
            if (d->kind == VEER_DRIVE_STEERED) {
                u[i] = hypot(px, py) / r;
                dir[i] = atan2(py, px);
            } else {
                double b = d->modules[i].drive_angle;
                u[i] = (cos(b) * px + sin(b) * py) / r;
            }
        }
        break;
    case VEER_DRIVE_MECANUM: {
        double l = d->half_wheelbase, wd = d->half_track, g = d->roller_angle;
        const double xs[4] = {l, l, -l, -l}, ys[4] = {wd, -wd, -wd, wd}, sg[4] = {-1.0, 1.0, -1.0, 1.0};
        for (int i = 0; i < 4; i++) {
            double t = tan(sg[i] * g);
            u[i] = ((vx - ys[i] * w) + t * (vy + xs[i] * w)) / r;
        }
        break;
    }
    default: {
        double dd = d->track_width * d->skid_factor;
        u[0] = (vx - 0.5 * dd * w) / r;
        u[1] = (vx + 0.5 * dd * w) / r;
        break;
    }
    }
}

/* Body-frame contact point of module i (mecanum wheels at (+-l, +-w) in the
 * order front-left, front-right, rear-right, rear-left; differential sides
 * at (0, +-track/2)), as drive.h documents. */
static void contact(const veer_drive_def *d, int i, double p[2]) {
    if (d->kind == VEER_DRIVE_MECANUM) {
        const double xs[4] = {1, 1, -1, -1}, ys[4] = {1, -1, -1, 1};
        p[0] = xs[i] * d->half_wheelbase;
        p[1] = ys[i] * d->half_track;
    } else if (d->kind == VEER_DRIVE_DIFFERENTIAL) {
        p[0] = 0.0;
        p[1] = i == 0 ? 0.5 * d->track_width : -0.5 * d->track_width;
    } else {
        p[0] = d->modules[i].x;
        p[1] = d->modules[i].y;
    }
}

typedef struct {
    worst_ratio limit;   /* largest figure / limit */
    double kin_err;      /* largest disagreement of wheel rate or steer with the textbook kinematics */
    double pose_err;     /* largest |d pose / dt - twist| (m/s, rad/s) beyond the trapezoid rule's error */
    double pose_t;
    int pose_axis;
    int nan;
    long samples;
} dense_result;

/* Samples the plan every millisecond and checks everything from the samples. */
static dense_result dense_check(const veer_plan *p, const case_def *c) {
    dense_result out;
    memset(&out, 0, sizeof out);
    const veer_drive_def *d = &c->drive;
    const veer_limits *l = &c->limits;
    int M = veer_plan_module_count(p);
    double T = veer_plan_duration(p);
    long steps = (long)ceil(T / DT);
    veer_sample prev, s;
    memset(&prev, 0, sizeof prev);
    int have = 0;
    /* Jerk, independently of the library's accelerations: the wheel rates
     * of the textbook kinematics (wheel_rates, signed) and the world
     * velocity at the last two samples, twice differenced. A second
     * difference over equal steps h is the second derivative averaged with
     * a hat-shaped weight (Taylor's theorem with integral remainder), so it
     * obeys every bound the jerk obeys. */
    double k1[VEER_MAX_MODULES] = {0}, k2[VEER_MAX_MODULES] = {0}, v1[2] = {0}, v2[2] = {0};
    int even = 0; /* evenly spaced samples in a row so far */
    for (long q = 0; q <= steps; q++) {
        double t = q < steps ? (double)q * DT : T;
        if (veer_plan_sample(p, t, &s) != VEER_OK || !sample_finite(&s) || s.module_count != M) {
            out.nan++;
            have = even = 0;
            continue;
        }
        out.samples++;
        /* Body limits: the definitions in plan.h. */
        note(&out.limit, hypot(s.twist_world[0], s.twist_world[1]), l->body_speed, "body_speed", -1, t);
        note(&out.limit, hypot(s.accel_world[0], s.accel_world[1]), l->body_accel, "body_accel", -1, t);
        note(&out.limit, s.twist_world[2], l->yaw_rate, "yaw_rate", -1, t);
        note(&out.limit, s.accel_world[2], l->yaw_accel, "yaw_accel", -1, t);
        /* The body twist is the world twist turned into the body frame. */
        double cy = cos(s.pose[2]), sy = sin(s.pose[2]);
        double bx = cy * s.twist_world[0] + sy * s.twist_world[1], by = -sy * s.twist_world[0] + cy * s.twist_world[1];
        double e = fmax(fabs(bx - s.twist_body[0]), fabs(by - s.twist_body[1]));
        if (e > out.kin_err) out.kin_err = e;
        double u[VEER_MAX_MODULES], dir[VEER_MAX_MODULES];
        wheel_rates(d, s.twist_body, u, dir);
        if (c->jerk) {
            even = q < steps ? even + 1 : 0;
            double h2 = DT * DT;
            for (int i = 0; i < M; i++) {
                /* a steered module's rate takes the sign of the reverse choice */
                double k0 = d->kind == VEER_DRIVE_STEERED ? copysign(u[i], s.modules[i].wheel_rate) : u[i];
                if (even >= 3)
                    note(&out.limit, (k0 - 2.0 * k1[i] + k2[i]) / h2, l->modules[i].wheel_jerk,
                         "wheel_jerk(kinematics, twice differenced)", i, t);
                k2[i] = k1[i];
                k1[i] = k0;
            }
            if (even >= 3)
                note(&out.limit,
                     hypot(s.twist_world[0] - 2.0 * v1[0] + v2[0], s.twist_world[1] - 2.0 * v1[1] + v2[1]) / h2,
                     l->body_jerk, "body_jerk(velocity twice differenced)", -1, t);
            memcpy(v2, v1, sizeof v1);
            memcpy(v1, s.twist_world, sizeof v1);
        }
        for (int i = 0; i < M; i++) {
            const veer_module_limits *ml = &l->modules[i];
            const veer_module_setpoint *m = &s.modules[i];
            double scale = ml->wheel_rate;
            if (d->kind == VEER_DRIVE_STEERED) {
                e = fabs(fabs(m->wheel_rate) - u[i]) / scale;
                /* steer is the module velocity's direction relative to the body, mod pi */
                if (u[i] * d->wheel_radius > 1e-3) {
                    double k = fabs(wrap(2.0 * (m->steer - dir[i]))) / 2.0;
                    if (k > e) e = k;
                }
                note(&out.limit, m->steer_rate, ml->steer_rate, "steer_rate", i, t);
                if (m->steer > ml->steer_max + 1e-9 || m->steer < ml->steer_min - 1e-9)
                    note(&out.limit, 2.0, 1.0, "steer_range", i, t);
            } else {
                e = fabs(m->wheel_rate - u[i]) / scale;
            }
            if (e > out.kin_err) out.kin_err = e;
            note(&out.limit, u[i], ml->wheel_rate, "wheel_rate(kinematics)", i, t);
            note(&out.limit, m->wheel_rate, ml->wheel_rate, "wheel_rate", i, t);
            note(&out.limit, m->wheel_accel, ml->wheel_accel, "wheel_accel", i, t);
            if (isfinite(ml->traction_mu)) {
                /* Contact point acceleration of a rigid body in the plane:
                 * a + alpha k x R r - w^2 R r (any dynamics text, e.g. Lynch
                 * & Park 13.2 differentiated), against mu g. */
                double rb[2];
                contact(d, i, rb);
                double rx = cy * rb[0] - sy * rb[1], ry = sy * rb[0] + cy * rb[1];
                double w = s.twist_world[2], al = s.accel_world[2];
                double ax = s.accel_world[0] - al * ry - w * w * rx, ay = s.accel_world[1] + al * rx - w * w * ry;
                note(&out.limit, hypot(ax, ay), ml->traction_mu * G0, "traction", i, t);
            }
        }
        if (have && t > prev.t) {
            double h = t - prev.t;
            /* Mean-value theorem: a difference quotient over 1 ms is a mean of
             * the derivative, so it obeys every bound the derivative obeys. */
            for (int i = 0; i < M; i++) {
                const veer_module_limits *ml = &l->modules[i];
                if (d->kind == VEER_DRIVE_STEERED)
                    note(&out.limit, (s.modules[i].steer - prev.modules[i].steer) / h, ml->steer_rate,
                         "steer_rate(differenced)", i, t);
                note(&out.limit, (s.modules[i].wheel_rate - prev.modules[i].wheel_rate) / h, ml->wheel_accel,
                     "wheel_accel(differenced)", i, t);
                if (c->jerk)
                    note(&out.limit, (s.modules[i].wheel_accel - prev.modules[i].wheel_accel) / h, ml->wheel_jerk,
                         "wheel_jerk(differenced)", i, t);
            }
            note(&out.limit, hypot(s.twist_world[0] - prev.twist_world[0], s.twist_world[1] - prev.twist_world[1]) / h,
                 l->body_accel, "body_accel(differenced)", -1, t);
            note(&out.limit, (s.twist_world[2] - prev.twist_world[2]) / h, l->yaw_accel, "yaw_accel(differenced)", -1, t);
            if (c->jerk)
                note(&out.limit,
                     hypot(s.accel_world[0] - prev.accel_world[0], s.accel_world[1] - prev.accel_world[1]) / h,
                     l->body_jerk, "body_jerk(differenced)", -1, t);
            /* The pose's derivative is the twist: the trapezoid rule over h
             * is off by at most h |a1 - a0| / 8 where the acceleration
             * switches from a0 to a1 within the step (and by h^2/12 |jerk|
             * where it is smooth); pose_err is the excess over that. */
            for (int a = 0; a < 3; a++) {
                double dp = (s.pose[a] - prev.pose[a]) / h, mean = 0.5 * (s.twist_world[a] + prev.twist_world[a]);
                double err = fabs(dp - mean) - h / 8.0 * fabs(s.accel_world[a] - prev.accel_world[a]);
                if (err > out.pose_err) {
                    out.pose_err = err;
                    out.pose_t = t;
                    out.pose_axis = a;
                }
            }
        }
        prev = s;
        have = 1;
    }
    return out;
}

/* ---- counting allocator around the cart side ----------------------------- */

static long alloc_calls;
static void *count_alloc(size_t size, void *ctx) {
    (void)ctx;
    alloc_calls++;
    return malloc(size);
}
static void count_free(void *ptr, size_t size, void *ctx) {
    (void)size, (void)ctx;
    free(ptr);
}

static double player_mem[1 << 19]; /* 4 MiB, aligned for double */
static double plan_work[1 << 17];  /* 1 MiB */
static uint8_t plan_bytes[VEER_LINK_MAX_PLAN_BYTES];

/* Encodes the plan (ground side), then on the cart side with the counting
 * allocator: loads it, samples it every millisecond and through
 * veer_plan_sample_pb, and runs it through a player at 50 Hz from START to
 * its end. Returns the allocations the cart side made. */
static long cart_side_allocations(const veer_plan *plan, const case_def *c, int index) {
    size_t n = 0;
    veer_diag diag;
    veer_status st = veer_plan_encode_pb(plan, plan_bytes, sizeof plan_bytes, &n, &diag);
    cr_assert_eq(st, VEER_OK, "case %d: encode: %s: %s", index, veer_status_name(st), diag.message);
    cr_assert(veer_plan_workspace_size() <= sizeof plan_work);
    cr_assert(veer_player_size() <= sizeof player_mem);
    veer_player_def def = veer_default_player_def();
    def.link.cart = 3;
    for (int i = 0; i < VEER_LINK_KEY_BYTES; i++) def.link.key[i] = (uint8_t)(0x3c + 11 * i);
    def.drive = c->drive;
    def.limits = c->limits;
    veer_link_sender *tx = NULL;
    cr_assert_eq(veer_link_sender_create(&def.link, (uint64_t)index + 1, plan_bytes, n, &tx, &diag), VEER_OK, "%s",
                 diag.message);
    uint8_t frames[64][VEER_LINK_FRAME_MAX];
    size_t sizes[64];
    int count = veer_link_sender_chunk_count(tx);
    cr_assert(count >= 1 && count <= 64, "case %d: %d chunks", index, count);
    for (int k = 0; k < count; k++)
        cr_assert_eq(veer_link_sender_frame(tx, k, frames[k], sizeof frames[k], &sizes[k]), VEER_OK);
    uint8_t start[VEER_LINK_FRAME_MAX];
    size_t start_size = 0;
    cr_assert_eq(veer_link_command_frame(&def.link, 1, VEER_LINK_COMMAND_START, (uint64_t)index + 1, start,
                                         sizeof start, &start_size),
                 VEER_OK);
    veer_link_sender_destroy(tx);

    cr_assert_eq(veer_set_allocator(count_alloc, count_free, NULL), VEER_OK);
    alloc_calls = 0;
    const veer_plan *p = NULL;
    st = veer_plan_load_pb(plan_bytes, n, plan_work, sizeof plan_work, &p, &diag);
    int ok = st == VEER_OK;
    double T = ok ? veer_plan_duration(p) : 0.0;
    veer_sample s;
    int bad = 0;
    for (double t = 0.0; ok && t <= T; t += DT) bad += veer_plan_sample(p, t, &s) != VEER_OK || !sample_finite(&s);
    for (int k = 0; ok && k <= 4; k++) bad += veer_plan_sample_pb(plan_bytes, n, T * k / 4.0, &s) != VEER_OK;
    veer_player *pl = NULL;
    int armed = 0, ran = 0;
    if (veer_player_init(player_mem, sizeof player_mem, &def, &pl, &diag) == VEER_OK) {
        double now = 0.0;
        veer_player_event ev;
        for (int k = 0; k < count; k++) {
            bad += veer_player_frame(pl, frames[k], sizes[k], now, &ev) != VEER_OK;
            armed |= ev.armed;
        }
        bad += veer_player_frame(pl, start, start_size, now, &ev) != VEER_OK;
        ran = ev.started;
        /* The plan runs to its end within the link timeout only if it is
         * short; heartbeats are not needed for the property, so the run
         * stops at the plan's end or at link loss, both controlled. */
        for (int k = 0; k < 50 * 600 && now < T + 2.0; k++) {
            now += 0.02;
            bad += veer_player_step(pl, now, &s) != VEER_OK || !sample_finite(&s);
        }
    }
    long calls = alloc_calls;
    cr_assert_eq(veer_set_allocator(NULL, NULL, NULL), VEER_OK);
    cr_assert(ok, "case %d: the cart cannot load its plan: %s: %s", index, veer_status_name(st), diag.message);
    cr_assert_eq(bad, 0, "case %d: %d cart-side calls failed or gave non-finite values", index, bad);
    cr_assert(armed && ran, "case %d: the player did not arm (%d) or start (%d) the plan", index, armed, ran);
    return calls;
}

/* ---- the property runs -------------------------------------------------- */

typedef struct {
    int cases, ok, infeasible, geometry, cart_checked;
    int moving, moving_ok, moving_jerk; /* cases planned on the move; how many planned; with jerk limits */
    int over_check, over_dense, bad_kin, bad_pose; /* cases that broke a property */
    double worst, worst_check, kin_err, pose_err;
    int worst_case;
} tally;

static int cases_for(int full) {
    const char *e = getenv("VEER_PROPERTY_CASES");
    if (!e || !*e) return full;
    long total = strtol(e, NULL, 10); /* spread over the 2000 of the full run */
    if (total <= 0 || total >= 2000) return full;
    int n = (int)(full * total / 2000);
    return n < 1 ? 1 : n;
}

static const char *kind_name(veer_drive_kind k) {
    return k == VEER_DRIVE_STEERED ? "steered" : k == VEER_DRIVE_MECANUM ? "mecanum" : k == VEER_DRIVE_OMNI ? "omni"
                                                                                                          : "differential";
}

/* Plans and checks every case, then fails with a summary if any case broke
 * a property (so one run shows how many, and which: seed and case index
 * reproduce each). Statuses, NaNs and cart-side allocations fail at once. */
static void run_cases(veer_drive_kind kind, uint64_t seed, int full, tally *tl) {
    int n = cases_for(full), shown = 0;
    memset(tl, 0, sizeof *tl);
    for (int k = 0; k < n; k++) {
        rng r = {seed + 7919u * (uint64_t)k};
        case_def c;
        memset(&c, 0, sizeof c);
        random_cart(&r, kind, &c);
        cr_assert(random_route(&r, &c), "case %d: the generator overfilled the route", k);
        tl->cases++;
        tl->moving += c.moving;
        veer_plan *p = NULL;
        veer_diag diag;
        veer_status st = veer_plan_create(&c.drive, &c.limits, &c.route, &c.options, &p, &diag);
        if (st != VEER_OK) {
            cr_assert(st == VEER_ERR_INFEASIBLE || st == VEER_ERR_GEOMETRY,
                      "%s seed %#llx case %d: %s is not a named refusal of the route: %s", kind_name(kind),
                      (unsigned long long)seed, k, veer_status_name(st), diag.message);
            cr_assert(diag.message[0] != 0 && p == NULL, "case %d: refusal without a message", k);
            cr_assert(diag.leg >= 0 || diag.waypoint >= 0 || diag.limit.kind != VEER_LIMIT_NONE,
                      "case %d: refusal (%s) names no leg, waypoint or limit: %s", k, veer_status_name(st),
                      diag.message);
            if (st == VEER_ERR_INFEASIBLE) tl->infeasible++;
            else tl->geometry++;
            continue;
        }
        tl->ok++;
        tl->moving_ok += c.moving;
        tl->moving_jerk += c.moving && c.jerk;
        double T = veer_plan_duration(p);
        cr_assert(isfinite(T) && T > 0.0 && T < 3600.0, "case %d: duration %g", k, T);

        veer_check_report rep;
        cr_assert_eq(veer_plan_check_limits(p, DT, &rep), VEER_OK);
        cr_assert(isfinite(rep.worst), "case %d: veer_plan_check_limits gave %g", k, rep.worst);
        dense_result dr = dense_check(p, &c);
        cr_assert_eq(dr.nan, 0, "case %d: %d samples failed or had a NaN", k, dr.nan);
        cr_assert(dr.samples > 0);

        int broke = 0;
        char why[256] = "";
        if (rep.worst > 1.0 + TOL) {
            char name[48];
            (void)veer_limit_name(rep.limit, name, sizeof name);
            tl->over_check++;
            broke = 1;
            snprintf(why + strlen(why), sizeof why - strlen(why), " check_limits: %s %.4f at t=%.3f s;", name,
                     rep.worst, rep.t);
        }
        if (dr.limit.worst > 1.0 + TOL) {
            tl->over_dense++;
            broke = 1;
            snprintf(why + strlen(why), sizeof why - strlen(why), " samples: %s %.4f at t=%.3f s;", dr.limit.what,
                     dr.limit.worst, dr.limit.t);
        }
        /* Kinematics: the module setpoints are the textbook ones for the
         * sampled twist (1e-6 of the wheel-rate limit, or 1e-6 rad). */
        if (dr.kin_err >= 1e-6) {
            tl->bad_kin++;
            broke = 1;
            snprintf(why + strlen(why), sizeof why - strlen(why), " kinematics off by %.3g;", dr.kin_err);
        }
        /* Pose against twist, beyond the trapezoid rule's own error: 1e-4
         * (m/s or rad/s) leaves room for smooth jerk (h^2/12 * 1200 m/s^3). */
        if (dr.pose_err >= 1e-4) {
            tl->bad_pose++;
            broke = 1;
            snprintf(why + strlen(why), sizeof why - strlen(why), " pose/twist off by %.3g (axis %d, t=%.3f s);",
                     dr.pose_err, dr.pose_axis, dr.pose_t);
        }
        if (broke && shown++ < 12)
            cr_log_error("%s seed %#llx case %d (%.1f s, %d legs%s%s%s):%s", kind_name(kind),
                         (unsigned long long)seed, k, T, c.route.leg_count, c.jerk ? ", jerk" : "",
                         isfinite(c.limits.modules[0].traction_mu) ? ", traction" : "", c.moving ? ", moving" : "",
                         why);
        if (rep.worst > tl->worst_check) tl->worst_check = rep.worst;
        if (dr.limit.worst > tl->worst) {
            tl->worst = dr.limit.worst;
            tl->worst_case = k;
        }
        if (dr.kin_err > tl->kin_err) tl->kin_err = dr.kin_err;
        if (dr.pose_err > tl->pose_err) tl->pose_err = dr.pose_err;

        if (tl->ok % 10 == 1) {
            long calls = cart_side_allocations(p, &c, k);
            cr_assert_eq(calls, 0, "case %d: the cart side allocated %ld times", k, calls);
            tl->cart_checked++;
        }
        veer_plan_destroy(p);
    }
    /* A line for the log (cr_log_warn would make Criterion exit non-zero). */
    fprintf(stderr, "property: %s: %d cases, %d planned, %d infeasible, %d refused geometry; worst limit ratio %.4f (samples, "
                "case %d), %.4f (veer_plan_check_limits); kinematics %.2g, pose %.2g; cart side checked on %d plans; "
                "on the move: %d cases, %d planned, %d of them jerk-limited\n",
                kind_name(kind), tl->cases, tl->ok, tl->infeasible, tl->geometry, tl->worst, tl->worst_case,
                tl->worst_check, tl->kin_err, tl->pose_err, tl->cart_checked, tl->moving, tl->moving_ok,
                tl->moving_jerk);
    /* The generator makes routes a careful user would: most of them must
     * plan, or the property says little. */
    cr_assert(tl->ok >= (tl->cases * 7) / 10, "only %d of %d random cases planned", tl->ok, tl->cases);
    cr_assert(tl->cart_checked >= 1);
    cr_expect(tl->over_check == 0 && tl->over_dense == 0,
              "%s: limits exceeded by more than 1 %% in %d of %d plans (veer_plan_check_limits) and %d (own "
              "checks); worst %.4f / %.4f",
              kind_name(kind), tl->over_check, tl->ok, tl->over_dense, tl->worst_check, tl->worst);
    cr_expect(tl->bad_kin == 0, "%s: setpoints disagree with the kinematics in %d plans (worst %.3g)", kind_name(kind),
              tl->bad_kin, tl->kin_err);
    cr_expect(tl->bad_pose == 0, "%s: pose does not integrate the twist in %d plans (worst %.3g)", kind_name(kind),
              tl->bad_pose, tl->pose_err);
}

/* 2000 cases in all: steered carts have the most freedom, so the most cases. */
Test(property, steered, .timeout = 1200) {
    tally t;
    run_cases(VEER_DRIVE_STEERED, 0x5eed0001u, 800, &t);
}

Test(property, mecanum, .timeout = 1200) {
    tally t;
    run_cases(VEER_DRIVE_MECANUM, 0x5eed0002u, 400, &t);
}

Test(property, omni, .timeout = 1200) {
    tally t;
    run_cases(VEER_DRIVE_OMNI, 0x5eed0003u, 400, &t);
}

Test(property, differential, .timeout = 1200) {
    tally t;
    run_cases(VEER_DRIVE_DIFFERENTIAL, 0x5eed0004u, 400, &t);
}

/* Re-planning on the move with jerk limits, on 120 more cases: the first
 * stretch holds the start speed for half the averaging window (plan.c), a
 * path the random runs take only a few times. */
Test(property, moving_jerk, .timeout = 1200) {
    tally t;
    force_moving_jerk = 1;
    run_cases(VEER_DRIVE_STEERED, 0x5eed0011u, 60, &t);
    cr_expect(t.moving_jerk >= 30, "only %d of 60 steered cases planned on the move with jerk limits", t.moving_jerk);
    run_cases(VEER_DRIVE_MECANUM, 0x5eed0012u, 30, &t);
    run_cases(VEER_DRIVE_OMNI, 0x5eed0013u, 30, &t);
    force_moving_jerk = 0;
}

/* The independent checks can fail: a plan sampled against tighter limits
 * than it was made for must show the excess, and a wrong wheel radius must
 * show in the kinematics. */
Test(property, checks_catch_violations) {
    rng r = {0xc0ffee};
    case_def c;
    memset(&c, 0, sizeof c);
    random_cart(&r, VEER_DRIVE_STEERED, &c);
    c.jerk = 0;
    c.limits.body_jerk = VEER_UNLIMITED;
    for (int i = 0; i < VEER_MAX_MODULES; i++) c.limits.modules[i].wheel_jerk = VEER_UNLIMITED;
    c.route = veer_default_route(0.0, 0.0, 0.0);
    veer_leg leg = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&c.route, &leg), VEER_OK);
    veer_waypoint w = veer_default_waypoint(6.0, 0.0);
    cr_assert_eq(veer_route_add_waypoint(&c.route, &w), VEER_OK);
    c.options = veer_default_plan_options();
    veer_plan *p = NULL;
    veer_diag diag;
    cr_assert_eq(veer_plan_create(&c.drive, &c.limits, &c.route, &c.options, &p, &diag), VEER_OK, "%s", diag.message);
    dense_result dr = dense_check(p, &c);
    cr_assert(dr.limit.worst <= 1.0 + TOL && dr.limit.worst > 0.5);
    case_def tight = c;
    for (int i = 0; i < VEER_MAX_MODULES; i++) {
        tight.limits.modules[i].wheel_rate *= 0.9;
        tight.limits.modules[i].wheel_accel *= 0.9;
        tight.limits.modules[i].steer_rate *= 0.9;
    }
    tight.limits.body_speed *= 0.9;
    tight.limits.body_accel *= 0.9;
    tight.limits.yaw_rate *= 0.9;
    tight.limits.yaw_accel *= 0.9;
    dr = dense_check(p, &tight);
    cr_assert(dr.limit.worst > 1.0 + TOL, "10 %% tighter limits went unnoticed (%.4f)", dr.limit.worst);
    case_def wrong = c;
    wrong.drive.wheel_radius *= 1.01;
    dr = dense_check(p, &wrong);
    cr_assert(dr.kin_err > 1e-4, "a 1 %% wrong wheel radius went unnoticed (%g)", dr.kin_err);
    veer_plan_destroy(p);
}
