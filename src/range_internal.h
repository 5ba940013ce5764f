/* veer internals: the range-check boxes (range_geom.c polygon maths,
 * range_check.c sweeps and braking envelope, range_zones.c speed caps,
 * range_multi.c separation). Not installed. SPDX-License-Identifier: MIT */
#ifndef VEER_RANGE_INTERNAL_H
#define VEER_RANGE_INTERNAL_H

#include "plan_internal.h"
#include "veer/range.h"

/* Sweep resolution, m: between evaluated poses a clearance cannot fall
 * more than this below the worst one found (see range.h). */
#define VEER_RANGE_TOL 0.5e-3

/* ---- range_geom.c ------------------------------------------------------- */

/* Axis-aligned bounding box: xmin, ymin, xmax, ymax. */
void veer__outline_box(const veer_outline *o, double box[4]);
/* Distance between two boxes (0 when they overlap): a lower bound on the
 * distance between anything inside them. */
double veer__box_distance(const double a[4], const double b[4]);
/* 1 inside or on the boundary. */
int veer__outline_inside(const veer_outline *o, double x, double y);
double veer__outline_boundary_distance(const veer_outline *o, double x, double y);
/* Distance between the areas, 0 when they touch or overlap. */
double veer__outline_gap(const veer_outline *a, const veer_outline *b);
/* Signed clearance of shape against area (range.h), outlines only. */
double veer__outline_clearance(const veer_outline *shape, const veer_outline *area, int keep_in);
/* Checks an outline; name ("keep_out[2]") goes into the message. */
veer_status veer__outline_validate(const veer_outline *o, const char *name, veer_diag *diag);
veer_status veer__footprint_validate(const veer_footprint *fp, veer_diag *diag);
veer_status veer__range_validate(const veer_range *range, veer_diag *diag);
/* The footprint's outline in the world frame at pose. */
void veer__footprint_world(const veer_footprint *fp, const double pose[3], veer_outline *out);
/* Largest distance of a footprint vertex from the body origin, m. */
double veer__footprint_radius(const veer_footprint *fp);

/* ---- range_check.c ------------------------------------------------------- */

/* Per grid point k of the plan, a bound on how fast any point of a
 * footprint of radius R moves per unit of s on the interval k..k+1 (0 for
 * the last point of each segment): 1.02 * the largest |dxy/ds| + R |dyaw/ds|
 * of 9 samples, plus 1e-9. *out gets n doubles from veer__alloc
 * (veer__free(*out, n * sizeof(double))); NULL when out of memory. */
double *veer__range_speed_bounds(const veer_plan *plan, double radius);
/* Plan time at path position s in segment seg (the first instant the cart
 * is there on the segment's motion; its start time for s at the start). */
double veer__range_time_at(const veer_plan *plan, int seg, double s);

#endif
