/* veer internals: the plan object and the boxes that build it
 * (constraints.c -> topp.c -> steer.c -> plan.c; sample.c reads it).
 * Not installed. SPDX-License-Identifier: MIT */
#ifndef VEER_PLAN_INTERNAL_H
#define VEER_PLAN_INTERNAL_H

#include "internal.h"

/* ---- constraints.c: rows a*u + b*x <= c at grid points ------------------ */

/* One linear row in (u = sddot, x = sdot^2). */
typedef struct {
    double a, b, c;
    veer_limit_id id;
} veer_row;
/* A row whose u coefficient is negligible bounds x only: the solver
 * (topp.c) and the controlled stop's braking (constraints.c) read it so. */
static inline int veer__row_x_only(double a, double b, double c) { return fabs(a) <= 1e-12 * (fabs(b) + fabs(c)); }

/* What the drive's modules need at one path position, per unit sdot:
 * body twist xi = (gx, gy, w) (body frame) and its s-derivative. */
typedef struct {
    double q[3], dq[3], ddq[3]; /* path geometry at s */
    double xi[3], dxi[3];       /* body twist per unit sdot and its derivative in s */
} veer_point_kin;

/* Path geometry and body twist per unit sdot at s within segment seg. */
void veer__point_kin(const veer_path *path, int seg, double s, veer_point_kin *out);

/* Body-frame velocity of steered module i per unit sdot, and its s-derivative. */
void veer__module_velocity(const veer_drive_def *drive, int i, const veer_point_kin *pk, double v[2], double dv[2]);

/* What the row builder needs, prepared once per plan: the drive and
 * limits (borrowed, must outlive the context), the body-acceleration
 * polygon's faces and the wheel matrix of fixed-wheel drives. */
#define VEER_MAX_POLYGON_FACES 32 /* polygons have at most 64 sides */
/* The most u-rows one grid point can have: body acceleration, yaw
 * acceleration, and per module acceleration, motor curve and traction. */
#define VEER_MAX_POINT_ROWS (VEER_MAX_POLYGON_FACES + 2 + VEER_MAX_MODULES * (4 + VEER_MAX_POLYGON_FACES))
#define VEER_GRAVITY 9.80665 /* m/s^2, standard gravity (3rd CGPM, 1901) */
/* The faces of a polygon inscribed in a circle that can bind (see
 * constraints.c): the sides / 2 faces on one side of the tangent, of which
 * only the first half is stored. The set is mirror-symmetric about the
 * normal: face faces - 1 - j is face j with c negated (same s, same
 * height), and polygon_rows makes the mirrored faces from the stored ones. */
typedef struct {
    int faces;                                     /* sides / 2, on one side of the tangent */
    int half;                                      /* faces stored: (faces + 1) / 2 */
    double c[VEER_MAX_POLYGON_FACES / 2], s[VEER_MAX_POLYGON_FACES / 2]; /* normals of faces 0 .. half - 1 */
    double r;                                      /* radius * cos(pi / sides) */
    double radius;
} veer_polygon;

typedef struct {
    const veer_drive_def *drive;
    const veer_limits *limits;
    int module_count;
    veer_polygon accel;                 /* body acceleration, radius body_accel */
    veer_polygon traction;              /* module traction, unit radius (scaled by mu g) */
    int linear;                         /* 1: wheel_rate = J xi */
    int degraded;                       /* 1: a module is out */
    double J[VEER_MAX_MODULES][3];
    double pos[VEER_MAX_MODULES][2];    /* module contact points, body frame */
    int m;                              /* most u-rows a point can have */
    unsigned on_body;                   /* VEER_ON_* bits of the body limits that are set (finite) */
    unsigned on_mod[VEER_MAX_MODULES];  /* and of each module's */
} veer_row_ctx;
#define VEER_ON_BODY_SPEED 1u
#define VEER_ON_YAW_RATE 2u
#define VEER_ON_YAW_ACCEL 4u
#define VEER_ON_BODY_ACCEL 8u
#define VEER_ON_STEER_RATE 1u
#define VEER_ON_WHEEL_RATE 2u
#define VEER_ON_WHEEL_ACCEL 4u
#define VEER_ON_MOTOR 8u
#define VEER_ON_MOTOR_FREE 16u
#define VEER_ON_TRACTION 32u

void veer__row_ctx_init(veer_row_ctx *ctx, const veer_drive_def *drive, const veer_limits *limits,
                        const veer_plan_options *opt);

