/* veer: range safety checks. Keep-in and keep-out areas, speed zones, the
 * braking envelope and the separation of several carts.
 *
 * Areas are simple polygons (outlines) in the world frame, metres; a cart's
 * footprint is an outline in the body frame (x forward, y left) plus a
 * margin all round. Nothing here replaces the range's own safety rules, its
 * range safety officer or a hardware emergency stop (see the README).
 *
 * Clearance, the figure every check reports, is signed, in metres:
 * - footprint against a keep-out area: positive, the distance between the
 *   footprint and the area; negative, the depth to which the footprint
 *   reaches into the area (the largest distance from a point of the
 *   footprint inside the area to the area's boundary);
 * - footprint against the keep-in area: positive, the distance from the
 *   footprint to the area's boundary while wholly inside; negative, how far
 *   the footprint reaches outside (the largest distance from a point of the
 *   footprint to the area).
 * Both are exact for the outlines (no sampling of the polygons; where many
 * boundary features tie, as at the centre of a regular polygon, a depth is
 * exact to 1e-6 m). The margin
 * is subtracted from the outline's clearance: positive figures are then
 * exactly the clearance of the footprint grown by the margin, and a
 * violation's depth counts the margin in full. A clearance of 0 (touching)
 * is not a violation; below 0 is.
 * SPDX-License-Identifier: MIT */
#ifndef VEER_RANGE_H
#define VEER_RANGE_H

#include "veer/status.h"
#include "veer/plan.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Fixed capacities. */
#define VEER_MAX_OUTLINE_VERTICES 64
#define VEER_MAX_KEEP_OUT 32
#define VEER_MAX_SPEED_ZONES 16
#define VEER_MAX_CARTS 16

/* A simple polygon: count vertices in order around it (either direction),
 * the first not repeated at the end. Convex or not, but its edges may not
 * cross or touch except neighbours at their shared vertex. */
typedef struct {
    int count;                                   /* 3..VEER_MAX_OUTLINE_VERTICES */
    double points[VEER_MAX_OUTLINE_VERTICES][2]; /* x, y, m */
} veer_outline;

/* Largest coordinate magnitude accepted, m. */
#define VEER_OUTLINE_COORD_MAX 1e6
/* Consecutive vertices closer than this, m, are refused as coincident. */
#define VEER_OUTLINE_MIN_EDGE 1e-6

/* An empty outline (count 0). */
VEER_API veer_outline veer_default_outline(void);

/* Fills *out from count points xy[2i], xy[2i+1] and checks it (as
 * veer_outline_check). *out is unchanged on failure. */
VEER_API VEER_NODISCARD veer_status veer_outline_set(veer_outline *out, const double *xy, int count, veer_diag *diag);

/* Checks an outline: ERR_NULL; ERR_VALUE for fewer than 3 vertices or a
 * NaN, infinite or too large coordinate; ERR_CAPACITY for more than
 * VEER_MAX_OUTLINE_VERTICES; ERR_GEOMETRY for coincident consecutive
 * vertices, edges that cross or touch (self-intersection), an edge folding
 * back on its neighbour, or zero area. The message names the vertices. */
VEER_API VEER_NODISCARD veer_status veer_outline_check(const veer_outline *outline, veer_diag *diag);

/* *inside = 1 when (x, y) is inside the outline or on its boundary, else 0.
 * The outline must pass veer_outline_check (ERR_GEOMETRY etc. otherwise). */
VEER_API VEER_NODISCARD veer_status veer_outline_contains(const veer_outline *outline, double x, double y, int *inside);

/* Distance from (x, y) to the outline's boundary, m (0 on the boundary). */
VEER_API VEER_NODISCARD veer_status veer_outline_point_distance(const veer_outline *outline, double x, double y,
                                                                double *distance);

/* Distance between the two areas, m: 0 when they touch or overlap
 * (including one inside the other). */
VEER_API VEER_NODISCARD veer_status veer_outline_distance(const veer_outline *a, const veer_outline *b,
                                                          double *distance);

/* Signed clearance of shape against area, m, as defined at the top of this
 * header: keep_in 1, shape must stay inside area; keep_in 0, outside. */
VEER_API VEER_NODISCARD veer_status veer_outline_clearance(const veer_outline *shape, const veer_outline *area,
                                                           int keep_in, double *clearance);

/* A cart's footprint: its outline in the body frame (x forward, y left, m,
 * about the body origin the plan's pose refers to) and a margin. */
typedef struct {
    veer_outline shape;
    double margin; /* m, >= 0, added all round */
} veer_footprint;

/* A rectangle reaching front metres ahead of the body origin, rear behind,
 * left and right to the sides (each may be negative for an off-centre
 * rectangle, but front + rear and left + right must be > 0), with margin. */
VEER_API veer_footprint veer_footprint_rectangle(double front, double rear, double left, double right,
                                                 double margin);

/* Checks the outline (veer_outline_check) and the margin (finite, >= 0,
 * at most 100 m). */
VEER_API VEER_NODISCARD veer_status veer_footprint_check(const veer_footprint *footprint, veer_diag *diag);

