/* Random carts and routes (fixed seeds) and the dense checks of their
 * plans from the samples, with formulas of our own (sources beside each):
 * shared by the suites that plan random cases (tests/test_property.c,
 * tests/test_timing.c). Test-only; include it from one translation unit.
 * SPDX-License-Identifier: MIT */
#ifndef VEER_TEST_RANDOM_CASE_H
#define VEER_TEST_RANDOM_CASE_H

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>
#include <veer/veer.h>
#include "plan_check.h"
#include "rng.h" /* splitmix64 */

#define PI 3.14159265358979323846
#define G0 9.80665 /* m/s^2, standard gravity (3rd CGPM, 1901) */
#define TOL 0.01   /* every limit within 1 % (issue 7) */
#define DT 1e-3    /* s: sampled every millisecond */


static inline double wrap(double a) { return a - 2.0 * PI * floor((a + PI) / (2.0 * PI)); }

/* ---- case generator ----------------------------------------------------- */

/* 1 in the moving_jerk runs: every cart has jerk limits and every route
 * starts on the move along a held-heading line (the rare combination of the
 * random runs, which re-planning while driving with jerk limits exercises). */
static int force_moving_jerk;
/* Share of the carts that get jerk limits (the property runs' 6 %). */
static double case_jerk_chance = 0.06;

typedef struct {
    veer_drive_def drive;
    veer_limits limits;
    veer_route route;
    veer_plan_options options;
    int jerk; /* 1: jerk limits set */
    int moving; /* 1: planned on the move (start twist) */
} case_def;

