/* Plan: route -> path -> constraint rows on a grid -> time-optimal profile
 * per rest-to-rest segment -> steer angles and re-steer phases -> timeline.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "plan_internal.h"

#define VEER_GRID_MIN 16
#define VEER_GRID_MAX 50000
#define VEER_SEGMENT_MIN_INTERVALS 8

veer_module_limits veer__default_module_limits(void) {
    veer_module_limits m;
    memset(&m, 0, sizeof m);
    m.wheel_rate = VEER_UNLIMITED;
    m.wheel_accel = VEER_UNLIMITED;
    m.steer_rate = VEER_UNLIMITED;
    m.steer_min = -VEER_UNLIMITED;
    m.steer_max = VEER_UNLIMITED;
    m.traction_mu = VEER_UNLIMITED;
    m.motor_stall_accel = VEER_UNLIMITED;
    m.motor_free_rate = VEER_UNLIMITED;
    m.wheel_jerk = VEER_UNLIMITED;
    return m;
}

void veer__limits_init(veer_limits *l) {
    memset(l, 0, sizeof *l);
    for (int i = 0; i < VEER_MAX_MODULES; i++) l->modules[i] = veer__default_module_limits();
    l->body_speed = l->body_accel = l->yaw_rate = l->yaw_accel = l->body_jerk = VEER_UNLIMITED;
}

veer_limits veer_default_limits(void) {
    veer_limits l;
    veer__limits_init(&l);
    return l;
}

veer_plan_options veer_default_plan_options(void) {
    veer_plan_options o;
    memset(&o, 0, sizeof o);
    o.grid_points = 1000;
    o.accel_polygon_sides = 32;
    o.traction_polygon_sides = 16;
    o.duration_target = 0.0;
    return o;
}

veer_status veer__plan_options_check(const veer_plan_options *o, veer_diag *diag) {
    veer_limit_id none = veer__limit(VEER_LIMIT_NONE, -1);
    if (o->grid_points < VEER_GRID_MIN || o->grid_points > VEER_GRID_MAX)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, none, "grid_points must be in [%d, %d], got %d",
                          VEER_GRID_MIN, VEER_GRID_MAX, o->grid_points);
    if (o->accel_polygon_sides < 8 || o->accel_polygon_sides > 2 * VEER_MAX_POLYGON_FACES || o->accel_polygon_sides % 2)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, none,
                          "accel_polygon_sides must be even and in [8, %d], got %d", 2 * VEER_MAX_POLYGON_FACES,
                          o->accel_polygon_sides);
    if (o->traction_polygon_sides < 8 || o->traction_polygon_sides > 2 * VEER_MAX_POLYGON_FACES ||
        o->traction_polygon_sides % 2)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, none,
                          "traction_polygon_sides must be even and in [8, %d], got %d", 2 * VEER_MAX_POLYGON_FACES,
                          o->traction_polygon_sides);
    if (!isfinite(o->duration_target) || o->duration_target < 0.0)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, none,
                          "duration_target must be >= 0 s (0: as fast as possible), got %g", o->duration_target);
    return VEER_OK;
}

veer__plan_caps veer__plan_caps_for(int waypoints, int legs) {
    veer__plan_caps c;
    veer__path_caps(waypoints, legs, &c.pieces, &c.segments);
    /* clamped as veer__path_caps clamps: a count past the maximum is refused
     * later (veer__path_build, the drive check), after a block of the
     * maximum's size, never one sized by a scrambled count */
    c.legs = legs < 0 ? 0 : legs > VEER_MAX_LEGS ? VEER_MAX_LEGS : legs;
    c.route = 1;
    return c;
}

size_t veer__plan_block_bytes(veer__plan_caps c) {
    return VEER__PLAN_BLOCK_BYTES(c.pieces, c.segments, c.legs, c.route);
}

void veer__plan_attach(veer_plan *plan, veer__plan_caps c) {
    if (c.pieces < 0) c.pieces = 0;
    if (c.segments < 0) c.segments = 0;
    char *at = (char *)plan + VEER__ALIGN16(sizeof *plan);
    /* zeroed, as when they were inside the struct: the decoder sets only some segment fields and
     * relies on the rest being 0 */
    memset(at, 0, veer__plan_block_bytes(c) - VEER__ALIGN16(sizeof *plan));
    veer_path_piece *pieces = (veer_path_piece *)at;
    at += VEER__ALIGN16((size_t)c.pieces * sizeof *pieces);
    veer_path_segment *segments = (veer_path_segment *)at;
    at += VEER__ALIGN16((size_t)c.segments * sizeof *segments);
    veer__path_attach(&plan->path, pieces, c.pieces, segments, c.segments);
    plan->segs = (veer_plan_segment *)at;
    at += VEER__ALIGN16((size_t)c.segments * sizeof *plan->segs);
    plan->segment_cap = c.segments;
    plan->segment_count = 0;
    plan->legs = (veer_leg_summary *)at;
    at += VEER__ALIGN16((size_t)c.legs * sizeof *plan->legs);
    plan->route = c.route ? (veer_route *)at : NULL;
}

void veer__plan_lay_grid(veer_plan *plan, int n, char *grid, int binding) {
    int M = plan->module_count;
    plan->n = n;
    plan->s = (double *)grid;
    plan->x = plan->s + n;
    plan->t = plan->x + n;
    plan->steer = plan->steered ? (float *)(plan->t + n) : NULL;
    plan->binding = binding ? (veer_limit_id *)((float *)(plan->t + n) + (plan->steered ? (size_t)n * (size_t)M : 0))
                            : NULL;
}

void veer_plan_destroy(veer_plan *plan) {
    if (!plan || plan->alloc_size == 0) return; /* NULL, or a plan in a caller's workspace (veer_plan_load_pb) */
    veer__free(plan->s, plan->grid_bytes);
    veer__free(plan, plan->alloc_size);
}

/* Grid intervals per path piece. A piece's weight is its length plus two
 * units per radian it turns (heading or direction of travel), so rounded
 * corners, spins and pivots get the points their quickly changing limits
 * need; every piece boundary is a grid point. */
static void grid_layout(const veer_path *path, int points, int *piece_intervals) {
    double weight[VEER_PATH_MAX_PIECES], total = 0.0; /* a plan's piece_cap is at most the maximum (veer__path_caps) */
    for (int j = 0; j < path->segment_count; j++) {
        const veer_path_segment *ps = &path->segments[j];
        for (int p = ps->first_piece; p < ps->first_piece + ps->piece_count; p++) {
            const veer_path_piece *pc = &path->pieces[p];
            double q0[3], d0[3], e0[3], q1[3], d1[3], e1[3];
            veer__path_eval(path, j, pc->s0, q0, d0, e0);
            veer__path_eval(path, j, pc->s0 + pc->len, q1, d1, e1);
            double turn = fabs(q1[2] - q0[2]);
            if (hypot(d0[0], d0[1]) > 0.0 && hypot(d1[0], d1[1]) > 0.0)
                turn += fabs(atan2(d0[0] * d1[1] - d0[1] * d1[0], d0[0] * d1[0] + d0[1] * d1[1]));
            weight[p] = pc->len + 2.0 * turn;
            total += weight[p];
        }
    }
    double budget = points - path->segment_count;
    for (int j = 0; j < path->segment_count; j++) {
        const veer_path_segment *ps = &path->segments[j];
        int seg_intervals = 0;
        for (int p = ps->first_piece; p < ps->first_piece + ps->piece_count; p++) {
            int k = (int)lround(budget * weight[p] / total);
            piece_intervals[p] = k < 2 ? 2 : k;
            seg_intervals += piece_intervals[p];
        }
        /* short segments still get a usable grid */
        while (seg_intervals < VEER_SEGMENT_MIN_INTERVALS)
            for (int p = ps->first_piece; p < ps->first_piece + ps->piece_count; p++, seg_intervals++)
                piece_intervals[p]++;
    }
}


