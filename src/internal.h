/* veer internals shared between the boxes of the data flow. Not installed.
 * SPDX-License-Identifier: MIT */
#ifndef VEER_INTERNAL_H
#define VEER_INTERNAL_H

#include <math.h>
#include <stdarg.h>
#include "veer/veer.h"

/* Keeps a function out of its callers (GCC, Clang): one with a large frame
 * out of its caller's frame, so that the caller's other calls do not stack
 * on top of its locals; a small one called from several places out of each
 * (code size on the cart). */
#if defined(__GNUC__)
#define VEER__NOINLINE __attribute__((noinline))
#else
#define VEER__NOINLINE
#endif

#define VEER_PI 3.14159265358979323846

/* Allocation through the hook (alloc.c). veer__free takes the size asked for. */
void *veer__alloc(size_t size);
void *veer__calloc(size_t count, size_t size); /* zeroed; NULL on overflow */
void veer__free(void *ptr, size_t size);

/* Fills diag (which may be NULL) and returns status. printf-style message.
 * leg, waypoint, grid_index: -1 when not applicable; s: -1 when not applicable. */
veer_status veer__fail(veer_diag *diag, veer_status status, int leg, int waypoint, int grid_index, double s,
                       veer_limit_id limit, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 8, 9)))
#endif
    ;
/* veer__fail with no leg, waypoint, grid point, path position or limit (the
 * common case; a shorter call than veer__fail with five "none" arguments). */
veer_status veer__fail_plain(veer_diag *diag, veer_status status, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 3, 4)))
#endif
    ;
/* Cart firmware may be built with VEER_TERSE_DIAG (the CMake option of that
 * name): veer__fail then keeps the status, indices, path position and limit
 * but writes the status's own text as the message, so that no message
 * format is linked in. The compiler still checks each format and its
 * arguments (in a call that `0 &&` never makes, removed as dead code when
 * optimizing). Off by default: the tests read the full messages. */
#ifdef VEER_TERSE_DIAG
veer_status veer__fail_terse(veer_diag *diag, veer_status status, int leg, int waypoint, int grid_index, double s,
                             veer_limit_id limit);
int veer__fail_format(const char *fmt, ...) /* never called; returns 0 */
#if defined(__GNUC__)
    __attribute__((format(printf, 1, 2)))
#endif
    ;
veer_status veer__fail_plain_terse(veer_diag *diag, veer_status status);
#define veer__fail(diag, status, leg, waypoint, grid_index, s, limit, ...)    \
    ((void)(0 && veer__fail_format(__VA_ARGS__)),                               \
     veer__fail_terse((diag), (status), (leg), (waypoint), (grid_index), (s), (limit)))
#define veer__fail_plain(diag, status, ...) \
    ((void)(0 && veer__fail_format(__VA_ARGS__)), veer__fail_plain_terse((diag), (status)))
#endif
/* Resets diag to success (no-op on NULL). */
void veer__diag_ok(veer_diag *diag);
/* A limit id; module -1 for body limits. */
static inline veer_limit_id veer__limit(int kind, int module) {
    veer_limit_id id;
    id.kind = kind;
    id.module = module;
    return id;
}
static inline int veer__finite(double v) { return isfinite(v); }
/* n rounded up to a multiple of 16 bytes: where blocks laid out in one buffer start. */
#define VEER__ALIGN16(n) (((size_t)(n) + 15u) & ~(size_t)15u)

/* Plausible cart dimensions, m: a wheel radius, a track or a module offset
 * outside [VEER_LENGTH_MIN, VEER_LENGTH_MAX] is a typing mistake, and its
 * reciprocal would overflow the setpoints. */
#define VEER_LENGTH_MIN 1e-4
#define VEER_LENGTH_MAX 1e3
static inline int veer__length_ok(double v) { return isfinite(v) && v >= VEER_LENGTH_MIN && v <= VEER_LENGTH_MAX; }
static inline int veer__offset_ok(double v) { return isfinite(v) && fabs(v) <= VEER_LENGTH_MAX; }
/* Wraps an angle into (-pi, pi]. */
double veer__wrap(double a);

/* ---- drive (drive.c, drive_*.c) ---------------------------------------- */

/* Linear drives (mecanum, omni, differential): wheel_rate = J * (vx, vy, wz).
 * Writes veer_drive_module_count() rows; returns 0 for steered drives. */
