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

void veer__row_ctx_init(veer_row_ctx *ctx, const veer_drive_def *drive, const veer_limits *limits,
                        const veer_plan_options *opt) {
    ctx->drive = drive;
    ctx->limits = limits;
    ctx->module_count = veer_drive_module_count(drive);
    int sides = opt->accel_polygon_sides;
    ctx->faces = sides / 2;
    /* Faces of the polygon inscribed in the circle of radius body_accel,
     * with a vertex on the tangent: normals at odd multiples of pi / sides. */
    for (int j = 0; j < ctx->faces && j < VEER_MAX_POLYGON_FACES; j++) {
        double ang = (2 * j + 1) * VEER_PI / sides;
        ctx->face_c[j] = cos(ang);
        ctx->face_s[j] = sin(ang);
        /* the face joins vertices j and j + 1, at heights A sin(2 pi j / sides) ... */
        double h0 = sin(2.0 * VEER_PI * j / sides), h1 = sin(2.0 * VEER_PI * (j + 1) / sides);
        double h = h0 < h1 ? h0 : h1;
        ctx->face_h[j] = h < 1e-12 ? 0.0 : limits->body_accel * h; /* sin(pi) is not exactly 0 */
    }
    ctx->face_r = limits->body_accel * cos(VEER_PI / sides);
    ctx->linear = veer__drive_wheel_matrix(drive, ctx->J) > 0;
    ctx->m = ctx->faces + 2 + 2 * ctx->module_count;
}

static void tighten(double *xmax, veer_limit_id *id, double bound, veer_limit_id which) {
    if (bound < *xmax) {
        *xmax = bound;
        *id = which;
    }
}

/* |f| sdot <= L  ->  x <= L^2 / f^2 */
static void speed_row(double f, double limit, double *xmax, veer_limit_id *id, veer_limit_id which) {
    double f2 = f * f;
    if (set(limit) && f2 > 0.0) tighten(xmax, id, limit * limit / f2, which);
}

/* |f u + df x| <= L as two rows */
static int accel_rows(veer_row *rows, double f, double df, double limit, veer_limit_id which) {
    if (!set(limit)) return 0;
    rows[0] = (veer_row){f, df, limit, which};
    rows[1] = (veer_row){-f, -df, limit, which};
    return 2;
}

/* Body acceleration |p' u + p'' x| <= A: a polygon inscribed in the circle,
 * built in the path's tangent frame with a vertex on the tangent, so that
 * straight-line braking and accelerating use the full limit. The normal
 * acceleration an_x * x has a known sign (x >= 0), so only the faces on its
 * side can bind, and of those only the faces that reach down to the highest
 * normal acceleration the point's speed bound xmax allows. */
static int accel_polygon_rows(const veer_row_ctx *ctx, const veer_point_kin *pk, double xmax, veer_row *rows) {
    const double *dq = pk->dq, *ddq = pk->ddq;
    double sp = hypot(dq[0], dq[1]);
    if (!set(ctx->limits->body_accel) || !(sp > 0.0 || hypot(ddq[0], ddq[1]) > 0.0)) return 0;
    double tx = 1.0, ty = 0.0;
    if (sp > 0.0) {
        tx = dq[0] / sp;
        ty = dq[1] / sp;
    }
    double at_u = sp, at_x = ddq[0] * tx + ddq[1] * ty; /* tangential: at_u u + at_x x */
    double an_x = -ddq[0] * ty + ddq[1] * tx;            /* normal: an_x x */
    double side = an_x >= 0.0 ? 1.0 : -1.0;
    double an_max = fabs(an_x) * xmax; /* inf * 0 is NaN: then every face is kept */
    veer_limit_id id = veer__limit(VEER_LIMIT_BODY_ACCEL, -1);
    int m = 0;
    for (int j = 0; j < ctx->faces; j++) {
        if (ctx->face_h[j] > an_max * (1.0 + 1e-9)) continue;
        double ca = ctx->face_c[j], sa = side * ctx->face_s[j];
        rows[m++] = (veer_row){ca * at_u, ca * at_x + sa * an_x, ctx->face_r, id};
    }
    return m;
}