/* Rows at one grid point. x-only rows are folded into *xmax (and *xmax_id);
 * rows that involve u are written to rows (at most ctx->m). x_lin is where
 * the motor curve is linearized (the profile's sdot^2 there, or <= 0 for a
 * first guess); its row is conservative for any x_lin.
 * Returns the number of u-rows, or -1 if the drive cannot follow the path
 * there (differential drive asked to move sideways: *xmax_id says so). */
int veer__point_rows(const veer_row_ctx *ctx, const veer_point_kin *pk, double x_lin, veer_row *rows, double *xmax,
                     veer_limit_id *xmax_id);
/* The same rows at (u, x), linearized at x, not written: *worst gets the
 * largest (a u + b x) / c of those with c > 0 (-VEER_UNLIMITED if none).
 * Returns what veer__point_rows would. */
int veer__point_worst(const veer_row_ctx *ctx, const veer_point_kin *pk, double u, double x, double *worst,
                      double *xmax, veer_limit_id *xmax_id);
/* The same rows at x, linearized at x, not written: *decel gets the largest
 * (c - b x) / a of those with a < 0, the hardest deceleration u they allow
 * (-VEER_UNLIMITED if none bounds braking, or if the function returns -1).
 * Returns what veer__point_rows would. */
int veer__point_decel(const veer_row_ctx *ctx, const veer_point_kin *pk, double x, double *decel, double *xmax,
                      veer_limit_id *xmax_id);

/* Checks limits against the drive: NaN/negative -> ERR_VALUE, zero -> ERR_INFEASIBLE. */
veer_status veer__limits_check(const veer_drive_def *drive, const veer_limits *limits, veer_diag *diag);

/* ---- topp.c: TOPP by reachability analysis on one rest-to-rest segment -- */

typedef struct {
    int n;                  /* grid points 0..n-1, rest at both ends */
    const double *s;        /* [n] path positions, increasing */
    const double *xmax;     /* [n] x-only bound at each point (may be +inf) */
    const veer_limit_id *xmax_id; /* [n] the limit behind each xmax */
    const veer_row *rows;   /* u-rows of point k: rows[row_at[k] .. row_at[k + 1]) */
    const int *row_at;      /* [n + 1] */
    /* Extra rows of stage k, already in the stage's variables (u, x_k):
     * extra[extra_at[k] .. extra_at[k] + extra_n[k]). NULL: none. */
    const veer_row *extra;
    const int *extra_at, *extra_n;
    /* Room for a full solve (no extra rows) to keep each stage's upper
     * bounds from the backward pass for the forward pass: keep_cap doubles
     * and keep_at [n] ints, written by the solve. With less room than
     * veer__topp_keep_room (or NULL) the forward pass works from the rows
     * again, to the same result. */
    double *keep;
    size_t keep_cap;
    int *keep_at;
} veer_topp_problem;

/* Doubles of keep room that a segment of n points and `rows` u-rows can
 * use at most: 2 per upper bound, 1 + the rows of points k and k + 1 at
 * stage k. */
#define veer__topp_keep_room(n, rows) (2 * ((size_t)(n) + 2 * (size_t)(rows)))

/* Fills x[n] (sdot^2) with the time-optimal profile: backward controllable
 * sets, then the forward greedy pass (Pham & Pham, IEEE T-RO 2018), using the
 * first-order interpolation scheme (an interval's acceleration rows hold at
 * both of its ends), starting at x_start (0: rest; more: a moving start,
 * which must leave room to stop). work needs n doubles. Returns VEER_OK, or
 * VEER_ERR_INFEASIBLE with *bad_index the first point where no motion fits
 * (0 for a moving start without room to stop). */
veer_status veer__topp_solve(const veer_topp_problem *p, double x_start, double *x, double *work, int *bad_index);

/* veer__topp_solve again after rows were added to the stages k with
 * marks[k] & VEER_TOPP_CHANGED (marks: n bytes; the bit VEER_TOPP_K_CHANGED
 * is the solver's own), x and K (work) holding the solution before: the
 * same result, with work only where the added rows change it. */
#define VEER_TOPP_CHANGED 0x80u
#define VEER_TOPP_K_CHANGED 0x40u
veer_status veer__topp_resolve(const veer_topp_problem *p, double x_start, double *x, double *work,
                               unsigned char *marks, int *bad_index);

/* The hardest braking from x_start into xb[n]: sdot^2 held at x_start up
 * to point hold, then at each stage the least u its rows allow (the
 * forward pass's lower bound), never below 0. The lowest profile a start
 * at x_start can reach (Pham & Pham's forward reachable sets, lower ends). */
void veer__topp_brake(const veer_topp_problem *p, double x_start, int hold, double *xb);

/* The limit binding at point k of a solved profile (kind NONE if none within
 * a relative slack of 2e-3). */