int veer__drive_wheel_matrix(const veer_drive_def *drive, double J[VEER_MAX_MODULES][3]);
/* How many working wheels drive the body twist (steered: working modules);
 * 0 when the working wheels cannot drive some component of it at all. A
 * motion that fewer than two working wheels drive has lost its traction. */
int veer__drive_driven(const veer_drive_def *drive, const double twist[3]);
/* Where module i touches the ground, body frame, m (mecanum and differential
 * from their dimensions; a differential side at its track's midpoint). */
void veer__module_position(const veer_drive_def *drive, int i, double r[2]);

/* Fails a drive call: no leg, waypoint, grid point, path position or limit. */
#define VEER__DRIVE_FAIL(diag, status, ...) veer__fail_plain((diag), (status), __VA_ARGS__)
/* Solves the symmetric positive definite 3x3 system N x = b by Cholesky
 * (drive.c). Returns 0, or -1 (x untouched) if N is not positive definite. */
int veer__drive_solve3(const double N[3][3], const double b[3], double x[3]);
/* Per-kind parts behind drive.c's dispatch. The checks see a drive whose kind,
 * module count and wheel radius are already valid; the others a drive that
 * passed veer_drive_check and finite inputs. */
veer_status veer__drive_steered_check(const veer_drive_def *drive, veer_diag *diag);
void veer__drive_steered_inverse(const veer_drive_def *drive, const double twist[3], const double *prev_steer,
                                 double *steer, double *wheel_rate);
int veer__drive_steered_forward(const veer_drive_def *drive, const double *steer, const double *wheel_rate,
                                double twist[3]);
veer_status veer__drive_mecanum_check(const veer_drive_def *drive, veer_diag *diag);
int veer__drive_mecanum_matrix(const veer_drive_def *drive, double J[VEER_MAX_MODULES][3]);
veer_status veer__drive_omni_check(const veer_drive_def *drive, veer_diag *diag);
int veer__drive_omni_matrix(const veer_drive_def *drive, double J[VEER_MAX_MODULES][3]);
veer_status veer__drive_differential_check(const veer_drive_def *drive, veer_diag *diag);
int veer__drive_differential_matrix(const veer_drive_def *drive, double J[VEER_MAX_MODULES][3]);
void veer__drive_differential_forward(const veer_drive_def *drive, const double *wheel_rate, double twist[3]);

/* ---- path (path.c) ------------------------------------------------------ */

/* One piece of the path: a straight line, a rounded corner (degree-7
 * polynomial), a spin in place or a pivot about a point, with the yaw law of
 * its leg. The layout is private to path.c. */
typedef struct {
    int kind;           /* private to path.c */
    int heading;        /* veer_heading_kind, or 0 for spin/pivot */
    double s0, len;     /* global path position where the piece starts, its length in s */
    double c[2][8];     /* polynomial / line / arc parameters, private to path.c */
    double yaw_p[12];   /* yaw-law parameters, private to path.c */
} veer_path_piece;

/* The most pieces and rest-to-rest segments the path of a route with W
 * waypoints and L legs can have. A travel leg gives each waypoint at most a
 * line and a rounded corner (or, at a stop, the spin a turning tangent
 * heading adds; its last waypoint only the line); spin and pivot legs are one
 * piece each: 2 W + L covers both (2 W - T + (L - T) for T travel legs).
 * Every stop of a travel leg ends a segment, and a tangent-heading stop that
 * turns adds a spin segment after it; spin and pivot legs are one each. */
#define VEER_PATH_PIECES_FOR(W, L) (2 * (W) + (L))
#define VEER_PATH_SEGMENTS_FOR(W, L) (2 * (W) + (L))
#define VEER_PATH_MAX_PIECES VEER_PATH_PIECES_FOR(VEER_MAX_WAYPOINTS, VEER_MAX_LEGS)
#define VEER_PATH_MAX_SEGMENTS VEER_PATH_SEGMENTS_FOR(VEER_MAX_WAYPOINTS, VEER_MAX_LEGS)

/* A rest-to-rest stretch of the path: the cart is at rest at s_begin and s_end. */
typedef struct {
    double s_begin, s_end;  /* global path positions */
    int first_piece, piece_count;
    int leg;                /* route leg index */
    int waypoint;           /* route waypoint index it ends at, -1 for spin and pivot legs */
    double dwell;           /* s to stand still after arriving at s_end */
} veer_path_segment;

