/* Constraints: every limit as rows a*u + b*x <= c at a path position
 * (u = sddot, x = sdot^2; TOPP-RA's form, Pham & Pham, IEEE T-RO 2018).
 * The maths is in design.md: module velocity p' sdot, steer rate
 * phi' sdot, wheel acceleration |p'|' x + |p'| u; linear drives J xi.
 * SPDX-License-Identifier: MIT */
#include "plan_internal.h"

/* Below this module speed per unit sdot (m per unit s) a steer direction is
 * not defined; the module keeps its angle. */
#define VEER_STILL 1e-9

void veer__point_kin(const veer_path *path, int seg, double s, veer_point_kin *out) {
    veer__path_eval(path, seg, s, out->q, out->dq, out->ddq);
    double c = cos(out->q[2]), sn = sin(out->q[2]);
    double w = out->dq[2];
    /* g = R(-yaw) p', g' = R(-yaw) p'' - yaw' J g, with J the 90-degree rotation. */
    double gx = c * out->dq[0] + sn * out->dq[1];
    double gy = -sn * out->dq[0] + c * out->dq[1];
    double hx = c * out->ddq[0] + sn * out->ddq[1];
    double hy = -sn * out->ddq[0] + c * out->ddq[1];
    out->xi[0] = gx;
    out->xi[1] = gy;
    out->xi[2] = w;
    out->dxi[0] = hx + w * gy;
    out->dxi[1] = hy - w * gx;
    out->dxi[2] = out->ddq[2];
}

void veer__module_velocity(const veer_drive_def *drive, int i, const veer_point_kin *pk, double v[2], double dv[2]) {
    double x = drive->modules[i].x, y = drive->modules[i].y;
    /* Rigid body: v_i = v + w x r_i, in the body frame. */
    v[0] = pk->xi[0] - pk->xi[2] * y;
    v[1] = pk->xi[1] + pk->xi[2] * x;
    dv[0] = pk->dxi[0] - pk->dxi[2] * y;
    dv[1] = pk->dxi[1] + pk->dxi[2] * x;
}

static int set(double v) { return isfinite(v); }

static void polygon_init(veer_polygon *pg, int sides, double radius) {
    pg->faces = sides / 2 < VEER_MAX_POLYGON_FACES ? sides / 2 : VEER_MAX_POLYGON_FACES; /* options are checked; never overflow */
    if (pg->faces < 1) pg->faces = 1;
    if (sides < 2) sides = 2;
    pg->half = (pg->faces + 1) / 2;
    /* Faces of the polygon inscribed in the circle of radius `radius`, with a
     * vertex on the tangent: normals at odd multiples of pi / sides, over
     * (0, pi). Face faces - 1 - j is at pi minus face j's angle: cos
     * negated, sin the same, so only the first half is kept (polygon_rows
     * mirrors it). */
    for (int j = 0; j < pg->half && j < VEER_MAX_POLYGON_FACES / 2; j++) {
        double ang = (2 * j + 1) * VEER_PI / sides;
        pg->c[j] = cos(ang);
        pg->s[j] = sin(ang);
    }
    pg->r = radius * cos(VEER_PI / sides);
    pg->radius = radius;
}