/* Speed zones: x <= cap^2 / |p'|^2 with the smallest cap of each point and
 * its neighbours (a zone entered between two grid points holds at both). */
static void apply_speed_caps(const veer_plan *plan, int j, int n, const double *s, veer_workspace *ws) {
    double prev = VEER_UNLIMITED, cur, next;
    int zprev = -1, zcur = -1, znext = -1;
    veer_point_kin pk;
    const veer_point_kin *kin = ws->kin ? ws->kin + plan->segs[j].k0 : NULL;
    if (kin) pk = kin[0]; else veer__point_kin(&plan->path, j, s[0], &pk);
    cur = plan->cap.cap(plan->cap.user, pk.q, &zcur);
    for (int k = 0; k < n; k++) {
        double sp2 = pk.dq[0] * pk.dq[0] + pk.dq[1] * pk.dq[1];
        if (k + 1 < n) {
            if (kin) pk = kin[k + 1]; else veer__point_kin(&plan->path, j, s[k + 1], &pk);
            next = plan->cap.cap(plan->cap.user, pk.q, &znext);
        } else {
            next = VEER_UNLIMITED;
            znext = -1;
        }
        double c = cur;
        int z = zcur;
        if (prev < c) c = prev, z = zprev;
        if (next < c) c = next, z = znext;
        if (isfinite(c) && c >= 0.0 && sp2 > 0.0 && c * c / sp2 < ws->xmax[k]) {
            ws->xmax[k] = c * c / sp2;
            ws->xmax_id[k] = veer__limit(VEER_LIMIT_SPEED_ZONE, z);
        }
        prev = cur;
        zprev = zcur;
        cur = next;
        zcur = znext;
    }
}

/* Velocity of steered module i per unit sdot (body frame) and |d steer / ds|. */
static double steer_slope(const veer_drive_def *d, int i, const double *xi, const double *dxi, double v[2]) {
    double x = d->modules[i].x, y = d->modules[i].y;
    v[0] = xi[0] - xi[2] * y;
    v[1] = xi[1] + xi[2] * x;
    double dvx = dxi[0] - dxi[2] * y, dvy = dxi[1] + dxi[2] * x;
    double sp2 = v[0] * v[0] + v[1] * v[1];
    return sp2 > 1e-18 ? fabs(v[0] * dvy - v[1] * dvx) / sp2 : 0.0;
}

/* The steer-rate bound x <= w^2 / phi'^2 changes fast where the
 * instantaneous centre of rotation sweeps past a module, while the profile's
 * x is linear in s between grid points. Each point is held to the lowest
 * steer-rate bound of itself and its neighbours, which keeps the chord
 * below the bound across every interval where the bound is monotone. Where
 * a module's direction (mod pi) turns across an interval faster than its
 * steer slope at either end allows, the slope peaks inside: that interval
 * is sampled finely and both ends held to the lowest bound found. The turn
 * is compared through its sine, |a x b| / (|a| |b|), no larger than the
 * angle itself. */
static void steer_rate_bounds(const veer_plan *plan, const veer_row_ctx *ctx, int j, int n, const double *s,
                              veer_workspace *ws) {
    const veer_drive_def *d = &plan->drive;
    size_t per = 3 * (size_t)plan->module_count;
    const double *slope = ws->slope ? ws->slope + (size_t)plan->segs[j].k0 * per : NULL;
    for (int i = 0; i < plan->module_count; i++) {
        double w = ctx->limits->modules[i].steer_rate;
        if (d->modules[i].out || !isfinite(w)) continue;
        veer_limit_id id = veer__limit(VEER_LIMIT_STEER_RATE, i);
        double a[2], b[2], prev_bound = VEER_UNLIMITED;
        /* the slopes at the grid points: the grid refinement's (the same
         * steer_slope of the same kinematics) where it kept them */
        const double *sl = slope ? slope + 3 * (size_t)i : NULL;
        double r0;
        if (sl) {
            r0 = sl[0], a[0] = sl[1], a[1] = sl[2];
        } else {
            r0 = steer_slope(d, i, ws->xi, ws->dxi, a);
        }
        double b0 = r0 > 0.0 ? w * w / (r0 * r0) : VEER_UNLIMITED, a2 = a[0] * a[0] + a[1] * a[1];
        for (int k = 0; k + 1 < n; k++) {
            double r1;
            if (sl) {
                const double *o = sl + (size_t)(k + 1) * per;
                r1 = o[0], b[0] = o[1], b[1] = o[2];
            } else {
                r1 = steer_slope(d, i, ws->xi + 3 * (k + 1), ws->dxi + 3 * (k + 1), b);
            }
            double b1 = r1 > 0.0 ? w * w / (r1 * r1) : VEER_UNLIMITED;
            double lo = b1 < prev_bound ? b1 : prev_bound; /* neighbours of point k */
            double ds = s[k + 1] - s[k];
            double cross = fabs(a[0] * b[1] - a[1] * b[0]);
            double b2 = b[0] * b[0] + b[1] * b[1];
            double scale = sqrt(a2 * b2);
            double rmax = (r0 >= r1 || isnan(r1)) ? r0 : r1; /* fmax(r0, r1) without the call */
            if (ds > 0.0 && cross > (1.02 * rmax * ds + 1e-9) * scale) {
                double inner = VEER_UNLIMITED;
                for (int q = 1; q < 32; q++) {
                    veer_point_kin pk;
                    veer__point_kin(&plan->path, j, s[k] + ds * q / 32.0, &pk);
                    double v[2];
                    double r = steer_slope(d, i, pk.xi, pk.dxi, v);
                    if (r > 0.0 && w * w / (r * r) < inner) inner = w * w / (r * r);
                }
                if (inner < lo) lo = inner;
                if (inner < ws->xmax[k + 1]) ws->xmax[k + 1] = inner, ws->xmax_id[k + 1] = id;
            }
            if (lo < ws->xmax[k]) ws->xmax[k] = lo, ws->xmax_id[k] = id;
            prev_bound = b0 < b1 ? b0 : b1; /* for point k + 1: its left neighbour and itself */
            r0 = r1;
            b0 = b1;
            a2 = b2;
            a[0] = b[0];
            a[1] = b[1];
        }
        if (prev_bound < ws->xmax[n - 1]) ws->xmax[n - 1] = prev_bound, ws->xmax_id[n - 1] = id;
    }
}

/* Does any module have a motor curve? Its rows are linearized, so the solve
 * is repeated at the profile it found. */
static int has_motor_curve(const veer_plan *plan) {
    for (int i = 0; i < plan->module_count; i++)
        if (isfinite(plan->limits.modules[i].motor_stall_accel) && !plan->drive.modules[i].out) return 1;
    return 0;
}

/* The solve's work buffers are one block per plan, sized for the longest
 * segment: the per-point arrays, the row pool and the solver's keep room
 * (veer__topp_keep_room for a full pool). One block that lasts through all
 * of the plan's solves, instead of a few that come and go with each solve,
 * lets an allocator hand the same pages to the next plan: glibc gives
 * memory back to the system when more than twice its largest block is
 * free at the top of its heap, and every plan then faulted in fresh zeroed
 * pages (4000 faults per plan at 16000 grid points). ws_block makes the
 * block with room for rows_cap rows, copying the arrays and the first
 * `used` rows of the one before (ws->block NULL: none). */