/* A path. Its arrays are storage the owner attaches before building
 * (veer__path_attach) and keeps alive as long as the path: the path does
 * not own them, so a copy of the struct shares them. */
typedef struct {
    double length;          /* total s */
    int piece_count;
    int piece_cap;          /* room in pieces */
    veer_path_piece *pieces; /* [piece_cap] */
    int segment_count;
    int segment_cap;        /* room in segments */
    veer_path_segment *segments; /* [segment_cap] */
    double end_pose[3];
} veer_path;

/* Attaches storage to an empty path (counts set to 0). */
void veer__path_attach(veer_path *path, veer_path_piece *pieces, int piece_cap, veer_path_segment *segments,
                       int segment_cap);
/* The room the path of a route of waypoints waypoints and legs legs needs
 * at most: VEER_PATH_*_FOR of the counts clamped to 0..VEER_MAX_WAYPOINTS and
 * 0..VEER_MAX_LEGS (a route beyond them fails veer__path_build's checks
 * before it makes any piece). */
void veer__path_caps(int waypoints, int legs, int *piece_cap, int *segment_cap);

/* What veer_default_limits returns, written into *l in place (no copy on a
 * cart's stack), and what it gives each module. */
void veer__limits_init(veer_limits *l);
veer_module_limits veer__default_module_limits(void);

/* What veer_default_route returns, written into *r in place (a veer_route
 * is several KB: no copy on a cart's stack). */
void veer__route_init(veer_route *r, double x, double y, double yaw);

/* A route as the path builder reads it: a veer_route's head, and its legs
 * and waypoints wherever they lie (a veer_route's own arrays, or a cart's
 * scratch with room for only as many as it takes). Borrowed: the arrays
 * must outlive the view's use. */
typedef struct {
    double start_x, start_y, start_yaw;
    int has_start_steer;
    double start_steer[VEER_MAX_MODULES];
    int has_start_twist;
    double start_twist[3];
    int leg_count, waypoint_count;
    const veer_leg *legs;           /* [leg_count] */
    const veer_waypoint *waypoints; /* [waypoint_count] */
} veer__route_view;

/* The view of r (its arrays borrowed). */
static inline veer__route_view veer__route_view_of(const veer_route *r) {
    veer__route_view v;
    v.start_x = r->start_x, v.start_y = r->start_y, v.start_yaw = r->start_yaw;
    v.has_start_steer = r->has_start_steer;
    for (int i = 0; i < VEER_MAX_MODULES; i++) v.start_steer[i] = r->start_steer[i];
    v.has_start_twist = r->has_start_twist;
    for (int k = 0; k < 3; k++) v.start_twist[k] = r->start_twist[k];
    v.leg_count = r->leg_count, v.waypoint_count = r->waypoint_count;
    v.legs = r->legs, v.waypoints = r->waypoints;
    return v;
}
/* Writes v's head (everything but the legs and waypoints) into r. */
void veer__route_set_head(veer_route *r, const veer__route_view *v);

/* Builds the path of a route: checks it (NaN, coincident waypoints, counts,
 * corners too sharp to round, heading intents that cannot start from the
 * pose the leg starts with) and fills out, in the storage attached to it
 * (VEER_ERR_CAPACITY when the path needs more pieces or segments than it has
 * room for; VEER_ERR_NULL when none is attached). On failure out is an empty
 * path (storage kept) and diag names the leg and waypoint. */
veer_status veer__path_build(const veer__route_view *route, veer_path *out, veer_diag *diag);
/* veer__path_build of a veer_route (route NULL: VEER_ERR_NULL). */
static inline veer_status veer__path_build_route(const veer_route *route, veer_path *out, veer_diag *diag) {
    if (!route) return veer__path_build(NULL, out, diag);
    veer__route_view v = veer__route_view_of(route);
    return veer__path_build(&v, out, diag);
}

/* q(s), q'(s), q''(s) within segment seg (s clamped to the segment), where
 * q = (x, y, yaw); yaw is continuous along the whole path (no wraps). */
void veer__path_eval(const veer_path *path, int seg, double s, double q[3], double dq[3], double ddq[3]);

/* The segment holding s (the later one at a shared rest), clamped. */
int veer__path_segment_at(const veer_path *path, double s);

#endif