void veer__row_ctx_init(veer_row_ctx *ctx, const veer_drive_def *drive, const veer_limits *limits,
                        const veer_plan_options *opt) {
    ctx->drive = drive;
    ctx->limits = limits;
    ctx->module_count = veer_drive_module_count(drive);
    polygon_init(&ctx->accel, opt->accel_polygon_sides, limits->body_accel);
    polygon_init(&ctx->traction, opt->traction_polygon_sides, 1.0);
    ctx->linear = veer__drive_wheel_matrix(drive, ctx->J) > 0;
    ctx->degraded = 0;
    for (int i = 0; i < ctx->module_count; i++) {
        veer__module_position(drive, i, ctx->pos[i]);
        ctx->degraded |= drive->modules[i].out;
    }
    ctx->m = ctx->accel.faces + 2 + ctx->module_count * (4 + ctx->traction.faces);
    /* which limits are set, tested once here rather than at every point */
    ctx->on_body = (unsigned)set(limits->body_speed) * VEER_ON_BODY_SPEED | (unsigned)set(limits->yaw_rate) * VEER_ON_YAW_RATE |
                   (unsigned)set(limits->yaw_accel) * VEER_ON_YAW_ACCEL | (unsigned)set(limits->body_accel) * VEER_ON_BODY_ACCEL;
    for (int i = 0; i < ctx->module_count && i < VEER_MAX_MODULES; i++) {
        const veer_module_limits *ml = &limits->modules[i];
        ctx->on_mod[i] = (unsigned)set(ml->steer_rate) * VEER_ON_STEER_RATE | (unsigned)set(ml->wheel_rate) * VEER_ON_WHEEL_RATE |
                         (unsigned)set(ml->wheel_accel) * VEER_ON_WHEEL_ACCEL |
                         (unsigned)set(ml->motor_stall_accel) * VEER_ON_MOTOR |
                         (unsigned)set(ml->motor_free_rate) * VEER_ON_MOTOR_FREE |
                         (unsigned)set(ml->traction_mu) * VEER_ON_TRACTION;
    }
}

static void tighten(double *xmax, veer_limit_id *id, double bound, veer_limit_id which) {
    if (bound < *xmax) {
        *xmax = bound;
        *id = which;
    }
}

/* |f| sdot <= L  ->  x <= L^2 / f^2 (on: the limit is set) */
static void speed_row2(unsigned on, double f2, double limit, double *xmax, veer_limit_id *id, veer_limit_id which) {
    if (on && f2 > 0.0) tighten(xmax, id, limit * limit / f2, which);
}

static void speed_row(unsigned on, double f, double limit, double *xmax, veer_limit_id *id, veer_limit_id which) {
    speed_row2(on, f * f, limit, xmax, id, which);
}

/* Where the u-rows go (mode, a constant where the builder is inlined):
 *   ROWS_WRITE  into rows (veer__point_rows);
 *   ROWS_WORST  nowhere: best is the largest (a u + b x) / c of the rows
 *               with c > 0 at the given (u, x), for the between-grid-point
 *               check (veer__point_worst);
 *   ROWS_DECEL  nowhere: best is the largest (c - b x) / a of the rows with
 *               a < 0 at the given x, the hardest braking they allow
 *               (veer__point_decel, for the controlled stop); a row whose a
 *               is negligible (veer__row_x_only) bounds x only, and says
 *               nothing of braking.
 * m counts the rows. */
enum { ROWS_WRITE, ROWS_WORST, ROWS_DECEL };
typedef struct {
    veer_row *rows;
    int mode;
    int m;
    double u, x, best;
} row_out;

/* The row builder is inlined into its three users, so each is compiled for
 * its own kind of row_out (not when optimizing for size: a cart's firmware
 * links veer__point_decel, through stop.c). */
#if defined(__GNUC__) && !defined(__OPTIMIZE_SIZE__)
#define VEER_ROWS_INLINE static inline __attribute__((always_inline))
#else
#define VEER_ROWS_INLINE static inline
#endif

VEER_ROWS_INLINE void put(row_out *o, double a, double b, double c, veer_limit_id id) {
    if (o->mode == ROWS_WRITE) {
        o->rows[o->m] = (veer_row){a, b, c, id};
    } else if (o->mode == ROWS_WORST) {
        if (c > 0.0) {
            double v = (a * o->u + b * o->x) / c;
            if (v > o->best) o->best = v;
        }
    } else if (a < 0.0 && !veer__row_x_only(a, b, c)) {
        double v = (c - b * o->x) / a;
        if (v > o->best) o->best = v;
    }
    o->m++;
}