static size_t ws_array_bytes(int longest) {
    size_t L = (size_t)longest;
    size_t bytes = L * (9 * sizeof(double) + sizeof(veer_limit_id) + 4 * sizeof(int) + 1) + sizeof(int);
    return (bytes + 15) / 16 * 16; /* the row pool follows */
}

static int ws_block(veer_workspace *ws, size_t rows_cap, size_t used) {
    size_t L = (size_t)ws->longest, arrays = ws_array_bytes(ws->longest);
    size_t keep_cap = veer__topp_keep_room(L, rows_cap);
    size_t bytes = arrays + rows_cap * sizeof(veer_row) + keep_cap * sizeof(double);
    char *b = veer__alloc(bytes);
    if (!b) return 0;
    if (ws->block) {
        memcpy(b, ws->block, arrays);
        if (used) memcpy(b + arrays, ws->rows, used * sizeof(veer_row));
        veer__free(ws->block, ws->bytes);
    }
    ws->block = b;
    ws->bytes = bytes;
    ws->xmax = (double *)b;
    ws->K = ws->xmax + L;
    ws->xi = ws->K + L;
    ws->dxi = ws->xi + 3 * L;
    ws->x_prev = ws->dxi + 3 * L;
    ws->xmax_id = (veer_limit_id *)(ws->x_prev + L);
    ws->row_at = (int *)(ws->xmax_id + L);
    ws->extra_at = ws->row_at + L + 1;
    ws->extra_n = ws->extra_at + L;
    ws->keep_at = ws->extra_n + L;
    ws->extra_done = (unsigned char *)(ws->keep_at + L);
    ws->rows = (veer_row *)(b + arrays);
    ws->rows_cap = rows_cap;
    ws->keep = (double *)(ws->rows + rows_cap);
    ws->keep_cap = keep_cap;
    return 1;
}

/* Room in the row pool for `need` rows (keeping the first `used`); it
 * doubles when it grows, and never beyond `most` (the worst case of the
 * rest of the segment). */
static int rows_room(veer_workspace *ws, size_t used, size_t need, size_t most) {
    if (need <= ws->rows_cap) return 1;
    size_t want = 2 * ws->rows_cap;
    if (want > most) want = most;
    if (want < need) want = need;
    return ws_block(ws, want, used);
}

/* Rows, solve and times of segment j with the limits behind ctx, starting at
 * sdot^2 = x_start. With a motor curve the solve repeats twice more with the
 * curve linearized at the previous profile: every row stays conservative
 * and the last one is exact where the profile runs. */
/* Room for n more rows in the extra-row pool. */
static int extra_room(veer_workspace *ws, int n) {
    if (ws->extra_used + n <= ws->extra_cap) return 1;
    int cap = 2 * ws->extra_cap + n + 256;
    veer_row *pool = veer__alloc((size_t)cap * sizeof *pool);
    if (!pool) return 0;
    if (ws->extra_used) memcpy(pool, ws->extra, (size_t)ws->extra_used * sizeof *pool);
    veer__free(ws->extra, (size_t)ws->extra_cap * sizeof *ws->extra);
    ws->extra = pool;
    ws->extra_cap = cap;
    return 1;
}

/* Appends to stage k's extra rows the rows of the point at fraction f of
 * interval k, written in the stage's variables (x there = x + 2 ds f u);
 * existing rows are moved along so the stage's rows stay contiguous. */
static int add_point_rows(veer_workspace *ws, int k, double ds, double f, const veer_row *rows, int c, double xmax,
                          veer_limit_id id) {
    int old = ws->extra_n[k], need = old + c + 1;
    if (!extra_room(ws, need)) return 0;
    veer_row *e = ws->extra + ws->extra_used;
    if (old) memmove(e, ws->extra + ws->extra_at[k], (size_t)old * sizeof *e);
    double g = 2.0 * ds * f;
    int ne = old;
    for (int r = 0; r < c; r++) e[ne++] = (veer_row){rows[r].a + g * rows[r].b, rows[r].b, rows[r].c, rows[r].id};
    if (isfinite(xmax)) e[ne++] = (veer_row){g, 1.0, xmax, id}; /* x + g u <= xmax there */
    ws->extra_at[k] = ws->extra_used;
    ws->extra_n[k] = ne;
    ws->extra_used += ne;
    return 1;
}

/* Between grid points the profile runs with constant u and x linear in s,
 * but the rows' coefficients follow the path. Each interval's midpoint is
 * checked against every limit at the profile's (u, x there); where one is
 * exceeded by more than 0.3 %, that point's rows join the stage for the
 * next solve, and the interval's quarter points are checked in the rounds
 * after that (the dense 1 ms checks of the property suite hold every limit
 * within 1 % with this). x_old: the profile at the last check (NULL: none), where
 * an interval whose ends kept their x and that got no point then would
 * give the same answer again, so it is skipped (VEER_TOPP_CHANGED in done:
 * a point was added at the last check; bits 0-2: which points were ever
 * added). Returns the number of points added, or -1 when out of memory. */
static int midpoint_rows(const veer_plan *plan, int j, const veer_row_ctx *ctx, int n, const double *s,
                         const double *x, const double *x_old, veer_workspace *ws, unsigned char *done) {
    veer_row rows[VEER_MAX_POINT_ROWS];
    static const double frac[3] = {0.5, 0.25, 0.75};
    int added = 0;
    for (int k = 0; k + 1 < n; k++) {
        double ds = s[k + 1] - s[k];
        if (!(ds > 0.0)) continue;
        if (x_old && !(done[k] & VEER_TOPP_CHANGED) && x[k] == x_old[k] && x[k + 1] == x_old[k + 1]) continue;
        done[k] &= (unsigned char)~VEER_TOPP_CHANGED;
        double u = (x[k + 1] - x[k]) / (2.0 * ds);
        for (int q = 0; q < 3; q++) {
            if (done[k] & (1u << q)) continue;
            double f = frac[q], xf = x[k] + f * (x[k + 1] - x[k]);
            veer_point_kin pk;
            veer__point_kin(&plan->path, j, s[k] + f * ds, &pk);
            double xmax, worst_row;
            veer_limit_id id;
            /* the rows are only checked here; written out only where one is broken */
            int c = veer__point_worst(ctx, &pk, u, xf, &worst_row, &xmax, &id);
            if (c < 0) break;
            double worst = isfinite(xmax) ? xf / xmax : 0.0;
            if (isnan(worst)) worst = -VEER_UNLIMITED; /* as fmax: a NaN start gives way to the first row */
            if (worst_row > worst) worst = worst_row; /* fmax(worst, v) over the rows, without the call */
            if (worst > 1.0 + 3e-3) {
                c = veer__point_rows(ctx, &pk, xf, rows, &xmax, &id);
                if (!add_point_rows(ws, k, ds, f, rows, c, xmax, id)) return -1;
                done[k] |= (unsigned char)(1u << q | VEER_TOPP_CHANGED);
                added++;
            }
            if (q == 0) break;
        }
    }
    return added;
}

/* timing.c's pace caps (body speed, yaw rate) as x-only bounds. A moving
 * start cannot be slower than its hardest braking from the start speed
 * (after the jerk window's hold of it): there the cap gives way to that
 * braking curve, so the cart brakes down to the cap as hard as the limits
 * allow rather than being refused for starting above it. Uses ws->K as
 * scratch (the solve fills it afterwards). */