veer_limit_id veer__topp_binding(const veer_topp_problem *p, const double *x, int k);

/* ---- position-dependent speed caps (speed zones) ------------------------ */

/* A body-speed cap that depends on where the cart is: cap(user, pose, &zone)
 * returns the cap in m/s (+inf where none applies) and the zone index that
 * sets it. The planner applies at each grid point the smallest cap of the
 * point and its two neighbours, so a zone that begins between two grid
 * points already holds at the point before it. */
typedef struct {
    double (*cap)(const void *user, const double pose[3], int *zone);
    const void *user;
} veer_speed_cap;

/* Checks plan options (grid size, polygon sides, duration target). */
veer_status veer__plan_options_check(const veer_plan_options *o, veer_diag *diag);

/* veer_plan_create with an optional speed cap (NULL: none). */
veer_status veer__plan_create_with(const veer_drive_def *drive, const veer_limits *limits, const veer_route *route,
                                   const veer_plan_options *options, const veer_speed_cap *cap, veer_plan **out,
                                   veer_diag *diag);

/* ---- the plan object (plan.c) ------------------------------------------ */

typedef struct {
    int k0, k1;                   /* grid points of this segment: k0..k1 in the plan arrays */
    double t_resteer;             /* s: the re-steer phase before the motion starts */
    double resteer_time;          /* s */
    double t_move;                /* s: motion starts (= t_resteer + resteer_time) */
    double move_time;             /* s: raw_time + tau - lead (veer__segment_lead) */
    double raw_time;              /* s: the time-optimal law's motion time */
    double tau;                   /* s: jerk-limiting window (the law averaged over it), 0: none */
    double dwell;                 /* s at rest after the motion */
    int coast_k;                  /* moving start with a jerk window: the solve holds the start speed up to
                                     grid point k0 + coast_k (0: no such hold) */
    double pace_speed, pace_yaw;  /* timing.c's caps pacing the segment to a timed arrival: body speed (m/s)
                                     and yaw rate (rad/s); VEER_UNLIMITED: none */
} veer_plan_segment;

struct veer_plan {
    size_t alloc_size;            /* bytes of this block, for the allocator hook */
    veer_drive_def drive;
    veer_limits limits;
    veer_plan_options options;
    veer_row_ctx rows;            /* row builder context (points into drive and limits above) */
    veer_speed_cap cap;           /* speed zones, cap.cap NULL if none */
    veer_route *route;            /* in the plan's block; NULL on a plan a cart's player loaded (it keeps none) */
    veer_path path;
    int module_count;
    int steered;                  /* 1 for steered drives */
    int n;                        /* grid points over the whole plan */
    double *s, *x, *t;            /* [n] path position, sdot^2, time at the point */
    float *steer;                 /* [n * module_count] steer angle at each grid point (continuous), as a float
                                     inside the steer range (steer.c); NULL for fixed wheels (veer__plan_steer) */
    veer_limit_id *binding;       /* [n]; NULL on a decoded plan (the wire carries none: NONE at every point) */
    size_t grid_bytes;            /* bytes of the heap block behind s (VEER__GRID_BYTES), 0 in a workspace */
    int segment_count;
    int segment_cap;              /* room in segs (= path.segment_cap) */
    veer_plan_segment *segs;      /* [segment_cap], in the plan's block (veer__plan_attach) */
    int leg_count;
    veer_leg_summary *legs;       /* [leg_cap], in the plan's block */
    double x_start;               /* sdot^2 at the start (re-planning on the move), 0 at rest */
    double start_steer[VEER_MAX_MODULES]; /* module angles at the start, where the first re-steer phase begins
                                             (the route's start_steer, or 0; a fixed wheel's own angle) */
    double duration;
};

/* A plan's block: the struct, then its path's pieces and segments, its own
 * segments, its leg summaries and, when `route`, its route, each at a
 * 16-byte offset, sized for piece_cap pieces, segment_cap segments
 * (VEER_PATH_*_FOR the route: veer__path_caps) and `legs` legs. The struct
 * does not own its arrays apart from the block, so a plan is never copied
 * by value. */
typedef struct {
    int pieces, segments, legs, route;
} veer__plan_caps;
#define VEER__PLAN_BLOCK_BYTES(pieces, segments, legs, route)                                                      \
    (VEER__ALIGN16(sizeof(veer_plan)) + VEER__ALIGN16((size_t)(pieces) * sizeof(veer_path_piece)) +             \
     VEER__ALIGN16((size_t)(segments) * sizeof(veer_path_segment)) +                                            \
     VEER__ALIGN16((size_t)(segments) * sizeof(veer_plan_segment)) +                                            \
     VEER__ALIGN16((size_t)(legs) * sizeof(veer_leg_summary)) + ((route) ? VEER__ALIGN16(sizeof(veer_route)) : 0))
