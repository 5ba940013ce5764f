/* veer: status codes, diagnostics, limit ids and the allocator hook.
 * SPDX-License-Identifier: MIT */
#ifndef VEER_STATUS_H
#define VEER_STATUS_H

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

#if defined(_WIN32) && defined(VEER_BUILDING_SHARED)
#define VEER_API __declspec(dllexport)
#elif defined(__GNUC__)
#define VEER_API __attribute__((visibility("default")))
#else
#define VEER_API
#endif

#if defined(__GNUC__)
#define VEER_NODISCARD __attribute__((warn_unused_result))
#else
#define VEER_NODISCARD
#endif

/* One table builds the enum and veer_status_str(): name, value, meaning. */
#define VEER_STATUS_TABLE(X)                                                    \
    X(OK, 0, "success")                                                        \
    X(ERR_NULL, 1, "a required pointer is NULL")                               \
    X(ERR_VALUE, 2, "a value is NaN, infinite, negative or out of its range")  \
    X(ERR_CAPACITY, 3, "a count exceeds its fixed capacity")                   \
    X(ERR_GEOMETRY, 4, "the route geometry is degenerate")                     \
    X(ERR_INFEASIBLE, 5, "the route cannot be driven within the limits")       \
    X(ERR_UNBOUNDED, 6, "no limit bounds the motion")                          \
    X(ERR_NO_MEMORY, 7, "out of memory")                                       \
    X(ERR_BUFFER, 8, "the output buffer is too small")                         \
    X(ERR_DECODE, 9, "the bytes do not decode as the expected message")        \
    X(ERR_VERSION, 10, "the message was made by an incompatible schema version") \
    X(ERR_STATE, 11, "the call does not fit the object's current state")       \
    X(ERR_LATE, 12, "a timed arrival is earlier than the fastest plan can make")

typedef enum {
#define VEER_STATUS_ENUM_(name, value, text) VEER_##name = value,
    VEER_STATUS_TABLE(VEER_STATUS_ENUM_)
#undef VEER_STATUS_ENUM_
} veer_status;

/* Static text for a status; "unknown status" for values outside the table. */
VEER_API const char *veer_status_str(veer_status status);
/* The enum name without prefix, e.g. "ERR_INFEASIBLE". */
VEER_API const char *veer_status_name(veer_status status);

/* What a limit is about. With a module index, a limit names itself like
 * "wheel_speed[2]"; body limits are "body_speed", "yaw_accel", ... */
#define VEER_LIMIT_TABLE(X)                         \
    X(NONE, 0, "none")                              \
    X(WHEEL_SPEED, 1, "wheel_speed")                \
    X(WHEEL_ACCEL, 2, "wheel_accel")                \
    X(STEER_RATE, 3, "steer_rate")                  \
    X(STEER_RANGE, 4, "steer_range")                \
    X(BODY_SPEED, 5, "body_speed")                  \
    X(BODY_ACCEL, 6, "body_accel")                  \
    X(YAW_RATE, 7, "yaw_rate")                      \
    X(YAW_ACCEL, 8, "yaw_accel")                    \
    X(NONHOLONOMIC, 9, "no_sideways_motion")        \
    X(PATH_END, 10, "stop_at_end")                  \
    X(SPEED_ZONE, 11, "speed_zone")                 \
    X(TRACTION, 12, "traction")                     \
    X(MOTOR, 13, "motor_curve")                     \
    X(MODULE_OUT, 14, "module_out")                 \
    X(START_STATE, 15, "start_state")               \
    X(BODY_JERK, 16, "body_jerk")                   \
    X(WHEEL_JERK, 17, "wheel_jerk")

typedef enum {
#define VEER_LIMIT_ENUM_(name, value, text) VEER_LIMIT_##name = value,
    VEER_LIMIT_TABLE(VEER_LIMIT_ENUM_)
#undef VEER_LIMIT_ENUM_
} veer_limit_kind;

typedef struct {
    int kind;   /* a veer_limit_kind */
    int module; /* module index for per-module limits, zone index for speed_zone, -1 for body limits */
} veer_limit_id;

/* Writes the limit's name ("wheel_speed[2]", "body_accel") into buf, always
 * NUL-terminated when size > 0. Returns the length the full name needs. */
VEER_API size_t veer_limit_name(veer_limit_id id, char *buf, size_t size);

/* Where and why a call failed. Filled by every call that takes one; on
 * success status is VEER_OK and message is empty. Fields that do not apply
 * are -1. */
#define VEER_DIAG_MESSAGE_SIZE 200
typedef struct {
    veer_status status;
    char message[VEER_DIAG_MESSAGE_SIZE]; /* human-readable, NUL-terminated */
    int leg;            /* route leg index, or -1 */
    int waypoint;       /* route waypoint index, or -1 */
    int grid_index;     /* grid point index in the plan, or -1 */
    double s;           /* path position (m on travel legs, rad on spin and pivot legs), or -1 */
    veer_limit_id limit;/* the limit involved, kind NONE if none */
    double value;       /* the figure the message is about (ERR_LATE: seconds late), else 0 */
} veer_diag;

/* Allocator hook. alloc(size, ctx) returns memory aligned for any type or
 * NULL; release(ptr, size, ctx) gets the size that was asked for. Passing
 * NULL for both restores malloc/free. The hook is the library's only global
 * state; set it before planning, not while another thread plans.
 * The cart-side code (decoder, link receiver, player) never allocates. */
typedef void *(*veer_alloc_fn)(size_t size, void *ctx);
typedef void (*veer_free_fn)(void *ptr, size_t size, void *ctx);
VEER_API veer_status veer_set_allocator(veer_alloc_fn alloc, veer_free_fn release, void *ctx);

#ifdef __cplusplus
}
#endif
#endif
