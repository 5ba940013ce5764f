/* veer: routes. A route is a start pose and a list of legs; travel legs take
 * their waypoints, in order, from one shared waypoint list.
 *
 * Every leg ends at rest. A travel leg ends at its last waypoint; stop
 * waypoints inside it are also rests, pass-through waypoints are corners that
 * the path rounds within the leg's corner tolerance.
 * World frame: x, y in metres on the range, yaw in radians counter-clockwise.
 *
 * How a route becomes a path (the pose curve the plan follows):
 * - The path starts at the start pose; each leg starts where the one before
 *   ended, with the yaw it ended with. The path position s runs on across all
 *   legs: metres along the curve on travel legs, radians of rotation on spin
 *   and pivot legs.
 * - Travel legs run in straight lines between waypoints (the first from the
 *   leg's start). A pass-through corner is rounded by a smooth blend that
 *   passes within corner_tolerance of the waypoint; the blend uses at most
 *   half of a line between two corners and at most 99% of a line next to a
 *   rest, so on short lines it passes closer than the tolerance. A corner
 *   turning more than 175 degrees cannot be rounded: make it a stop.
 * - Heading intent: HOLD keeps the leg's start yaw; TANGENT faces the direction
 *   of travel (plus pi with reversed); TOWARD faces (toward_x, toward_y), and
 *   the path must not pass within 1 mm of it; BLEND eases (quintic
 *   smootherstep, zero rate and curvature at the knots) from the start yaw to
 *   the yaw of each waypoint with has_yaw in turn, reached at the middle of a
 *   rounded corner or at a stop, each the shorter way round from the one
 *   before, and keeps the last one. Yaw never wraps along the path.
 * - When TANGENT or TOWARD asks for a yaw other than the one the leg starts
 *   with, up to 5 degrees are eased in over the first metre (or the first
 *   stretch to a rest, if shorter); more is refused: add a spin leg first.
 *   At a stop inside a TANGENT leg where the direction of travel turns by
 *   more than 5 degrees, the cart spins in place at the stop (an extra
 *   rest-to-rest stretch of the same leg, after the stop's dwell).
 * - A spin leg turns in place to yaw; a pivot leg rotates the body rigidly
 *   about (pivot_x, pivot_y) by angle (a pivot about the body origin is a
 *   spin); with hold_yaw it circles the point instead, keeping its yaw (an
 *   orbit, as a target strafing round a post). Neither may be of zero size.
 * - Checked when planning: every number finite, positions and angles within
 *   +-1e6, dwells >= 0, corner_tolerance > 0, kinds, headings and spin
 *   directions known, flags 0 or 1, each travel leg with >= 1 waypoint, spin
 *   and pivot legs with none, every waypoint used by exactly one leg, and no
 *   waypoint closer than 1e-6 m to the point before it.
 * SPDX-License-Identifier: MIT */
#ifndef VEER_ROUTE_H
#define VEER_ROUTE_H

#include "veer/status.h"
#include "veer/drive.h"

#ifdef __cplusplus
extern "C" {
#endif

#define VEER_MAX_LEGS 32
#define VEER_MAX_WAYPOINTS 64

typedef struct {
    double x, y;  /* world position, m */
    double yaw;   /* world heading, rad; used by heading BLEND when has_yaw */
    int has_yaw;  /* 0 or 1 */
    int stop;     /* 1: come to rest here; 0: pass through (rounded corner). The leg's last waypoint is always a stop. */
    double dwell; /* s to stand still at a stop, >= 0 */
    int timed;    /* 1: a stop that must be reached at `arrival` */
    double arrival; /* s from plan start when the cart must come to rest here (timed stops) */
} veer_waypoint;

typedef enum {
    VEER_LEG_UNSPECIFIED = 0,
    VEER_LEG_TRAVEL = 1, /* through waypoints */
    VEER_LEG_SPIN = 2,   /* turn in place to a yaw */
    VEER_LEG_PIVOT = 3   /* rotate the body about a world point by an angle */
} veer_leg_kind;

typedef enum {
    VEER_HEADING_UNSPECIFIED = 0,
    VEER_HEADING_HOLD = 1,    /* keep the yaw the leg starts with */
    VEER_HEADING_TANGENT = 2, /* face the direction of travel (or away, with reversed) */
    VEER_HEADING_TOWARD = 3,  /* face a world point (toward_x, toward_y) */
    VEER_HEADING_BLEND = 4    /* interpolate smoothly between the yaws of waypoints with has_yaw */
} veer_heading_kind;

typedef struct {
    veer_leg_kind kind;
    /* travel */
    int waypoint_count;          /* waypoints this leg takes from the route's list, >= 1 */
    veer_heading_kind heading;   /* default HOLD */
    int reversed;                /* TANGENT: 1 faces away from the direction of travel */
    double toward_x, toward_y;   /* TOWARD: world point to face, m */
    double corner_tolerance;     /* m: how far a rounded corner may pass from its waypoint, default 0.25 */
    /* spin */
    double yaw;                  /* target world yaw, rad */
    int direction;               /* spin: 0 the shorter way (a half turn goes counter-clockwise), +1 counter-clockwise, -1 clockwise */
    /* pivot */
    double pivot_x, pivot_y;     /* world point the body rotates about, m */
    double angle;                /* signed rotation, rad, counter-clockwise positive */
    int hold_yaw;                /* pivot: 1 circles the point keeping the yaw (an orbit); 0 turns with it */
    /* all kinds */
    double dwell;                /* s to stand still at the end of the leg, >= 0 */
} veer_leg;

typedef struct {
    double start_x, start_y, start_yaw;  /* pose the cart starts from at rest */
    int has_start_steer;                 /* 1: start_steer holds the modules' angles at the start */
    double start_steer[VEER_MAX_MODULES];/* rad relative to body x; otherwise all modules start at 0 */
    /* Re-planning on the move: the cart's twist (vx, vy in m/s, wz in rad/s,
     * body frame) at the start. The first leg must start in the direction of
     * that motion (within 1 percent of the speed, 0.5 degree of direction),
     * and the steered modules must already point along it; otherwise the plan
     * is refused (no silent transition). has_start_twist 0: start at rest. */
    int has_start_twist;
    double start_twist[3];
    int leg_count;
    veer_leg legs[VEER_MAX_LEGS];
    int waypoint_count;
    veer_waypoint waypoints[VEER_MAX_WAYPOINTS];
} veer_route;

/* An empty route starting at rest at (x, y, yaw). */
VEER_API veer_route veer_default_route(double x, double y, double yaw);
/* A leg of the given kind with defaults (HOLD heading, 0.25 m corner
 * tolerance, no dwell, no waypoints). */
VEER_API veer_leg veer_default_leg(veer_leg_kind kind);
/* A pass-through waypoint without a yaw. */
VEER_API veer_waypoint veer_default_waypoint(double x, double y);

/* Appends a leg (its waypoint_count is reset to 0; add its waypoints next).
 * VEER_ERR_CAPACITY when the route is full; the route is then unchanged. */
VEER_API VEER_NODISCARD veer_status veer_route_add_leg(veer_route *route, const veer_leg *leg);
/* Appends a waypoint to the shared list and counts it to the last leg, which
 * must be a travel leg (VEER_ERR_STATE otherwise, or with no leg yet).
 * VEER_ERR_CAPACITY when the list is full. The route is unchanged on failure. */
VEER_API VEER_NODISCARD veer_status veer_route_add_waypoint(veer_route *route, const veer_waypoint *wp);

#ifdef __cplusplus
}
#endif
#endif