int veer__point_rows(const veer_row_ctx *ctx, const veer_point_kin *pk, veer_row *rows, double *xmax,
                     veer_limit_id *xmax_id) {
    const veer_drive_def *drive = ctx->drive;
    const veer_limits *lim = ctx->limits;
    int m = 0;
    *xmax = VEER_UNLIMITED;
    *xmax_id = veer__limit(VEER_LIMIT_NONE, -1);
    const double *dq = pk->dq, *ddq = pk->ddq;
    double sp = hypot(dq[0], dq[1]);

    /* Body speed and yaw rate. */
    speed_row(sp, lim->body_speed, xmax, xmax_id, veer__limit(VEER_LIMIT_BODY_SPEED, -1));
    speed_row(dq[2], lim->yaw_rate, xmax, xmax_id, veer__limit(VEER_LIMIT_YAW_RATE, -1));

    m += accel_rows(rows + m, dq[2], ddq[2], lim->yaw_accel, veer__limit(VEER_LIMIT_YAW_ACCEL, -1));

    int n = ctx->module_count;
    if (!ctx->linear) {
        double r = drive->wheel_radius;
        for (int i = 0; i < n; i++) {
            const veer_module_limits *ml = &lim->modules[i];
            double v[2], dv[2];
            veer__module_velocity(drive, i, pk, v, dv);
            double sp2 = v[0] * v[0] + v[1] * v[1], spd = sqrt(sp2);
            speed_row(spd / r, ml->wheel_rate, xmax, xmax_id, veer__limit(VEER_LIMIT_WHEEL_SPEED, i));
            if (spd > VEER_STILL) {
                double dphi = (v[0] * dv[1] - v[1] * dv[0]) / sp2; /* d steer / ds */
                speed_row(dphi, ml->steer_rate, xmax, xmax_id, veer__limit(VEER_LIMIT_STEER_RATE, i));
            }
            /* Wheel acceleration along the wheel's direction e: (v.e) u + (v'.e) x. */
            double ex, ey;
            if (spd > VEER_STILL) {
                ex = v[0] / spd;
                ey = v[1] / spd;
            } else {
                double d = hypot(dv[0], dv[1]);
                ex = d > 0.0 ? dv[0] / d : 1.0;
                ey = d > 0.0 ? dv[1] / d : 0.0;
            }
            m += accel_rows(rows + m, spd / r, (dv[0] * ex + dv[1] * ey) / r, ml->wheel_accel,
                            veer__limit(VEER_LIMIT_WHEEL_ACCEL, i));
        }
    } else {
        const double(*J)[3] = ctx->J;
        if (drive->kind == VEER_DRIVE_DIFFERENTIAL) {
            double g = hypot(pk->xi[0], pk->xi[1]) + fabs(pk->xi[2]);
            if (fabs(pk->xi[1]) > 1e-6 * (g > 1.0 ? g : 1.0)) {
                *xmax = 0.0;
                *xmax_id = veer__limit(VEER_LIMIT_NONHOLONOMIC, -1);
                return -1;
            }
        }
        for (int i = 0; i < n; i++) {
            const veer_module_limits *ml = &lim->modules[i];
            double f = J[i][0] * pk->xi[0] + J[i][1] * pk->xi[1] + J[i][2] * pk->xi[2];
            double df = J[i][0] * pk->dxi[0] + J[i][1] * pk->dxi[1] + J[i][2] * pk->dxi[2];
            speed_row(f, ml->wheel_rate, xmax, xmax_id, veer__limit(VEER_LIMIT_WHEEL_SPEED, i));
            m += accel_rows(rows + m, f, df, ml->wheel_accel, veer__limit(VEER_LIMIT_WHEEL_ACCEL, i));
        }
    }
    m += accel_polygon_rows(ctx, pk, *xmax, rows + m);
    return m;
}

static veer_status check_one(veer_diag *diag, double v, veer_limit_id id, int allow_any_sign) {
    char name[48];
    veer_limit_name(id, name, sizeof name);
    if (isnan(v) || (!allow_any_sign && v < 0.0))
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, id,
                          "limit %s must be a positive number or unset (+inf), got %g", name, v);
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
    int n = veer_drive_module_count(drive);
    for (int i = 0; i < n; i++) {
        const veer_module_limits *ml = &lim->modules[i];
        if ((st = check_one(diag, ml->wheel_rate, veer__limit(VEER_LIMIT_WHEEL_SPEED, i), 0))) return st;
        if ((st = check_one(diag, ml->wheel_accel, veer__limit(VEER_LIMIT_WHEEL_ACCEL, i), 0))) return st;
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