/* The caps of a plan for a route of that many waypoints and legs, keeping
 * its route; and a block's size. */
veer__plan_caps veer__plan_caps_for(int waypoints, int legs);
size_t veer__plan_block_bytes(veer__plan_caps caps);
/* Points the arrays of plan (at the start of a block of at least
 * veer__plan_block_bytes(caps) bytes, aligned for double) into the block
 * behind the struct and zeroes them; the path is left empty, segment_count
 * 0. The rest of the struct is not touched. */
void veer__plan_attach(veer_plan *plan, veer__plan_caps caps);

/* The grid arrays behind plan->s, for n points: s, x, t (doubles), the
 * steer angles of M modules (floats; 0 modules for fixed wheels), and the
 * binding limit of each point on a planned plan. */
#define VEER__GRID_BYTES(n, M, with_binding)                                                                     \
    ((size_t)(n) * (3 * sizeof(double) + ((with_binding) ? sizeof(veer_limit_id) : 0)) +                         \
     (size_t)(n) * (size_t)(M) * sizeof(float))
/* Lays the grid arrays out in grid (VEER__GRID_BYTES(n, steered ?
 * module_count : 0, binding) bytes, aligned for double) and sets plan->n. */
void veer__plan_lay_grid(veer_plan *plan, int n, char *grid, int binding);

/* The angle a fixed wheel reports: the direction it pushes (drive.h). */
static inline double veer__fixed_steer(const veer_drive_def *drive, int i) {
    return drive->kind == VEER_DRIVE_OMNI ? drive->modules[i].drive_angle : 0.0;
}
/* Module i's steer angle at grid point k. */
static inline double veer__plan_steer(const veer_plan *plan, int k, int i) {
    return plan->steer ? (double)plan->steer[(size_t)k * (size_t)plan->module_count + (size_t)i]
                       : veer__fixed_steer(&plan->drive, i);
}
/* Module i's angle when segment j's re-steer phase begins: where the last
 * segment's motion left it, or the start; and when it ends: where the
 * segment's motion starts (steer.c keeps both on the grid). */
static inline double veer__resteer_from(const veer_plan *plan, int j, int i) {
    return j > 0 ? veer__plan_steer(plan, plan->segs[j - 1].k1, i) : plan->start_steer[i];
}
static inline double veer__resteer_to(const veer_plan *plan, int j, int i) {
    return veer__plan_steer(plan, plan->segs[j].k0, i);
}

/* ---- plan.c: segment solves, shared with timing.c ---------------------- */

/* Work buffers for one segment's solve, sized for the longest segment:
 * one block (plan.c) with the per-point arrays, the row pool and the
 * solver's keep room, which moves as a whole when the pool grows. */
typedef struct {
    void *block;            /* the allocation behind every array below but kin, slope and extra */
    size_t bytes;           /* its size */
    int longest;            /* points in the longest segment */
    veer_row *rows;         /* u-rows of the points, packed: point k's at row_at[k] .. row_at[k + 1] */
    int *row_at;            /* [longest + 1] */
    size_t rows_cap;        /* rows the pool has room for */
    double *xmax, *K, *xi, *dxi; /* xi, dxi: body twist per unit sdot and its s-derivative, 3 per point */
    double *x_prev;         /* [longest] the profile at the last between-grid-point check */
    veer_limit_id *xmax_id;
    double *keep;           /* the solver's keep room (veer_topp_problem), keep_cap doubles */
    size_t keep_cap;
    int *keep_at;           /* [longest] */
    const veer_point_kin *kin; /* [plan->n] path kinematics at every grid point, NULL: computed when needed */
    const double *slope;    /* steered drives: [plan->n * 3 * modules] steer slope and module velocity at every grid point
                             * (plan.c's grid refinement), NULL: computed when needed */
    /* Midpoint rows added where the profile broke a limit between grid
     * points (plan.c): a pool and, per stage, where its rows are. */
    veer_row *extra;
    int *extra_at, *extra_n; /* [longest] */
    unsigned char *extra_done; /* [longest]: which of an interval's points were added (bits 0-2), and the
                                * re-solve's marks (VEER_TOPP_CHANGED: rows added at the last check) */
    int extra_used, extra_cap;
} veer_workspace;

/* Rows, solve and times of segment j with the limits behind ctx, starting at
 * sdot^2 = x_start (repeated at the profile when a motor curve is set). */
