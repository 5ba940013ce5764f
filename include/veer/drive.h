/* veer: drive descriptions and their kinematics.
 *
 * Frames (ISO 8855): body x forward, y left, z up; yaw counter-clockwise.
 * A body twist is (vx, vy) in m/s in the body frame and wz in rad/s.
 * Wheel rates are rad/s of the wheel (tread speed = rate * wheel_radius).
 * SPDX-License-Identifier: MIT */
#ifndef VEER_DRIVE_H
#define VEER_DRIVE_H

#include "veer/status.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Fixed capacity: steered carts have 2..8 modules, omni carts 3..8 wheels. */
#define VEER_MAX_MODULES 8

typedef enum {
    VEER_DRIVE_UNSPECIFIED = 0,
    VEER_DRIVE_STEERED = 1,     /* independently steered modules, wheel reversal allowed */
    VEER_DRIVE_MECANUM = 2,     /* four mecanum wheels */
    VEER_DRIVE_OMNI = 3,        /* three or more omni wheels */
    VEER_DRIVE_DIFFERENTIAL = 4 /* two sides; skid steer through skid_factor */
} veer_drive_kind;

typedef struct {
    double x, y;        /* mount position in the body frame, m (steered, omni) */
    double drive_angle; /* omni: direction the wheel pushes, rad from body x */
    int out;            /* 1: module out of service (lifted or failed): it neither drives nor limits */
} veer_module_def;

/* Fill with veer_default_drive_def(kind) and change what differs.
 * Module order, by kind:
 *   steered, omni: as given in modules[];
 *   mecanum: 0 front-left, 1 front-right, 2 rear-right, 3 rear-left
 *            (the order of Lynch & Park, Modern Robotics, 13.2);
 *   differential: 0 left side, 1 right side. */
typedef struct {
    veer_drive_kind kind;
    int module_count;         /* steered 2..8, omni 3..8; mecanum 4 and differential 2 are set by the defaults */
    veer_module_def modules[VEER_MAX_MODULES];
    double wheel_radius;      /* m, > 0 */
    double half_wheelbase;    /* mecanum: l, m, centre to front axle */
    double half_track;        /* mecanum: w, m, centre to a wheel's contact line */
    double roller_angle;      /* mecanum: rad between roller axis and wheel plane, default pi/4; (0, pi/2) */
    double track_width;       /* differential: m between the two sides' contact lines */
    double skid_factor;       /* differential: >= 1; effective track = skid_factor * track_width (ICR model) */
} veer_drive_def;

/* A sensible starting point for each kind: wheel radius 0.1 m; steered: four
 * modules at (+-0.3, +-0.3) m; mecanum: l = 0.3, w = 0.25, 45-degree rollers;
 * omni: three wheels on a 0.3 m circle, pushing tangentially; differential:
 * track 0.5 m, skid factor 1. Every kind gets all these scalars, so changing
 * kind afterwards stays valid. An unknown kind gives a zeroed struct with that
 * kind (which veer_drive_check refuses). */
VEER_API veer_drive_def veer_default_drive_def(veer_drive_kind kind);

/* Checks a drive description; VEER_OK or a named status with diag filled
 * (diag may be NULL): ERR_NULL; ERR_VALUE for an unknown kind, a NaN or
 * infinite value, a non-positive length, a roller angle outside 1..89 degrees,
 * a skid factor below 1, or a changed mecanum/differential module_count;
 * ERR_CAPACITY for a steered or omni module count out of range;
 * ERR_GEOMETRY for steered modules closer than 1e-6 m to each other, or omni
 * wheels whose rates cannot tell all body twists apart (all parallel, all
 * push lines through one point, all at one point, or nearly so). */
VEER_API VEER_NODISCARD veer_status veer_drive_check(const veer_drive_def *drive, veer_diag *diag);

/* Number of modules (wheels or sides) the drive has; 0 if drive is NULL, the
 * kind is unknown or a steered/omni module_count is out of range. */
VEER_API int veer_drive_module_count(const veer_drive_def *drive);

/* Inverse kinematics: body twist -> per-module steer angle (rad, relative to
 * body x; the mecanum, omni and differential kinds report their fixed wheel
 * direction) and wheel rate (rad/s).
 * prev_steer (may be NULL) holds each module's current steer angle; a
 * steered module then takes the representative of its direction (mod pi,
 * reversing the wheel) nearest to it, and keeps it when its speed is below
 * 1e-9 m/s. Without prev_steer the wheel turns forward, steer is in
 * (-pi, pi] and a standing module reports 0. prev_steer is ignored by the
 * fixed-wheel kinds; steer may be the same array as prev_steer.
 * A differential drive cannot move sideways: its inverse ignores vy (the
 * planner refuses routes that need it).
 * steer and wheel_rate need room for veer_drive_module_count(). Checks the
 * drive and the inputs (ERR_NULL, ERR_VALUE for NaN or an overflowing
 * result) and writes nothing on failure. */
VEER_API VEER_NODISCARD veer_status veer_drive_inverse(const veer_drive_def *drive, const double twist_body[3],
                                                       const double *prev_steer, double *steer, double *wheel_rate);

/* Forward kinematics: measured steer angles (ignored for fixed-wheel kinds,
 * may then be NULL) and wheel rates -> body twist (vx, vy, wz). Least squares
 * where the drive is over-actuated; a differential drive reports vy = 0.
 * Checks like veer_drive_inverse and writes nothing on failure. */
VEER_API VEER_NODISCARD veer_status veer_drive_forward(const veer_drive_def *drive, const double *steer,
                                                       const double *wheel_rate, double twist_body[3]);

/* Degraded drives: how many working wheels drive the body motion twist_body
 * (rates above 1e-3 of the largest). With a module out, a motion that fewer
 * than 2 working wheels drive has lost its traction (with 45-degree mecanum
 * rollers and one wheel off the floor, one diagonal keeps a single driven
 * wheel); 0 means no working wheel can push some component of it at all.
 * Steered drives report their working modules. The planner refuses a path
 * that needs a lost motion, naming the leg and position. */
VEER_API VEER_NODISCARD veer_status veer_drive_driven_wheels(const veer_drive_def *drive, const double twist_body[3],
                                                             int *count);

#ifdef __cplusplus
}
#endif
#endif