/* |f u + df x| <= L as two rows */
VEER_ROWS_INLINE void accel_rows(unsigned on, row_out *o, double f, double df, double limit, veer_limit_id which) {
    if (!on) return;
    put(o, f, df, limit, which);
    put(o, -f, -df, limit, which);
}

/* |p' u + p'' x| <= R for a point with path derivatives p', p'' (world):
 * a polygon inscribed in the circle, built in the path's tangent frame with
 * a vertex on the tangent, so that straight-line braking and accelerating
 * use the full limit. The normal acceleration an_x * x has a known sign
 * (x >= 0), so only the faces on its side can bind, and of those only the
 * faces that reach down to the highest normal acceleration the point's
 * speed bound xmax allows. radius scales the polygon (R = pg->radius * scale). */
VEER_ROWS_INLINE void polygon_rows(const veer_polygon *pg, double scale, const double p1[2], const double p2[2], double xmax,
                             veer_limit_id id, row_out *o) {
    double sp = sqrt(p1[0] * p1[0] + p1[1] * p1[1]); /* path derivatives: no overflow to guard against */
    if (!(sp > 0.0 || p2[0] != 0.0 || p2[1] != 0.0)) return;
    double tx = 1.0, ty = 0.0;
    if (sp > 0.0) {
        tx = p1[0] / sp;
        ty = p1[1] / sp;
    }
    double at_u = sp, at_x = p2[0] * tx + p2[1] * ty; /* tangential: at_u u + at_x x */
    double an_x = -p2[0] * ty + p2[1] * tx;            /* normal: an_x x */
    double side = an_x >= 0.0 ? 1.0 : -1.0;
    double an_max = fabs(an_x) * xmax / (pg->radius * scale); /* inf * 0 is NaN: then every face is kept */
    double top = an_max * (1.0 + 1e-9);
    double an = side * an_x; /* (side * s) * an_x = s * an, bit for bit (side is +-1) */
    double rc = pg->r * scale;
    /* Face j joins vertices j and j + 1, at heights sin(2 pi j / sides) and
     * sin(2 pi (j + 1) / sides) on the unit circle; h, the lower of the two,
     * rises to the middle face and falls again, mirrored. A face can bind
     * only if h <= top, so the faces kept are a run [0, a) and its mirror
     * [faces - a, faces), or all of them once the run passes the middle.
     * For j < half the lower vertex is vertex j, at angle ang_j - pi / sides:
     * h = sin(ang_j) cos(pi / sides) - cos(ang_j) sin(pi / sides), with the
     * cos and sin of pi / sides those of face 0; face 0's h is 0 exactly. */
    const double c0 = pg->c[0], s0 = pg->s[0];
    int a = 0;
    double h = 0.0;
    while (!(h > top)) { /* top is NaN: every face is kept */
        double ca = pg->c[a];
        put(o, ca * at_u, ca * at_x + pg->s[a] * an, rc, id);
        if (++a == pg->half) break;
        h = pg->s[a] * c0 - pg->c[a] * s0;
    }
    /* the mirrored run, faces - a .. faces - 1 in order, from the stored
     * faces a - 1 .. 0; past the middle, the faces not yet made */
    int m = pg->faces - pg->half;
    for (int k = (a < m ? a : m) - 1; k >= 0; k--) {
        double ca = -pg->c[k];
        put(o, ca * at_u, ca * at_x + pg->s[k] * an, rc, id);
    }
}

/* Path derivatives (world) of the contact point of a module at body offset r. */
static void contact_point(const veer_point_kin *pk, const double r[2], double p1[2], double p2[2]) {
    double c = cos(pk->q[2]), sn = sin(pk->q[2]);
    double wx = c * r[0] - sn * r[1], wy = sn * r[0] + c * r[1]; /* R(yaw) r */
    double w = pk->dq[2], dw = pk->ddq[2];
    /* p_i = p + R r:  p_i' = p' + yaw' J R r,  p_i'' = p'' + yaw'' J R r - yaw'^2 R r */
    p1[0] = pk->dq[0] - w * wy;
    p1[1] = pk->dq[1] + w * wx;
    p2[0] = pk->ddq[0] - dw * wy - w * w * wx;
    p2[1] = pk->ddq[1] + dw * wx - w * w * wy;
}