static void pace_caps(const veer_plan *plan, int j, int n, double x_start, const veer_topp_problem *p,
                      veer_workspace *ws) {
    const veer_plan_segment *sg = &plan->segs[j];
    if (x_start > 0.0) veer__topp_brake(p, x_start, sg->coast_k, ws->K);
    for (int k = 0; k < n; k++) {
        const double *xi = ws->xi + 3 * k;
        double sp2 = xi[0] * xi[0] + xi[1] * xi[1], w2 = xi[2] * xi[2], c = VEER_UNLIMITED;
        veer_limit_id id = veer__limit(VEER_LIMIT_BODY_SPEED, -1);
        if (isfinite(sg->pace_speed) && sp2 > 0.0) c = sg->pace_speed * sg->pace_speed / sp2;
        if (isfinite(sg->pace_yaw) && w2 > 0.0 && sg->pace_yaw * sg->pace_yaw / w2 < c)
            c = sg->pace_yaw * sg->pace_yaw / w2, id = veer__limit(VEER_LIMIT_YAW_RATE, -1);
        if (x_start > 0.0 && ws->K[k] > c) c = ws->K[k];
        if (c < ws->xmax[k]) ws->xmax[k] = c, ws->xmax_id[k] = id;
    }
}

veer_status veer__solve_segment(veer_plan *plan, int j, const veer_row_ctx *ctx, double x_start, veer_workspace *ws,
                                veer_diag *diag) {
    veer_plan_segment *sg = &plan->segs[j];
    const veer_path_segment *ps = &plan->path.segments[j];
    int n = sg->k1 - sg->k0 + 1, m = ctx->m;
    double *s = plan->s + sg->k0, *x = plan->x + sg->k0;
    int passes = has_motor_curve(plan) ? 3 : 1;
    veer_topp_problem p;
    const veer_point_kin *kin = ws->kin ? ws->kin + sg->k0 : NULL;
    for (int pass = 0; pass < passes; pass++) {
        ws->extra_used = 0;
        memset(ws->extra_n, 0, (size_t)n * sizeof *ws->extra_n);
        size_t at = 0; /* rows so far, packed */
        for (int k = 0; k < n; k++) {
            if (!rows_room(ws, at, at + (size_t)m, at + (size_t)(n - k) * (size_t)m))
                return veer__fail(diag, VEER_ERR_NO_MEMORY, ps->leg, -1, -1, -1.0, veer__limit(VEER_LIMIT_NONE, -1),
                                  "out of memory");
            veer_point_kin own;
            const veer_point_kin *pk = kin ? &kin[k] : &own;
            if (!kin) veer__point_kin(&plan->path, j, s[k], &own);
            memcpy(ws->xi + 3 * k, pk->xi, sizeof pk->xi);
            memcpy(ws->dxi + 3 * k, pk->dxi, sizeof pk->dxi);
            int c = veer__point_rows(ctx, pk, pass ? x[k] : 0.0, ws->rows + at, &ws->xmax[k],
                                     &ws->xmax_id[k]);
            if (c < 0 && ws->xmax_id[k].kind == VEER_LIMIT_MODULE_OUT)
                return veer__fail(diag, VEER_ERR_INFEASIBLE, ps->leg, ps->waypoint, sg->k0 + k, s[k], ws->xmax_id[k],
                                  "leg %d: at s = %.3f the motion needs traction the working wheels cannot give "
                                  "(fewer than two of them drive it) with a module out",
                                  ps->leg, s[k]);
            if (c < 0)
                return veer__fail(diag, VEER_ERR_INFEASIBLE, ps->leg, ps->waypoint, sg->k0 + k, s[k], ws->xmax_id[k],
                                  "leg %d: a differential drive cannot move sideways (at s = %.3f); use heading "
                                  "tangent or a spin leg",
                                  ps->leg, s[k]);
            ws->row_at[k] = (int)at;
            at += (size_t)c;
        }
        ws->row_at[n] = (int)at;
        /* (the block may have moved while the rows were written) */
        p = (veer_topp_problem){n, s, ws->xmax, ws->xmax_id, ws->rows, ws->row_at, NULL, NULL, NULL,
                                ws->keep, ws->keep_cap, ws->keep_at};
        if (plan->cap.cap) apply_speed_caps(plan, j, n, s, ws);
        if (plan->steered) steer_rate_bounds(plan, ctx, j, n, s, ws);
        for (int k = 0; k <= sg->coast_k && k < n; k++) /* a moving start's hold for its jerk window */
            if (sg->coast_k > 0 && x_start < ws->xmax[k])
                ws->xmax[k] = x_start, ws->xmax_id[k] = veer__limit(VEER_LIMIT_START_STATE, -1);
        if (isfinite(sg->pace_speed) || isfinite(sg->pace_yaw)) pace_caps(plan, j, n, x_start, &p, ws);
        int bad = 0;
        veer_status st = veer__topp_solve(&p, x_start, x, ws->K, &bad);
        /* Limits broken between grid points: add those midpoints' rows and
         * solve again (a few rounds; each only adds rows, so the profile
         * only gets slower and stays within every earlier row). */
        memset(ws->extra_done, 0, (size_t)n);
        for (int round = 0; round < 4 && st == VEER_OK; round++) {
            int added = midpoint_rows(plan, j, ctx, n, s, x, round ? ws->x_prev : NULL, ws, ws->extra_done);
            if (added < 0)
                return veer__fail(diag, VEER_ERR_NO_MEMORY, ps->leg, -1, -1, -1.0, veer__limit(VEER_LIMIT_NONE, -1),
                                  "out of memory");
            if (added == 0) break;
            p.extra = ws->extra;
            p.extra_at = ws->extra_at;
            p.extra_n = ws->extra_n;
            memcpy(ws->x_prev, x, (size_t)n * sizeof *x);
            st = veer__topp_resolve(&p, x_start, x, ws->K, ws->extra_done, &bad);
        }
        if (st != VEER_OK && bad == 0 && x_start > 0.0)
            return veer__fail(diag, st, ps->leg, ps->waypoint, sg->k0, s[0], veer__limit(VEER_LIMIT_START_STATE, -1),
                              "leg %d: from %.3f m/s there is no room to stop before s = %.3f within the limits",
                              ps->leg, sqrt(x_start) * hypot(ws->xi[0], ws->xi[1]), s[n - 1]);
        if (st != VEER_OK) {
            char name[48];
            veer_limit_id id = ws->xmax_id[bad];
            veer_limit_name(id, name, sizeof name);
            return veer__fail(diag, st, ps->leg, ps->waypoint, sg->k0 + bad, s[bad], id,
                              "leg %d: no motion fits the limits at s = %.3f (limit %s)", ps->leg, s[bad], name);
        }
    }
    double t = 0.0;
    for (int k = 0; k < n; k++) {
        if (x[k] > 1e18)
            return veer__fail(diag, VEER_ERR_UNBOUNDED, ps->leg, ps->waypoint, sg->k0 + k, s[k],
                              veer__limit(VEER_LIMIT_NONE, -1),
                              "leg %d: nothing limits the speed at s = %.3f; set body_speed, body_accel or the "
                              "wheel limits",
                              ps->leg, s[k]);
        plan->binding[sg->k0 + k] = veer__topp_binding(&p, x, k);
        if (k > 0) t += 2.0 * (s[k] - s[k - 1]) / (sqrt(x[k - 1]) + sqrt(x[k]));
        plan->t[sg->k0 + k] = t; /* relative to the segment's motion start */
    }
    sg->raw_time = t;
    sg->move_time = t + sg->tau;
    return VEER_OK;
}

/* Speed-type limits times gv, acceleration-type limits times ga (jerk
 * limits kept). With ga = gv^2 the time-optimal law is the one of the
 * original limits run gv times slower, wherever those limits bind. */
static veer_limits scaled_limits(const veer_limits *in, double gv, double ga) {
    veer_limits l = *in;
    l.body_speed *= gv;
    l.body_accel *= ga;
    l.yaw_rate *= gv;
    l.yaw_accel *= ga;
    for (int i = 0; i < VEER_MAX_MODULES; i++) {
        veer_module_limits *m = &l.modules[i];
        m->wheel_rate *= gv;
        m->wheel_accel *= ga;
        m->steer_rate *= gv;
        m->traction_mu *= ga; /* mu g is an acceleration */
        m->motor_stall_accel *= ga;
        m->motor_free_rate *= gv;
    }
    return l;
}