/* The footprint's outline (without the margin) in the world frame at pose
 * (x, y m, yaw rad). */
VEER_API VEER_NODISCARD veer_status veer_footprint_place(const veer_footprint *footprint, const double pose[3],
                                                         veer_outline *out);

/* A speed zone: while the footprint (with its margin) overlaps the area,
 * the body speed (speed of the body origin, as limits.body_speed) may not
 * exceed speed. Compare the reduced-speed zones of ISO 3691-4. */
typedef struct {
    veer_outline area;
    double speed; /* m/s, > 0 */
} veer_speed_zone;

/* The range: one keep-in area (count 0: none), keep-out areas, speed zones. */
typedef struct {
    veer_outline keep_in;
    int keep_out_count;
    veer_outline keep_out[VEER_MAX_KEEP_OUT];
    int zone_count;
    veer_speed_zone zones[VEER_MAX_SPEED_ZONES];
} veer_range;

/* An empty range: no keep-in, no keep-out, no zone. */
VEER_API veer_range veer_default_range(void);
/* Appends a keep-out area or a speed zone (checked first). ERR_CAPACITY
 * when full; the range is unchanged on failure. */
VEER_API VEER_NODISCARD veer_status veer_range_add_keep_out(veer_range *range, const veer_outline *area,
                                                            veer_diag *diag);
VEER_API VEER_NODISCARD veer_status veer_range_add_speed_zone(veer_range *range, const veer_outline *area,
                                                              double speed, veer_diag *diag);
/* Checks every outline, the counts and the zone speeds; the message names
 * the area ("keep_out[3]: edges 1 and 4 cross"). */
VEER_API VEER_NODISCARD veer_status veer_range_check(const veer_range *range, veer_diag *diag);

/* Which area a figure is about. */
typedef enum {
    VEER_AREA_NONE = 0,
    VEER_AREA_KEEP_IN = 1,
    VEER_AREA_KEEP_OUT = 2,    /* index: keep_out[index] */
    VEER_AREA_SPEED_ZONE = 3,  /* index: zones[index] */
    VEER_AREA_CART = 4         /* index: the other cart */
} veer_area_kind;

typedef struct {
    int kind;  /* veer_area_kind */
    int index; /* -1 where none applies */
} veer_area_id;

/* Writes "keep_in", "keep_out[2]", "speed_zone[0]", "cart[1]" or "none" into
 * buf (NUL-terminated when size > 0); returns the length the name needs. */
VEER_API size_t veer_area_name(veer_area_id id, char *buf, size_t size);

/* ---- planning with speed zones ------------------------------------------ */

/* veer_plan_create with the range's speed zones as position-dependent
 * body-speed limits, so the plan obeys them by construction (the binding
 * limit is "speed_zone[i]" where one binds). A zone applies at a grid point
 * when the footprint there, grown by its margin and by the farthest any
 * point of the footprint moves over one grid interval (plus 1 mm), meets
 * the zone: with the planner's rule that a point takes the smallest cap of
 * itself and its neighbours, every stretch where the footprint overlaps the
 * zone lies under the cap. Each cap is further divided by the largest
 * ratio of path speed |dq/ds| within a grid interval to that at its ends
 * (1 on straight lines and pivots, slightly more on rounded corners), so the
 * cap holds between grid points too. The grid is learnt from a first
 * planning pass without zones; the plan is then made again with them (about
 * twice the time of veer_plan_create). Keep-in and keep-out areas are not
 * used here (see veer_plan_check_range). */
VEER_API VEER_NODISCARD veer_status veer_plan_create_in_range(const veer_drive_def *drive, const veer_limits *limits,
                                                              const veer_route *route,
                                                              const veer_plan_options *options,
                                                              const veer_range *range,
                                                              const veer_footprint *footprint, veer_plan **out,
                                                              veer_diag *diag);

/* ---- sweeping the footprint along a plan -------------------------------- */

typedef struct {
    double t;          /* s, plan time */
    double s;          /* path position (m on travel legs, rad on spin and pivot legs) */
    double pose[3];    /* x, y (m), yaw (rad) there */
    veer_area_id area; /* the area the figure is about */
    double margin;     /* m, the clearance there (see the top of this header) */
} veer_range_event;

typedef struct {
    int clear;                   /* 1: no violation (worst.margin >= 0) */
    veer_range_event worst;      /* the smallest clearance anywhere along the plan */
    int violated;                /* 1 when the footprint leaves the keep-in or enters a keep-out */
    /* The first violation: where the clearance first drops below 0 (t, s,
     * pose, area) and, as margin, the deepest that area's violation gets
     * (negative) before its clearance is back to >= 0 ... */
    veer_range_event first_violation;
    veer_range_event first_violation_end; /* ... which happens here (or at the plan's end), margin 0 */
    long poses;                  /* footprint poses evaluated */
} veer_range_report;