/* Rows of one module with wheel rate f sdot (f >= 0) and rate of change
 * f u + df x: speed, acceleration, motor curve (linearized at x_lin, see
 * below), traction. */
VEER_ROWS_INLINE void module_rows(const veer_row_ctx *ctx, int i, const veer_point_kin *pk, double f, double df, double x_lin,
                             row_out *o, double *xmax, veer_limit_id *xmax_id) {
    const veer_module_limits *ml = &ctx->limits->modules[i];
    unsigned on = ctx->on_mod[i];
    speed_row(on & VEER_ON_WHEEL_RATE, f, ml->wheel_rate, xmax, xmax_id, veer__limit(VEER_LIMIT_WHEEL_SPEED, i));
    accel_rows(on & VEER_ON_WHEEL_ACCEL, o, f, df, ml->wheel_accel, veer__limit(VEER_LIMIT_WHEEL_ACCEL, i));
    if ((on & VEER_ON_MOTOR) && f > 0.0) {
        /* Driving: f u + df x <= A (1 - f sqrt(x) / w_free). sqrt is concave,
         * so its tangent at x_lin lies above it, sqrt(x) <= sqrt(x0)/2 +
         * x / (2 sqrt(x0)): the row is never looser than the motor curve and
         * exact at x_lin. Braking may use the stall acceleration. */
        veer_limit_id id = veer__limit(VEER_LIMIT_MOTOR, i);
        double A = ml->motor_stall_accel, wf = ml->motor_free_rate;
        double x_free = wf * wf / (f * f);
        speed_row(on & VEER_ON_MOTOR_FREE, f, wf, xmax, xmax_id, id);
        double x0 = x_lin > 1e-6 * x_free ? x_lin : (x_lin > 0.0 ? 1e-6 * x_free : 0.25 * x_free);
        if (x0 > x_free) x0 = x_free;
        double r0 = sqrt(x0);
        put(o, f, df + A * f / (2.0 * wf * r0), A * (1.0 - f * r0 / (2.0 * wf)), id);
        put(o, -f, -df, A, id);
    }
    if (on & VEER_ON_TRACTION) {
        double p1[2], p2[2];
        contact_point(pk, ctx->pos[i], p1, p2);
        polygon_rows(&ctx->traction, ml->traction_mu * VEER_GRAVITY, p1, p2, *xmax, veer__limit(VEER_LIMIT_TRACTION, i),
                     o);
    }
}