/* Jerk limits on segment j (solved within lim, steer angles known): fit the
 * averaging window; if averaging takes another limit more than 0.5 % over,
 * re-solve with every limit 3 % lower and fit again. If no window holds
 * the jerk, re-solve slower as the fit advises (veer__jerk_window). */
static veer_status fit_window(veer_plan *plan, int j, const veer_limits *lim, double x_start, veer_workspace *ws,
                              veer_diag *diag, int *longer_hold) {
    double gv = 1.0, ga = 1.0;
    for (int it = 0; it < 40; it++) {
        double slow[2];
        double worst = veer__jerk_window(plan, j, slow);
        if (worst >= 0.0 && worst <= VEER__JERK_OTHERS) return VEER_OK;
        if (worst < -1.5) { /* the window needs a longer hold of the start speed */
            *longer_hold = 1;
            return VEER_OK;
        }
        if (worst < 0.0) {
            gv *= slow[0];
            ga *= slow[1];
        } else {
            gv *= 0.97;
            ga *= 0.97;
        }
        veer_limits sc = scaled_limits(lim, gv, ga);
        veer_row_ctx ctx;
        veer__row_ctx_init(&ctx, &plan->drive, &sc, &plan->options);
        plan->segs[j].tau = 0.0;
        veer_status st = veer__solve_segment(plan, j, &ctx, x_start, ws, diag);
        if (st != VEER_OK) return st;
    }
    const veer_path_segment *ps = &plan->path.segments[j];
    return veer__fail(diag, VEER_ERR_INFEASIBLE, ps->leg, ps->waypoint, -1, ps->s_begin,
                      veer__limit(VEER_LIMIT_BODY_JERK, -1),
                      "leg %d: no jerk-limiting window keeps the other limits on this stretch", ps->leg);
}

/* The hold of the start speed, in grid points, that covers hold_t seconds
 * (at least one interval, less than the whole segment; 0 when none fits). */
static int coast_points(const veer_plan *plan, int j, double v0, double hold_t) {
    const veer_plan_segment *sg = &plan->segs[j];
    double want = plan->s[sg->k0] + v0 * hold_t;
    int k = 1;
    while (sg->k0 + k < sg->k1 && plan->s[sg->k0 + k] < want) k++;
    return sg->k0 + k < sg->k1 ? k : 0;
}

/* Does the solve hold the start speed up to grid point k0 + k? (The
 * limits may make it brake sooner: the hold is a cap, not a floor.) */
static int held(const veer_plan *plan, int j, int k, double x_start) {
    const double *x = plan->x + plan->segs[j].k0;
    for (int i = 0; i <= k; i++)
        if (!(x[i] >= x_start * (1.0 - 1e-9))) return 0;
    return 1;
}

/* Jerk window on a moving start's first segment. The averaged law is read
 * tau / 2 ahead (veer__segment_lead) and the solve holds the start speed
 * for at least tau / 2 (coast_k), so the law starts at s0 with the start
 * speed and no acceleration: the cart keeps moving as it did, then eases
 * into the time-optimal law. The hold starts at the longest accel / jerk
 * ratio of the limits (the S-curve's ramp time on a straight), plus 10 %
 * for the fit's aim below the limit, and grows
 * while the fit asks for it; once a window holds, the hold is cut to that
 * window if that still fits. When no hold works (the cart must brake at
 * once, or the slowed limits no longer admit the start speed), the plan is
 * refused (INFEASIBLE, START_STATE): its law would break the jerk limits. */
static veer_status shape_moving(veer_plan *plan, int j, const veer_limits *lim, double x_start, veer_workspace *ws,
                                veer_diag *diag) {
    veer_plan_segment *sg = &plan->segs[j];
    double v0 = sqrt(x_start), g = 0.05;
    if (isfinite(lim->body_jerk) && isfinite(lim->body_accel)) g = fmax(g, lim->body_accel / lim->body_jerk);
    for (int i = 0; i < plan->module_count; i++)
        if (isfinite(lim->modules[i].wheel_jerk) && isfinite(lim->modules[i].wheel_accel))
            g = fmax(g, lim->modules[i].wheel_accel / lim->modules[i].wheel_jerk);
    g = fmin(1.1 * g, fmax(0.5, 0.5 * sg->raw_time)); /* the fit aims below the limit; no window is longer */
    veer_row_ctx ctx;
    veer__row_ctx_init(&ctx, &plan->drive, lim, &plan->options);
    int good = 0, cut = 0; /* coast_k of the last fit that held (0: none yet); 1: the cut is tried, 2: undone */
    for (int it = 0; it < 16; it++) {
        int k = good && cut > 1 ? good : coast_points(plan, j, v0, 0.5 * g);
        veer_diag scratch;
        veer_status st = VEER_ERR_INFEASIBLE;
        int longer = 0;
        if (k > 0) {
            sg->coast_k = k;
            sg->tau = 0.0;
            st = veer__solve_segment(plan, j, &ctx, x_start, ws, &scratch);
            if (st == VEER_OK && held(plan, j, k, x_start)) st = fit_window(plan, j, lim, x_start, ws, &scratch, &longer);
            else if (st == VEER_OK) st = VEER_ERR_INFEASIBLE;
            if (st == VEER_OK && !held(plan, j, k, x_start)) st = VEER_ERR_INFEASIBLE; /* slowed below v0 */
            if (st == VEER_ERR_NO_MEMORY) return veer__fail_plain(diag, st, "out of memory");
        }
        if (st == VEER_OK && !longer) {
            if (cut || 2.0 * (plan->s[sg->k0 + k] - plan->s[sg->k0]) / v0 <= 1.01 * sg->tau + 2e-3) return VEER_OK;
            good = k, cut = 1;
            g = 1.005 * sg->tau; /* the hold the window needs, and a little */
            continue;
        }
        if (good && cut == 1) { /* the cut hold no longer fits: back to the one that did */
            cut = 2;
            continue;
        }
        if (st != VEER_OK || k == 0 || cut == 2) break;
        g *= 1.6;
    }
    /* No hold fits: from this speed the cart must brake (or the limits bind)
     * sooner than a jerk-limited law can ease out of the start speed. A plan
     * that broke its jerk limits would be no answer: refused, like a moving
     * start with no room to stop. */
    sg->coast_k = 0;
    sg->tau = 0.0;
    const veer_path_segment *ps = &plan->path.segments[j];
    return veer__fail(diag, VEER_ERR_INFEASIBLE, ps->leg, ps->waypoint, sg->k0, ps->s_begin,
                      veer__limit(VEER_LIMIT_START_STATE, -1),
                      "leg %d: from the start speed (%.3g in s units per second) there is no room for a jerk-limited "
                      "law before the first stop or limit; re-plan from a lower speed or without jerk limits",
                      ps->leg, v0);
}

/* Jerk limits on segment j (solved within lim, steer angles known): fit the
 * averaging window; if averaging takes another limit more than 0.5 % over,
 * re-solve with every limit 3 % lower and fit again. If no window holds
 * the jerk, re-solve slower as the fit advises (veer__jerk_window). */
veer_status veer__shape_segment(veer_plan *plan, int j, const veer_limits *lim, double x_start, veer_workspace *ws,
                                veer_diag *diag) {
    plan->segs[j].coast_k = 0;
    if (!veer__has_jerk_limit(plan)) return VEER_OK;
    if (x_start > 0.0) return shape_moving(plan, j, lim, x_start, ws, diag);
    int longer = 0;
    return fit_window(plan, j, lim, x_start, ws, diag, &longer);
}