/* A cart of the given kind with a random layout and random limits. */
static inline void random_cart(rng *r, veer_drive_kind kind, case_def *c) {
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
    c->jerk = force_moving_jerk || chance(r, case_jerk_chance);
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

static inline int add_spin_to(veer_route *rt, pose2 *at, double yaw) {
    if (fabs(wrap(yaw - at->yaw)) < 0.05) return 1; /* close enough for the 5-degree ease-in */
    veer_leg s = veer_default_leg(VEER_LEG_SPIN);
    s.yaw = yaw;
    if (veer_route_add_leg(rt, &s) != VEER_OK) return 0;
    at->yaw = yaw;
    return 1;
}

/* A travel leg through 1..4 random waypoints. */
static inline int random_travel(rng *r, const case_def *c, veer_route *rt, pose2 *at) {
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

static inline int random_route(rng *r, case_def *c) {
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

/* The worst figure / limit is kept in plan_check.h's result (pc_note). */
static inline int sample_finite(const veer_sample *s) { return isfinite(s->t) && pc_finite_sample(s); }

/* Wheel rates (rad/s) of a fixed-wheel drive for a body twist, from the
 * textbook kinematics, written out here independently of src/drive_*.c:
 *   mecanum and omni: u_i = (1/r) [cos b_i + ..] (Lynch & Park, "Modern
 *   Robotics", Cambridge 2017, eq. 13.5 and 13.10, the same forms as
 *   tests/python/reference.py); differential: v -+ (d/2) w over r with the
 *   effective track d = skid_factor * track (Siciliano et al., "Robotics:
 *   Modelling, Planning and Control", Springer 2009, 11.2; the ICR model of
 *   skid steer). Steered modules: |v + w x r_i| / r (rigid body, Lynch &
 *   Park 13.2). */
static inline void wheel_rates(const veer_drive_def *d, const double tw[3], double *u, double *dir) {
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
static inline void contact(const veer_drive_def *d, int i, double p[2]) {
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
    plan_check_result limit; /* largest figure / limit (worst, worst_name, worst_t) */
    double kin_err;      /* largest disagreement of wheel rate or steer with the textbook kinematics */
    double pose_err;     /* largest |d pose / dt - twist| (m/s, rad/s) beyond the trapezoid rule's error */
    double pose_t;
    int pose_axis;
    int nan;
    long samples;
} dense_result;

/* Samples the plan every millisecond and checks everything from the samples. */
static inline dense_result dense_check(const veer_plan *p, const case_def *c) {
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
        pc_note(&out.limit, hypot(s.twist_world[0], s.twist_world[1]), l->body_speed, "body_speed", -1, t);
        pc_note(&out.limit, hypot(s.accel_world[0], s.accel_world[1]), l->body_accel, "body_accel", -1, t);
        pc_note(&out.limit, s.twist_world[2], l->yaw_rate, "yaw_rate", -1, t);
        pc_note(&out.limit, s.accel_world[2], l->yaw_accel, "yaw_accel", -1, t);
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
                    pc_note(&out.limit, (k0 - 2.0 * k1[i] + k2[i]) / h2, l->modules[i].wheel_jerk,
                         "wheel_jerk(kinematics, twice differenced)", i, t);
                k2[i] = k1[i];
                k1[i] = k0;
            }
            if (even >= 3)
                pc_note(&out.limit,
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
                pc_note(&out.limit, m->steer_rate, ml->steer_rate, "steer_rate", i, t);
                if (m->steer > ml->steer_max + 1e-9 || m->steer < ml->steer_min - 1e-9)
                    pc_note(&out.limit, 2.0, 1.0, "steer_range", i, t);
            } else {
                e = fabs(m->wheel_rate - u[i]) / scale;
            }
            if (e > out.kin_err) out.kin_err = e;
            pc_note(&out.limit, u[i], ml->wheel_rate, "wheel_rate(kinematics)", i, t);
            pc_note(&out.limit, m->wheel_rate, ml->wheel_rate, "wheel_rate", i, t);
            pc_note(&out.limit, m->wheel_accel, ml->wheel_accel, "wheel_accel", i, t);
            if (isfinite(ml->traction_mu)) {
                /* Contact point acceleration of a rigid body in the plane:
                 * a + alpha k x R r - w^2 R r (any dynamics text, e.g. Lynch
                 * & Park 13.2 differentiated), against mu g. */
                double rb[2];
                contact(d, i, rb);
                double rx = cy * rb[0] - sy * rb[1], ry = sy * rb[0] + cy * rb[1];
                double w = s.twist_world[2], al = s.accel_world[2];
                double ax = s.accel_world[0] - al * ry - w * w * rx, ay = s.accel_world[1] + al * rx - w * w * ry;
                pc_note(&out.limit, hypot(ax, ay), ml->traction_mu * G0, "traction", i, t);
            }
        }
        if (have && t > prev.t) {
            double h = t - prev.t;
            /* Mean-value theorem: a difference quotient over 1 ms is a mean of
             * the derivative, so it obeys every bound the derivative obeys. */
            for (int i = 0; i < M; i++) {
                const veer_module_limits *ml = &l->modules[i];
                if (d->kind == VEER_DRIVE_STEERED)
                    pc_note(&out.limit, (s.modules[i].steer - prev.modules[i].steer) / h, ml->steer_rate,
                         "steer_rate(differenced)", i, t);
                pc_note(&out.limit, (s.modules[i].wheel_rate - prev.modules[i].wheel_rate) / h, ml->wheel_accel,
                     "wheel_accel(differenced)", i, t);
                if (c->jerk)
                    pc_note(&out.limit, (s.modules[i].wheel_accel - prev.modules[i].wheel_accel) / h, ml->wheel_jerk,
                         "wheel_jerk(differenced)", i, t);
            }
            pc_note(&out.limit, hypot(s.twist_world[0] - prev.twist_world[0], s.twist_world[1] - prev.twist_world[1]) / h,
                 l->body_accel, "body_accel(differenced)", -1, t);
            pc_note(&out.limit, (s.twist_world[2] - prev.twist_world[2]) / h, l->yaw_accel, "yaw_accel(differenced)", -1, t);
            if (c->jerk)
                pc_note(&out.limit,
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

#endif