VEER_ROWS_INLINE int point_rows(const veer_row_ctx *ctx, const veer_point_kin *pk, double x_lin, row_out *o, double *xmax,
                           veer_limit_id *xmax_id) {
    const veer_drive_def *drive = ctx->drive;
    const veer_limits *lim = ctx->limits;
    *xmax = VEER_UNLIMITED;
    *xmax_id = veer__limit(VEER_LIMIT_NONE, -1);
    const double *dq = pk->dq, *ddq = pk->ddq;

    /* Body speed and yaw rate, yaw acceleration. */
    speed_row2(ctx->on_body & VEER_ON_BODY_SPEED, dq[0] * dq[0] + dq[1] * dq[1], lim->body_speed, xmax, xmax_id,
               veer__limit(VEER_LIMIT_BODY_SPEED, -1));
    speed_row(ctx->on_body & VEER_ON_YAW_RATE, dq[2], lim->yaw_rate, xmax, xmax_id, veer__limit(VEER_LIMIT_YAW_RATE, -1));
    accel_rows(ctx->on_body & VEER_ON_YAW_ACCEL, o, dq[2], ddq[2], lim->yaw_accel, veer__limit(VEER_LIMIT_YAW_ACCEL, -1));

    if (drive->kind == VEER_DRIVE_DIFFERENTIAL) {
        double g = hypot(pk->xi[0], pk->xi[1]) + fabs(pk->xi[2]);
        if (fabs(pk->xi[1]) > 1e-6 * (g > 1.0 ? g : 1.0)) {
            *xmax = 0.0;
            *xmax_id = veer__limit(VEER_LIMIT_NONHOLONOMIC, -1);
            return -1;
        }
    }
    if (ctx->linear && ctx->degraded && veer__drive_driven(drive, pk->xi) < 2) {
        *xmax = 0.0;
        *xmax_id = veer__limit(VEER_LIMIT_MODULE_OUT, -1);
        return -1;
    }
    for (int i = 0; i < ctx->module_count; i++) {
        if (drive->modules[i].out) continue;
        double f, df;
        if (!ctx->linear) {
            double v[2], dv[2];
            veer__module_velocity(drive, i, pk, v, dv);
            double sp2 = v[0] * v[0] + v[1] * v[1], spd = sqrt(sp2);
            if (spd > VEER_STILL) {
                double dphi = (v[0] * dv[1] - v[1] * dv[0]) / sp2; /* d steer / ds */
                speed_row(ctx->on_mod[i] & VEER_ON_STEER_RATE, dphi, lim->modules[i].steer_rate, xmax, xmax_id,
                          veer__limit(VEER_LIMIT_STEER_RATE, i));
            }
            /* Wheel rate along the wheel's direction e: (v.e) u + (v'.e) x. */
            double ex, ey;
            if (spd > VEER_STILL) {
                ex = v[0] / spd;
                ey = v[1] / spd;
            } else {
                double d = hypot(dv[0], dv[1]);
                ex = d > 0.0 ? dv[0] / d : 1.0;
                ey = d > 0.0 ? dv[1] / d : 0.0;
            }
            f = spd / drive->wheel_radius;
            df = (dv[0] * ex + dv[1] * ey) / drive->wheel_radius;
        } else {
            const double *J = ctx->J[i];
            f = J[0] * pk->xi[0] + J[1] * pk->xi[1] + J[2] * pk->xi[2];
            df = J[0] * pk->dxi[0] + J[1] * pk->dxi[1] + J[2] * pk->dxi[2];
            if (f < 0.0) { /* the direction the wheel turns */
                f = -f;
                df = -df;
            }
        }
        module_rows(ctx, i, pk, f, df, x_lin, o, xmax, xmax_id);
    }
    if (ctx->on_body & VEER_ON_BODY_ACCEL) polygon_rows(&ctx->accel, 1.0, dq, ddq, *xmax, veer__limit(VEER_LIMIT_BODY_ACCEL, -1), o);
    return o->m;
}

int veer__point_rows(const veer_row_ctx *ctx, const veer_point_kin *pk, double x_lin, veer_row *rows, double *xmax,
                     veer_limit_id *xmax_id) {
    row_out o = {rows, ROWS_WRITE, 0, 0.0, 0.0, 0.0};
    return point_rows(ctx, pk, x_lin, &o, xmax, xmax_id);
}

int veer__point_worst(const veer_row_ctx *ctx, const veer_point_kin *pk, double u, double x, double *worst,
                      double *xmax, veer_limit_id *xmax_id) {
    row_out o = {NULL, ROWS_WORST, 0, u, x, -VEER_UNLIMITED};
    int c = point_rows(ctx, pk, x, &o, xmax, xmax_id);
    *worst = o.best;
    return c;
}

int veer__point_decel(const veer_row_ctx *ctx, const veer_point_kin *pk, double x, double *decel, double *xmax,
                      veer_limit_id *xmax_id) {
    row_out o = {NULL, ROWS_DECEL, 0, 0.0, x, -VEER_UNLIMITED};
    int c = point_rows(ctx, pk, x, &o, xmax, xmax_id);
    *decel = c < 0 ? -VEER_UNLIMITED : o.best; /* as if no row had been written */
    return c;
}