/* Re-planning on the move: the start twist must be the path's own direction
 * of motion at the start; returns sdot^2 there (0 at rest). */
static veer_status start_state(veer_plan *plan, double *x_start, veer_diag *diag) {
    const veer_route *r = plan->route;
    *x_start = 0.0;
    if (!r->has_start_twist) return VEER_OK;
    veer_limit_id id = veer__limit(VEER_LIMIT_START_STATE, -1);
    const double *tw = r->start_twist;
    if (!isfinite(tw[0]) || !isfinite(tw[1]) || !isfinite(tw[2]))
        return veer__fail(diag, VEER_ERR_VALUE, 0, -1, -1, -1.0, id, "start_twist is not finite");
    double mag = hypot(hypot(tw[0], tw[1]), tw[2]);
    if (mag < 1e-9) return VEER_OK;
    veer_point_kin pk;
    veer__point_kin(&plan->path, 0, plan->path.segments[0].s_begin, &pk);
    double xi2 = pk.xi[0] * pk.xi[0] + pk.xi[1] * pk.xi[1] + pk.xi[2] * pk.xi[2];
    double sdot = xi2 > 0.0 ? (tw[0] * pk.xi[0] + tw[1] * pk.xi[1] + tw[2] * pk.xi[2]) / xi2 : 0.0;
    double ex = tw[0] - pk.xi[0] * sdot, ey = tw[1] - pk.xi[1] * sdot, ez = tw[2] - pk.xi[2] * sdot;
    double lin = hypot(tw[0], tw[1]), lin_path = hypot(pk.xi[0], pk.xi[1]);
    double dang = lin > 1e-9 && lin_path > 0.0
                      ? fabs(atan2(tw[0] * pk.xi[1] - tw[1] * pk.xi[0], tw[0] * pk.xi[0] + tw[1] * pk.xi[1]))
                      : 0.0;
    if (!(sdot > 0.0) || hypot(hypot(ex, ey), ez) > 0.01 * mag + 1e-6 || dang > 0.5 * VEER_PI / 180.0)
        return veer__fail(diag, VEER_ERR_INFEASIBLE, 0, -1, -1, plan->path.segments[0].s_begin, id,
                          "the cart moves with twist (%.3f m/s, %.3f m/s, %.3f rad/s) but the route starts along "
                          "(%.3f, %.3f, %.3f) per unit path speed: start the route along the current motion, or "
                          "stop first (no transition is added)",
                          tw[0], tw[1], tw[2], pk.xi[0], pk.xi[1], pk.xi[2]);
    if (plan->steered) {
        for (int i = 0; i < plan->module_count; i++) {
            if (plan->drive.modules[i].out) continue;
            double v[2], dv[2];
            veer__module_velocity(&plan->drive, i, &pk, v, dv);
            if (hypot(v[0], v[1]) <= 1e-9) continue;
            double dir = atan2(v[1], v[0]);
            if (!r->has_start_steer) {
                plan->route->start_steer[i] = dir;
                continue;
            }
            double d = r->start_steer[i] - veer__steer_near(dir, r->start_steer[i]);
            if (fabs(d) > VEER_PI / 180.0)
                return veer__fail(diag, VEER_ERR_INFEASIBLE, 0, -1, -1, plan->path.segments[0].s_begin,
                                  veer__limit(VEER_LIMIT_START_STATE, i),
                                  "module %d points at %.3f rad but the motion needs %.3f rad (or reversed): a moving "
                                  "cart cannot re-steer; stop first",
                                  i, r->start_steer[i], veer__steer_near(dir, r->start_steer[i]));
        }
        plan->route->has_start_steer = 1;
    }
    *x_start = sdot * sdot;
    return VEER_OK;
}

/* Do two path positions need grid points between them? For each working
 * steered module: its velocity (body frame, per unit sdot) turns more than
 * 15 degrees between them (near 180 where the instantaneous centre of
 * rotation passes close to the module), or its steer-rate bound
 * w^2 / phi'^2 changes by more than 10 % while it could bind (within 1.5
 * times the body-speed and wheel-speed bounds there). */
/* 2: a module's direction turns more than 15 degrees (steer continuity
 * needs points there); 1: only its steer-rate bound changes more than 10 %
 * while it could bind; 0: neither. */
/* A path position for the grid refinement: its kinematics and each
 * working module's velocity and steer slope there (steer_slope), worked out
 * once per point. */
typedef struct {
    veer_point_kin pk;
    double sl[3 * VEER_MAX_MODULES]; /* module i: steer slope sl[3 i], velocity sl[3 i + 1], sl[3 i + 2] */
} grid_probe;

static void probe_at(const veer_plan *plan, int seg, double s, grid_probe *g) {
    veer__point_kin(&plan->path, seg, s, &g->pk);
    if (!plan->steered) return;
    for (int i = 0; i < plan->module_count; i++) {
        if (!plan->drive.modules[i].out) {
            g->sl[3 * i] = steer_slope(&plan->drive, i, g->pk.xi, g->pk.dxi, &g->sl[3 * i + 1]);
        } else {
            g->sl[3 * i] = g->sl[3 * i + 1] = g->sl[3 * i + 2] = 0.0; /* never read */
        }
    }
}

static int needs_points(const veer_plan *plan, const grid_probe *ga, const grid_probe *gb) {
    static const double c2 = 0.9330127018922193; /* cos^2(15 degrees) */
    const veer_drive_def *d = &plan->drive;
    const veer_point_kin *pa = &ga->pk, *pb = &gb->pk;
    int need = 0;
    for (int i = 0; i < plan->module_count; i++) {
        if (d->modules[i].out) continue;
        const double *va = &ga->sl[3 * i + 1], *vb = &gb->sl[3 * i + 1];
        double ra = ga->sl[3 * i], rb = gb->sl[3 * i];
        double a2 = va[0] * va[0] + va[1] * va[1], b2 = vb[0] * vb[0] + vb[1] * vb[1], dot = va[0] * vb[0] + va[1] * vb[1];
        if (a2 < 1e-18 || b2 < 1e-18) continue;
        if (dot < 0.0 || dot * dot < c2 * a2 * b2) return 2;
        const veer_module_limits *ml = &plan->limits.modules[i];
        double hi = ra > rb ? ra : rb, lo = ra > rb ? rb : ra; /* both >= 0 */
        if (need || !isfinite(ml->steer_rate) || !(hi > 0.0) || hi * hi <= 1.1 * lo * lo) continue;
        const veer_point_kin *pk = ra > rb ? pa : pb;
        double sp = hypot(pk->dq[0], pk->dq[1]), v = sqrt(ra > rb ? a2 : b2);
        double other = VEER_UNLIMITED;
        if (isfinite(plan->limits.body_speed) && sp > 0.0) other = plan->limits.body_speed / sp;
        if (isfinite(ml->wheel_rate) && v > 0.0 && ml->wheel_rate * d->wheel_radius / v < other)
            other = ml->wheel_rate * d->wheel_radius / v;
        if (ml->steer_rate / hi < 1.5 * other) need = 1;
    }
    return need;
}

/* Grid points to add between sa and sb (pa, pb: the path there): bisection
 * while needs_points says so, writing the new points in order. budget[0]
 * bounds the points added for steer continuity, budget[1] those for the
 * steer-rate bound. */
/* The grid as it is written: positions (room for the worst case) and the
 * path kinematics there, in a buffer that starts at the pieces' points and
 * doubles when refinement needs more (a worst-case buffer would be five
 * times the usual one). */