veer_status veer__solve_segment(veer_plan *plan, int j, const veer_row_ctx *ctx, double x_start, veer_workspace *ws,
                                veer_diag *diag);
/* Jerk limits on segment j (solved within lim, steer angles known). */
veer_status veer__shape_segment(veer_plan *plan, int j, const veer_limits *lim, double x_start, veer_workspace *ws,
                                veer_diag *diag);

/* Absolute times from the segments' re-steer, motion and dwell times (grid
 * times plan->t relative to each segment's motion start on entry), the
 * duration and the summaries of plan->leg_count legs. */
void veer__plan_timeline(veer_plan *plan);

/* ---- timing.c: timed stops and duration target ------------------------- */

veer_status veer__meet_arrivals(veer_plan *plan, veer_workspace *ws, veer_diag *diag);

/* ---- steer.c: continuous steer angles and re-steer phases -------------- */

/* Steer angle of a steered module: the representative of direction dir
 * (mod pi) nearest to ref. */
double veer__steer_near(double dir, double ref);

/* Fills plan->steer along segment j (grid points k0..k1) starting from the
 * module angles in from[], choosing for each module the shorter steer motion
 * or the reverse choice its steer range allows; fills the segment's
 * re-steer phase. xi holds the body twist per unit sdot (3 per point) at
 * the segment's grid points, or is NULL: computed from the path at each
 * (a decoded plan keeps no such array). VEER_ERR_INFEASIBLE with diag when a module would leave
 * its steer range. */
veer_status veer__steer_segment(veer_plan *plan, int j, const double *from, const double *xi, veer_diag *diag);

/* ---- sample.c ---------------------------------------------------------- */

/* Module setpoints at path position s in segment seg with sdot, sddot, given
 * reference steer angles ref[] (continuity). */
void veer__module_setpoints(const veer_plan *plan, int seg, const veer_point_kin *pk, double sdot, double sddot,
                            const double *ref, veer_module_setpoint *out);

/* ---- verify.c: dense limit checks -------------------------------------- */

#define VEER__CHECK_LIMITS 1 /* speeds, accelerations, steer, traction, motor */
#define VEER__CHECK_JERK 2   /* body and wheel jerk, differenced */
/* Samples segment j's motion every dt seconds (from the segment law, so it
 * works before the plan's timeline exists) into r (zeroed by the caller). */
void veer__check_segment(const veer_plan *plan, int j, double dt, int which, veer_check_report *r);

/* ---- jerk.c: jerk-limiting windows ---------------------------------------- */

int veer__has_jerk_limit(const veer_plan *plan);
/* Sets segment j's averaging window to the smallest that keeps every jerk
 * limit (accepted at 0.25 ms samples) and returns the worst ratio of the
 * other limits after averaging, or -1 when no window up to half the
 * stretch's time does; slow[0] and slow[1] then say by how much to scale
 * the speed-type and the acceleration-type limits for the next try (1 when
 * a window holds). On a moving start's first segment the window is at most
 * twice the solve's hold of the start speed (coast_k); -2 when none up to
 * that holds but a longer one might. Needs the segment's law and steer
 * angles. */
double veer__jerk_window(veer_plan *plan, int j, double slow[2]);
/* How far averaging may take the other limits over (beyond it the law is
 * solved again 3 % lower). */
#define VEER__JERK_OTHERS 1.005

/* ---- stop.c: controlled stop along the path ----------------------------- */

/* Advances a controlled stop by dt seconds (internally in steps of at most
 * 1 ms) from path position *s with speed *sdot in segment seg, braking as
 * hard as the limits allow; *sddot gets the last deceleration. Returns 1
 * while still moving, 0 once at rest. Bounded work: ceil(dt / 1 ms) steps. */
int veer__stop_step(const veer_plan *plan, int seg, double *s, double *sdot, double *sddot, double dt);

/* Seconds by which segment j reads its averaged law ahead: tau / 2 on the
 * first segment of a moving start with a jerk window (its law starts at the
 * start point with the start speed), else 0. */
double veer__segment_lead(const veer_plan *plan, int j);

/* The motion law of segment j, r seconds after its motion starts. */
void veer__segment_law(const veer_plan *plan, int j, double r, double *s, double *sdot, double *sddot);

/* The plan's state at time t as (segment, s, sdot, sddot); returns the
 * phase (veer_phase). */
int veer__plan_state(const veer_plan *plan, double t, int *seg, double *s, double *sdot, double *sddot);

/* Fills a sample for a moving state (s, sdot, sddot) in segment seg with
 * steer angles continued from the plan's grid. */
void veer__sample_state(const veer_plan *plan, int seg, double s, double sdot, double sddot, veer_sample *out);

#endif