/* Sweeps the footprint along the whole plan against the range's keep-in
 * (which must exist) and keep-out areas and fills *report.
 *
 * How dense: the clearance changes by at most L per unit of s, where L is
 * the largest speed of a footprint point per unit sdot, |dxy/ds| +
 * R |dyaw/ds| (R the footprint's largest vertex radius), bounded per grid
 * interval from 9 samples with 2% added. The clearance at every grid point
 * gives a first worst value; then from a pose with clearance g the sweep
 * steps ds = (g - g_worst + 0.5 mm) / L (g_worst the lowest found so far,
 * taken as 0 while that is positive and no violation is found yet), so
 * between poses the clearance cannot fall below g_worst by more than
 * 0.5 mm (Lipschitz bound): worst.margin is exact to 0.5 mm, and a
 * violation deeper than 0.5 mm is never missed. Steps are fine only where
 * the clearance is near its lowest: a plan that runs alongside an area at
 * its closest for a distance D costs about D / 0.5 mm poses (some 0.3 s
 * for 100 m on a small machine). Crossings (first violation and its
 * end) are located by bisection to 1e-5 in s. Times come from the plan's
 * profile (sdot^2 linear in s on each grid interval). The body stands
 * during re-steer phases and dwells, so the path covers them. */
VEER_API VEER_NODISCARD veer_status veer_plan_check_range(const veer_plan *plan, const veer_range *range,
                                                          const veer_footprint *footprint, veer_range_report *report,
                                                          veer_diag *diag);

/* ---- braking envelope ----------------------------------------------------- */

typedef struct {
    int clear;                /* 1: every controlled stop ends with its swept footprint clear */
    double worst_margin;      /* m: smallest clearance of the footprint swept by any controlled stop */
    double worst_s;           /* path position of that pose */
    veer_area_id worst_area;
    double worst_t;           /* the earliest plan time from which a stop sweeps through that pose */
    double stop_distance;     /* the longest controlled stop along the path, in s units (m on travel legs) */
    double stop_distance_t;   /* plan time a stop begun there is that long */
    double stop_duration;     /* s that stop takes */
    double stop_speed;        /* sdot when that stop begins */
    /* With a violation: the latest plan time at which a controlled stop
     * still comes to rest before the first violation's path position, and
     * where that stop ends; -1 when none does (the violation is where the
     * cart starts). Without one: the plan's duration and end. */
    double last_safe_stop_t;
    double last_safe_stop_s;
    int stops;                /* controlled stops simulated */
} veer_braking_report;

/* The braking envelope: at every instant, the controlled stop along the
 * path (veer_plan_stop_info, the braking the player uses) must end with the
 * footprint it swept still inside the keep-in and outside every keep-out.
 * A stop follows the planned path and ends no later than the path's next
 * rest, so what it sweeps is part of the plan's own sweep
 * (veer_plan_check_range); the envelope's worst margin is therefore the
 * sweep's worst margin, and what this adds are the stops themselves: the
 * longest (stops begun at about 200 grid points spread over the plan, then
 * at every grid point around the longest so far, then in steps of at most
 * 1 ms around that one), the instant from which stopping no longer
 * avoids the worst pose, and the last instant a stop ends short of the
 * first violation (by bisection in time to 0.1 ms; the stop's end moves
 * forward with its start because the plan never brakes harder than the
 * stop does). */
VEER_API VEER_NODISCARD veer_status veer_plan_check_braking(const veer_plan *plan, const veer_range *range,
                                                            const veer_footprint *footprint,
                                                            veer_braking_report *report, veer_diag *diag);

/* ---- several carts ------------------------------------------------------- */

typedef struct {
    const veer_plan *plan;    /* borrowed for the call */
    double start_time;        /* s on the common clock when the plan starts */
    veer_footprint footprint;
} veer_cart;

typedef struct {
    /* Separation: the distance between two footprints less both margins
     * (0 distance when the outlines touch or overlap, so the separation
     * is then minus the two margins). */
    double min_separation;    /* m, smallest over all pairs and times */
    double min_t;             /* s on the common clock */
    int min_a, min_b;         /* the pair, a < b */
    int conflict;             /* 1 when some pair came closer than required */
    double conflict_t;        /* the first instant that happens */
    int conflict_a, conflict_b;
    double t_begin, t_end;    /* the span checked: earliest start to latest end */
    long poses;               /* pair poses evaluated */
} veer_separation_report;

/* Minimum separation between the carts' footprints over time and the first
 * instant two come closer than required (m, >= 0). Before its start_time a
 * cart stands at its plan's start pose, after its end at its end pose.
 * Sweeps each pair in time with the Lipschitz rule of veer_plan_check_range
 * (the separation changes by at most the two carts' largest footprint-point
 * speeds, bounded per grid interval; 0 while a cart stands), after a first
 * pass at every grid time of either cart for a first minimum: the minimum is
 * exact to 0.5 mm, a conflict deeper than 0.5 mm is never missed, and its
 * first instant is found by bisection to 1 microsecond.
 * count 2..VEER_MAX_CARTS. */
VEER_API VEER_NODISCARD veer_status veer_carts_check_separation(const veer_cart *carts, int count, double required,
                                                                veer_separation_report *report, veer_diag *diag);

#ifdef __cplusplus
}
#endif
#endif