typedef struct {
    double *s;
    veer_point_kin *kin;
    double *slope; /* steered drives: the probes' steer slope and module velocity, 3 per module, M per point */
    int M;         /* modules */
    int n, cap; /* points written, room in kin (and slope) */
    int oom;    /* 1: kin could not grow */
} grid_out;

static void grid_push(grid_out *g, double s, const grid_probe *pr) {
    if (g->oom) return;
    size_t per = 3 * (size_t)g->M;
    if (g->n == g->cap) {
        int cap = 2 * g->cap;
        veer_point_kin *k = veer__alloc((size_t)cap * sizeof *k);
        double *sl = g->slope ? veer__alloc((size_t)cap * per * sizeof *sl) : NULL;
        if (!k || (g->slope && !sl)) {
            veer__free(k, (size_t)cap * sizeof *k);
            veer__free(sl, (size_t)cap * per * sizeof *sl);
            g->oom = 1;
            return;
        }
        memcpy(k, g->kin, (size_t)g->n * sizeof *k);
        veer__free(g->kin, (size_t)g->cap * sizeof *g->kin);
        g->kin = k;
        if (g->slope) {
            memcpy(sl, g->slope, (size_t)g->n * per * sizeof *sl);
            veer__free(g->slope, (size_t)g->cap * per * sizeof *g->slope);
            g->slope = sl;
        }
        g->cap = cap;
    }
    g->s[g->n] = s;
    g->kin[g->n] = pr->pk;
    if (g->slope) memcpy(g->slope + (size_t)g->n * per, pr->sl, per * sizeof *g->slope);
    g->n++;
}

static void refine(const veer_plan *plan, int seg, double sa, const grid_probe *pa, double sb, const grid_probe *pb,
                   int depth, int budget[2], grid_out *g) {
    int need = depth < 24 ? needs_points(plan, pa, pb) : 0;
    if (need == 0 || budget[need == 2 ? 0 : 1] <= 0) return;
    double sm = 0.5 * (sa + sb);
    grid_probe pm;
    probe_at(plan, seg, sm, &pm);
    budget[need == 2 ? 0 : 1]--;
    refine(plan, seg, sa, pa, sm, &pm, depth + 1, budget, g);
    grid_push(g, sm, &pm);
    refine(plan, seg, sm, &pm, sb, pb, depth + 1, budget, g);
}

/* The grid: the pieces' points (grid_layout), plus, for steered drives,
 * points where a module's direction or its steer-rate bound changes fast
 * (an ICR passing close to it), so steer angles, their rates and the
 * steer-rate bound are resolved there. g->s has room for the pieces' points
 * plus 4.25 grid_points more. */
static void grid_points(const veer_plan *plan, const int *intervals, grid_out *g, int *seg_first) {
    const veer_path *path = &plan->path;
    /* at most 4 grid_points more for steer continuity, a quarter for the steer-rate bound */
    int budget[2] = {4 * plan->options.grid_points, plan->options.grid_points / 4};
    for (int j = 0; j < path->segment_count; j++) {
        const veer_path_segment *ps = &path->segments[j];
        if (seg_first) seg_first[j] = g->n;
        double prev = ps->s_begin;
        grid_probe pprev, pk;
        probe_at(plan, j, prev, &pprev);
        grid_push(g, prev, &pprev);
        for (int p = ps->first_piece; p < ps->first_piece + ps->piece_count; p++) {
            const veer_path_piece *pc = &path->pieces[p];
            for (int i = 1; i <= intervals[p]; i++) {
                double sn = (p + 1 == ps->first_piece + ps->piece_count && i == intervals[p])
                                ? ps->s_end
                                : pc->s0 + pc->len * i / intervals[p];
                probe_at(plan, j, sn, &pk);
                if (plan->steered) refine(plan, j, prev, &pprev, sn, &pk, 0, budget, g);
                pprev = pk;
                grid_push(g, sn, &pk);
                prev = sn;
            }
        }
    }
}

void veer__plan_timeline(veer_plan *plan) {
    const veer_path *path = &plan->path;
    double clock = 0.0;
    for (int j = 0; j < plan->segment_count; j++) {
        veer_plan_segment *sg = &plan->segs[j];
        sg->t_resteer = clock;
        sg->t_move = clock + sg->resteer_time;
        for (int q = sg->k0; q <= sg->k1; q++) plan->t[q] += sg->t_move;
        clock = sg->t_move + sg->move_time + sg->dwell;
    }
    plan->duration = clock;
    for (int l = 0; l < plan->leg_count; l++) {
        memset(&plan->legs[l], 0, sizeof plan->legs[l]);
        plan->legs[l].start = -1.0;
    }
    for (int j = 0; j < plan->segment_count; j++) {
        const veer_plan_segment *sg = &plan->segs[j];
        veer_leg_summary *ls = &plan->legs[path->segments[j].leg];
        if (ls->start < 0.0) {
            ls->start = sg->t_resteer;
            ls->s_begin = path->segments[j].s_begin;
        }
        ls->s_end = path->segments[j].s_end;
        ls->duration = sg->t_move + sg->move_time + sg->dwell - ls->start;
        ls->resteer_time += sg->resteer_time;
        ls->dwell_time += sg->dwell;
    }
}

