/* veer: limits, planning, sampling.
 *
 * A plan is a path (the smooth pose curve the route describes) and a
 * time-optimal profile along it (TOPP by reachability analysis, Pham & Pham,
 * IEEE T-RO 2018), plus the re-steer phases and dwells at rests.
 * The path position s is in metres on travel legs and radians on spin and
 * pivot legs. Times are seconds from the start of the plan.
 * SPDX-License-Identifier: MIT */
#ifndef VEER_PLAN_H
#define VEER_PLAN_H

#include <math.h>
#include "veer/status.h"
#include "veer/drive.h"
#include "veer/route.h"

#ifdef __cplusplus
extern "C" {
#endif

/* A limit left at VEER_UNLIMITED (+infinity) does not constrain the plan.
 * Limits must be > 0; a zero limit makes the request infeasible. */
#define VEER_UNLIMITED ((double)INFINITY)

typedef struct {
    double wheel_rate;  /* rad/s, magnitude of the wheel's rate */
    double wheel_accel; /* rad/s^2 */
    double steer_rate;  /* rad/s, relative to the body (steered drives) */
    double steer_min;   /* rad, lowest steer angle the module reaches; -VEER_UNLIMITED: continuous */
    double steer_max;   /* rad, highest; +VEER_UNLIMITED: continuous */
    /* Traction: the contact point's acceleration (including its centripetal
     * part) may not exceed traction_mu * g, g = 9.80665 m/s^2 (standard
     * gravity). That is the friction force mu * (the module's share of the
     * weight) over the module's share of the mass, the two shares taken
     * equal. Rubber on dry concrete is about 0.8 kinetic and 1.0 static
     * (Serway & Beichner, Physics for Scientists and Engineers, Table 5.2);
     * measure your own tyres on your own ground. Unset: no traction limit. */
    double traction_mu;
    /* DC motor torque-speed line: driving in the direction the wheel turns,
     * the wheel acceleration available falls linearly from motor_stall_accel
     * (rad/s^2) at rest to zero at motor_free_rate (rad/s); braking may use
     * motor_stall_accel. Both unset: no motor curve; both set or neither. */
    double motor_stall_accel;
    double motor_free_rate;
    /* rad/s^3, rate of change of the wheel acceleration. Jerk limits (this and
     * body_jerk) average each rest-to-rest stretch's time-optimal law over the
     * shortest window that keeps them, at a cost of that window in seconds per
     * stretch. A plan that starts moving (taken as moving steadily) eases out
     * of its start speed the same way where the limits let it hold that speed
     * for half the window; where it must brake sooner than that allows, the
     * plan is refused (VEER_ERR_INFEASIBLE, limit START_STATE). */
    double wheel_jerk;
} veer_module_limits;

typedef struct {
    veer_module_limits modules[VEER_MAX_MODULES];
    double body_speed;  /* m/s, speed of the body origin */
    double body_accel;  /* m/s^2, magnitude of the body origin's acceleration */
    double yaw_rate;    /* rad/s */
    double yaw_accel;   /* rad/s^2 */
    double body_jerk;   /* m/s^3, rate of change of the body origin's acceleration */
} veer_limits;

/* Every limit unset. */
VEER_API veer_limits veer_default_limits(void);

typedef struct {
    int grid_points;         /* grid points over the whole plan, default 1000, 16..200000 */
    int accel_polygon_sides; /* sides of the polygon inscribed in the body-acceleration circle, default 32, even, 8..64 */
    int traction_polygon_sides; /* the same for each module's traction circle, default 16, even, 8..64 */
    /* s from the start to the end of the plan (dwells and re-steer phases
     * included); 0: as fast as the limits allow. Met like a timed stop at
     * the end (see veer_waypoint.arrival). With the route's last stop timed
     * as well, the two must agree (its arrival plus the final dwell), else
     * VEER_ERR_VALUE. */
    double duration_target;
} veer_plan_options;

VEER_API veer_plan_options veer_default_plan_options(void);

/* The plan: opaque, made by veer_plan_create and owned by the caller until
 * veer_plan_destroy. It keeps its own copies of the drive, limits and route. */
typedef struct veer_plan veer_plan;

/* Plans the fastest trajectory of route that drive can drive within limits.
 * options may be NULL for defaults, diag may be NULL. On success *out is a
 * new plan; on failure *out is NULL and diag says what, where and which limit. */
VEER_API VEER_NODISCARD veer_status veer_plan_create(const veer_drive_def *drive, const veer_limits *limits,
                                                     const veer_route *route, const veer_plan_options *options,
                                                     veer_plan **out, veer_diag *diag);
/* Frees a plan from veer_plan_create or veer_plan_decode_pb; NULL and plans
 * living in a caller's workspace (veer_plan_load_pb) are left alone. */
VEER_API void veer_plan_destroy(veer_plan *plan);

/* Whole-plan figures. */
VEER_API double veer_plan_duration(const veer_plan *plan); /* s, including re-steer phases and dwells */
VEER_API double veer_plan_length(const veer_plan *plan);   /* path length in s units */
VEER_API int veer_plan_module_count(const veer_plan *plan);

typedef enum {
    VEER_PHASE_RESTEER = 1, /* body at rest, modules turning to their next angles */
    VEER_PHASE_MOVING = 2,
    VEER_PHASE_DWELL = 3,   /* body and modules at rest, waiting */
    VEER_PHASE_DONE = 4     /* after the end of the plan */
} veer_phase;

typedef struct {
    double start;          /* s from plan start when the leg begins (its first re-steer phase) */
    double duration;       /* s, moving + re-steer + dwell time of the leg */
    double resteer_time;   /* s of it spent re-steering */
    double dwell_time;     /* s of it spent dwelling */
    double s_begin, s_end; /* path positions the leg covers */
} veer_leg_summary;

VEER_API int veer_plan_leg_count(const veer_plan *plan);
VEER_API VEER_NODISCARD veer_status veer_plan_leg(const veer_plan *plan, int leg, veer_leg_summary *out);

typedef struct {
    double steer;       /* rad relative to body x, continuous in time */
    double steer_rate;  /* rad/s relative to the body */
    double wheel_rate;  /* rad/s, signed: negative when the wheel runs reversed */
    double wheel_accel; /* rad/s^2 */
} veer_module_setpoint;

typedef struct {
    double t;                    /* s */
    int phase;                   /* veer_phase */
    int leg;                     /* leg index */
    double s, sdot, sddot;       /* path position and its time derivatives */
    double pose[3];              /* x, y (m), yaw (rad), world */
    double twist_world[3];       /* vx, vy (m/s) in the world frame, wz (rad/s) */
    double twist_body[3];        /* the same in the body frame */
    double accel_world[3];       /* ax, ay (m/s^2) of the body origin, world; yaw accel (rad/s^2) */
    double accel_body[3];        /* the world acceleration expressed in the body frame; yaw accel */
    int module_count;
    veer_module_setpoint modules[VEER_MAX_MODULES];
} veer_sample;

/* The plan's state at time t (clamped to [0, duration]; after the end the
 * phase is DONE and the cart rests at the final pose). */
VEER_API VEER_NODISCARD veer_status veer_plan_sample(const veer_plan *plan, double t, veer_sample *out);

/* A fixed-rate table: rows at t = 0, 1/rate_hz, ... up to and including the
 * last time <= duration, plus a final row at the duration. Writes at most
 * capacity rows; *count gets the number of rows the table has. With
 * capacity too small (or out NULL) returns VEER_ERR_BUFFER and writes nothing. */
VEER_API VEER_NODISCARD veer_status veer_plan_table(const veer_plan *plan, double rate_hz, veer_sample *out,
                                                    size_t capacity, size_t *count);

/* Path geometry at path position s in [0, length]: q = (x, y, yaw) and its
 * first and second derivatives with respect to s. At a rest between two
 * pieces the piece that starts there is used. s outside: VEER_ERR_VALUE. */
VEER_API VEER_NODISCARD veer_status veer_plan_path_at(const veer_plan *plan, double s, double q[3], double dq[3],
                                                      double ddq[3]);

/* The profile grid: point k has path position s, speed sdot = sqrt(x), and
 * the limit that binds there (kind NONE where none does, e.g. at rests). */
VEER_API int veer_plan_grid_count(const veer_plan *plan);
VEER_API VEER_NODISCARD veer_status veer_plan_grid(const veer_plan *plan, int k, double *s, double *sdot,
                                                   veer_limit_id *binding);

/* A plan sampled every dt seconds (1e-5..1) against every limit it was
 * planned for, including the differenced ones (jerk; the steer angle's own
 * rate): the worst ratio of a figure to its limit (1 = at the limit), which
 * limit and when. Traction counts the contact point's acceleration against
 * mu g; the motor curve reports 1 + (driving accel - available) / stall. */
typedef struct {
    double worst;
    veer_limit_id limit;
    double t;       /* s */
    long samples;
} veer_check_report;

VEER_API VEER_NODISCARD veer_status veer_plan_check_limits(const veer_plan *plan, double dt, veer_check_report *out);

/* Controlled stop (in the manner of IEC 60204-1 stop categories 1 and 2): from
 * the plan's state at time t the cart brakes along the planned path as hard
 * as its limits allow (the largest deceleration every limit permits at each
 * point, integrated in 1 ms steps), then stands. Steering modules keep the
 * angles the path gives them; a stop during a re-steer phase or a dwell is
 * immediate (the body already stands). The player and the range checks use
 * the same braking. */
typedef struct {
    double t;           /* s: plan time the stop starts */
    int leg;            /* leg it happens in */
    double s_start;     /* path position and speed when it starts */
    double sdot_start;
    double s_end;       /* path position where the cart comes to rest */
    double duration;    /* s from the start of the stop to rest */
} veer_stop_info;

VEER_API VEER_NODISCARD veer_status veer_plan_stop_info(const veer_plan *plan, double t, veer_stop_info *out);

/* The state tau seconds into a controlled stop begun at plan time t_stop
 * (tau clamped to [0, duration]; afterwards the cart stands). phase is
 * MOVING while braking and DONE once at rest. */
VEER_API VEER_NODISCARD veer_status veer_plan_stop_sample(const veer_plan *plan, double t_stop, double tau,
                                                          veer_sample *out);

#ifdef __cplusplus
}
#endif
#endif