static veer_status check_one(veer_diag *diag, double v, veer_limit_id id, int allow_any_sign) {
    if (!isnan(v) && (allow_any_sign || v >= 1e-9)) return VEER_OK;
    char name[48]; /* named on failure only */
    veer_limit_name(id, name, sizeof name);
    if (isnan(v) || (!allow_any_sign && v < 0.0))
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, id,
                          "limit %s must be a positive number or unset (+inf), got %g", name, v);
    if (!allow_any_sign && v > 0.0 && v < 1e-9) /* a denormal limit gave infinite durations (fuzz finding) */
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, id, "limit %s is implausibly small (%g)", name, v);
    if (!allow_any_sign && v == 0.0)
        return veer__fail(diag, VEER_ERR_INFEASIBLE, -1, -1, -1, -1.0, id,
                          "limit %s is zero: the cart cannot move within it", name);
    return VEER_OK;
}

veer_status veer__limits_check(const veer_drive_def *drive, const veer_limits *lim, veer_diag *diag) {
    veer_status st;
    if ((st = check_one(diag, lim->body_speed, veer__limit(VEER_LIMIT_BODY_SPEED, -1), 0))) return st;
    if ((st = check_one(diag, lim->body_accel, veer__limit(VEER_LIMIT_BODY_ACCEL, -1), 0))) return st;
    if ((st = check_one(diag, lim->yaw_rate, veer__limit(VEER_LIMIT_YAW_RATE, -1), 0))) return st;
    if ((st = check_one(diag, lim->yaw_accel, veer__limit(VEER_LIMIT_YAW_ACCEL, -1), 0))) return st;
    if ((st = check_one(diag, lim->body_jerk, veer__limit(VEER_LIMIT_BODY_JERK, -1), 0))) return st;
    int n = veer_drive_module_count(drive);
    for (int i = 0; i < n; i++) {
        const veer_module_limits *ml = &lim->modules[i];
        if ((st = check_one(diag, ml->wheel_rate, veer__limit(VEER_LIMIT_WHEEL_SPEED, i), 0))) return st;
        if ((st = check_one(diag, ml->wheel_accel, veer__limit(VEER_LIMIT_WHEEL_ACCEL, i), 0))) return st;
        if ((st = check_one(diag, ml->wheel_jerk, veer__limit(VEER_LIMIT_WHEEL_JERK, i), 0))) return st;
        if ((st = check_one(diag, ml->traction_mu, veer__limit(VEER_LIMIT_TRACTION, i), 0))) return st;
        veer_limit_id mid = veer__limit(VEER_LIMIT_MOTOR, i);
        if ((st = check_one(diag, ml->motor_stall_accel, mid, 0))) return st;
        if ((st = check_one(diag, ml->motor_free_rate, mid, 0))) return st;
        if (isfinite(ml->motor_stall_accel) != isfinite(ml->motor_free_rate))
            return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, mid,
                              "motor_curve[%d]: set both motor_stall_accel and motor_free_rate, or neither", i);
        if (drive->kind != VEER_DRIVE_STEERED) continue;
        if ((st = check_one(diag, ml->steer_rate, veer__limit(VEER_LIMIT_STEER_RATE, i), 0))) return st;
        veer_limit_id rid = veer__limit(VEER_LIMIT_STEER_RANGE, i);
        if ((st = check_one(diag, ml->steer_min, rid, 1))) return st;
        if ((st = check_one(diag, ml->steer_max, rid, 1))) return st;
        if (!(ml->steer_max - ml->steer_min >= VEER_PI))
            return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, rid,
                              "steer_range[%d] [%g, %g] rad spans less than pi: the module could not point in "
                              "every direction even with wheel reversal",
                              i, ml->steer_min, ml->steer_max);
    }
    return VEER_OK;
}