static veer_status build(veer_plan *plan, veer_diag *diag) {
    const veer_path *path = &plan->path;
    int intervals[VEER_PATH_MAX_PIECES], first[VEER_PATH_MAX_SEGMENTS + 1]; /* the caps are at most these */
    grid_layout(path, plan->options.grid_points, intervals);
    int base = path->segment_count;
    for (int p = 0; p < path->piece_count; p++) base += intervals[p];
    size_t grid_room = (size_t)(base + 4 * plan->options.grid_points + plan->options.grid_points / 4 + 1) * sizeof(double);
    grid_out go = {veer__alloc(grid_room), NULL, NULL, plan->module_count, 0, base, 0};
    size_t per = 3 * (size_t)plan->module_count; /* slope doubles per point */
    go.kin = go.s ? veer__alloc((size_t)go.cap * sizeof *go.kin) : NULL;
    if (go.kin && plan->steered) {
        go.slope = veer__alloc((size_t)go.cap * per * sizeof *go.slope);
        if (!go.slope) go.oom = 1;
    }
    if (go.kin && !go.oom) grid_points(plan, intervals, &go, first);
    double *grid = go.s;
    veer_point_kin *kin = go.kin;
    size_t kin_room = (size_t)go.cap * sizeof *go.kin;
    double *slope = go.slope;
    size_t slope_room = (size_t)go.cap * per * sizeof *go.slope;
    if (!kin || go.oom) {
        veer__free(grid, grid_room);
        veer__free(kin, kin_room);
        veer__free(slope, slope_room);
        return veer__fail(diag, VEER_ERR_NO_MEMORY, -1, -1, -1, -1.0, veer__limit(0, -1), "out of memory");
    }
    int n = go.n;
    int M = plan->module_count;
    size_t grid_bytes = VEER__GRID_BYTES(n, plan->steered ? M : 0, 1);
    char *g = veer__alloc(grid_bytes);
    if (!g) {
        veer__free(grid, grid_room);
        veer__free(kin, kin_room);
        veer__free(slope, slope_room);
        return veer__fail(diag, VEER_ERR_NO_MEMORY, -1, -1, -1, -1.0, veer__limit(0, -1), "out of memory");
    }
    veer__plan_lay_grid(plan, n, g, 1);
    plan->grid_bytes = grid_bytes;
    memcpy(plan->s, grid, (size_t)n * sizeof(double));
    veer__free(grid, grid_room);
    first[path->segment_count] = n;

    int longest = 0;
    plan->segment_count = path->segment_count;
    for (int j = 0; j < path->segment_count; j++) {
        veer_plan_segment *sg = &plan->segs[j];
        sg->k0 = first[j];
        sg->k1 = first[j + 1] - 1;
        if (sg->k1 - sg->k0 + 1 > longest) longest = sg->k1 - sg->k0 + 1;
        sg->dwell = path->segments[j].dwell;
        sg->pace_speed = sg->pace_yaw = VEER_UNLIMITED;
    }

    veer_status st = start_state(plan, &plan->x_start, diag);
    if (st != VEER_OK) {
        veer__free(kin, kin_room);
        veer__free(slope, slope_room);
        return st;
    }

    veer_workspace ws;
    memset(&ws, 0, sizeof ws);
    ws.longest = longest;
    ws.kin = kin;
    ws.slope = slope;
    int m = plan->rows.m;
    /* the row pool starts with room for half the most rows a point can have
     * (polygon faces that cannot bind are left out) and grows if need be */
    if (!ws_block(&ws, (size_t)longest * (size_t)((m + 3) / 4 + 8) + (size_t)m, 0)) {
        veer__free(kin, kin_room);
        veer__free(slope, slope_room);
        return veer__fail(diag, VEER_ERR_NO_MEMORY, -1, -1, -1, -1.0, veer__limit(0, -1), "out of memory");
    }

    double from[VEER_MAX_MODULES];
    for (int i = 0; i < M; i++) from[i] = plan->route->has_start_steer ? plan->route->start_steer[i] : 0.0;
    for (int j = 0; j < path->segment_count && st == VEER_OK; j++) {
        st = veer__solve_segment(plan, j, &plan->rows, j == 0 ? plan->x_start : 0.0, &ws, diag);
        if (st == VEER_OK) st = veer__steer_segment(plan, j, from, ws.xi, diag);
        if (st == VEER_OK) st = veer__shape_segment(plan, j, &plan->limits, j == 0 ? plan->x_start : 0.0, &ws, diag);
        for (int i = 0; i < M && st == VEER_OK; i++) from[i] = veer__plan_steer(plan, plan->segs[j].k1, i);
    }
    if (st == VEER_OK && plan->x_start > 0.0) plan->segs[0].resteer_time = 0.0; /* already pointing along the motion */
    if (st == VEER_OK) st = veer__meet_arrivals(plan, &ws, diag);
    veer__free(ws.extra, (size_t)ws.extra_cap * sizeof *ws.extra);
    veer__free(ws.block, ws.bytes);
    veer__free(kin, kin_room);
    veer__free(slope, slope_room);
    if (st != VEER_OK) return st;

    veer__plan_timeline(plan);
    return VEER_OK;
}

veer_status veer_plan_create(const veer_drive_def *drive, const veer_limits *limits, const veer_route *route,
                             const veer_plan_options *options, veer_plan **out, veer_diag *diag) {
    return veer__plan_create_with(drive, limits, route, options, NULL, out, diag);
}

veer_status veer__plan_create_with(const veer_drive_def *drive, const veer_limits *limits, const veer_route *route,
                                   const veer_plan_options *options, const veer_speed_cap *cap, veer_plan **out,
                                   veer_diag *diag) {
    veer__diag_ok(diag);
    veer_limit_id none = veer__limit(VEER_LIMIT_NONE, -1);
    if (!out) return veer__fail(diag, VEER_ERR_NULL, -1, -1, -1, -1.0, none, "out is NULL");
    *out = NULL;
    if (!drive || !limits || !route)
        return veer__fail(diag, VEER_ERR_NULL, -1, -1, -1, -1.0, none, "%s is NULL",
                          !drive ? "drive" : !limits ? "limits" : "route");
    veer_plan_options opt = options ? *options : veer_default_plan_options();
    veer_status st;
    if ((st = veer__plan_options_check(&opt, diag))) return st;
    if ((st = veer_drive_check(drive, diag))) return st;
    if ((st = veer__limits_check(drive, limits, diag))) return st;
    int M = veer_drive_module_count(drive);
    if (route->has_start_steer)
        for (int i = 0; i < M; i++)
            if (!isfinite(route->start_steer[i]))
                return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, none, "start_steer[%d] is not finite", i);

    for (int w = 0; w < route->waypoint_count && w < VEER_MAX_WAYPOINTS; w++) {
        const veer_waypoint *wp = &route->waypoints[w];
        if (!wp->timed) continue;
        if (!isfinite(wp->arrival) || wp->arrival < 0.0)
            return veer__fail(diag, VEER_ERR_VALUE, -1, w, -1, -1.0, none,
                              "waypoint %d: arrival must be a time >= 0 s, got %g", w, wp->arrival);
    }
    /* one block: the plan and its path and segment arrays, sized for the route */
    veer__plan_caps caps = veer__plan_caps_for(route->waypoint_count, route->leg_count);
    size_t bytes = veer__plan_block_bytes(caps);
    veer_plan *plan = veer__calloc(1, bytes);
    if (!plan) return veer__fail(diag, VEER_ERR_NO_MEMORY, -1, -1, -1, -1.0, none, "out of memory");
    plan->alloc_size = bytes;
    veer__plan_attach(plan, caps);
    plan->drive = *drive;
    plan->limits = *limits;
    plan->options = opt;
    *plan->route = *route;
    plan->leg_count = route->leg_count;
    plan->module_count = M;
    plan->steered = drive->kind == VEER_DRIVE_STEERED;
    if (cap && cap->cap) plan->cap = *cap;
    veer__row_ctx_init(&plan->rows, &plan->drive, &plan->limits, &plan->options);
    if ((st = veer__path_build_route(route, &plan->path, diag)) == VEER_OK) st = build(plan, diag);
    if (st != VEER_OK) {
        veer_plan_destroy(plan);
        return st;
    }
    veer__diag_ok(diag);
    *out = plan;
    return VEER_OK;
}

double veer_plan_duration(const veer_plan *plan) { return plan ? plan->duration : 0.0; }
double veer_plan_length(const veer_plan *plan) { return plan ? plan->path.length : 0.0; }
int veer_plan_module_count(const veer_plan *plan) { return plan ? plan->module_count : 0; }
int veer_plan_leg_count(const veer_plan *plan) { return plan ? plan->leg_count : 0; }
int veer_plan_grid_count(const veer_plan *plan) { return plan ? plan->n : 0; }

veer_status veer_plan_leg(const veer_plan *plan, int leg, veer_leg_summary *out) {
    if (!plan || !out) return VEER_ERR_NULL;
    if (leg < 0 || leg >= plan->leg_count) return VEER_ERR_VALUE;
    *out = plan->legs[leg];
    return VEER_OK;
}

veer_status veer_plan_grid(const veer_plan *plan, int k, double *s, double *sdot, veer_limit_id *binding) {
    if (!plan) return VEER_ERR_NULL;
    if (k < 0 || k >= plan->n) return VEER_ERR_VALUE;
    if (s) *s = plan->s[k];
    if (sdot) *sdot = sqrt(plan->x[k]);
    if (binding) *binding = plan->binding ? plan->binding[k] : veer__limit(VEER_LIMIT_NONE, -1);
    return VEER_OK;
}

veer_status veer_plan_path_at(const veer_plan *plan, double s, double q[3], double dq[3], double ddq[3]) {
    if (!plan || !q || !dq || !ddq) return VEER_ERR_NULL;
    double tol = 1e-9 * (1.0 + plan->path.length);
    if (!isfinite(s) || s < -tol || s > plan->path.length + tol) return VEER_ERR_VALUE;
    int seg = veer__path_segment_at(&plan->path, s);
    veer__path_eval(&plan->path, seg, s, q, dq, ddq);
    return VEER_OK;
}
