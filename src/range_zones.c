/* Speed zones as position-dependent body-speed caps inside the planner
 * (the veer_speed_cap hook of plan_internal.h). Reduced-speed zones are
 * trade practice for driverless vehicles; compare ISO 3691-4.
 *
 * The planner evaluates a cap only at grid points and applies at each the
 * smallest cap of the point and its two neighbours. A zone here applies at a
 * pose when the footprint, grown by its margin and by D, meets the zone,
 * where D bounds how far any footprint point moves over one grid interval
 * (the per-interval speed bound of range_check.c times the interval's
 * length, plus 1 mm). If the footprint overlaps the zone anywhere on an
 * interval, it is then within D of it at the interval's ends, both ends are
 * capped, and since sdot^2 is linear in s across the interval the speed
 * there is at most cap * |dq/ds|(s) / min(|dq/ds| at the ends); dividing
 * every cap by the largest such ratio (rho) makes it hold everywhere.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "range_internal.h"

typedef struct {
    const veer_range *range;
    const veer_footprint *fp;
    double grow; /* m: margin + D + 1 mm */
    double rho;  /* >= 1 */
    double zbox[VEER_MAX_SPEED_ZONES][4];
} zone_ctx;

static double zone_cap(const void *user, const double pose[3], int *zone) {
    const zone_ctx *z = user;
    veer_outline F;
    double fbox[4];
    veer__footprint_world(z->fp, pose, &F);
    veer__outline_box(&F, fbox);
    double cap = VEER_UNLIMITED;
    *zone = -1;
    for (int i = 0; i < z->range->zone_count; i++) {
        double c = z->range->zones[i].speed / z->rho;
        if (c >= cap) continue;
        if (veer__box_distance(fbox, z->zbox[i]) > z->grow) continue;
        if (veer__outline_gap(&F, &z->range->zones[i].area) <= z->grow) {
            cap = c;
            *zone = i;
        }
    }
    return cap;
}

/* D and rho of a plan's grid for a footprint of radius R. */
static veer_status grid_figures(const veer_plan *plan, double R, double *D, double *rho) {
    double *L = veer__range_speed_bounds(plan, R);
    if (!L) return VEER_ERR_NO_MEMORY;
    double d = 0.0, r = 1.0;
    for (int j = 0; j < plan->segment_count; j++) {
        const veer_plan_segment *sg = &plan->segs[j];
        for (int k = sg->k0; k < sg->k1; k++) {
            d = fmax(d, L[k] * (plan->s[k + 1] - plan->s[k]));
            double q[3], dq[3], ddq[3], ends = VEER_UNLIMITED, top = 0.0;
            for (int i = 0; i <= 8; i++) {
                veer__path_eval(&plan->path, j, plan->s[k] + (plan->s[k + 1] - plan->s[k]) * i / 8.0, q, dq, ddq);
                double sp = hypot(dq[0], dq[1]);
                top = fmax(top, sp);
                if (i == 0 || i == 8) ends = fmin(ends, sp);
            }
            /* 0.01% for the peak between samples: the pieces are smooth
             * polynomials and an interval is short (from 9 samples the
             * missed part of a peak is of order (h/16)^2 |dq/ds|'' / 2). */
            if (ends > 0.0) r = fmax(r, top * (1.0 + 1e-4) / ends);
        }
    }
    veer__free(L, (size_t)plan->n * sizeof(double));
    *D = d;
    *rho = r;
    return VEER_OK;
}

veer_status veer_plan_create_in_range(const veer_drive_def *drive, const veer_limits *limits, const veer_route *route,
                                      const veer_plan_options *options, const veer_range *range,
                                      const veer_footprint *footprint, veer_plan **out, veer_diag *diag) {
    veer__diag_ok(diag);
    veer_limit_id none = veer__limit(VEER_LIMIT_NONE, -1);
    if (!out) return veer__fail(diag, VEER_ERR_NULL, -1, -1, -1, -1.0, none, "out is NULL");
    *out = NULL;
    veer_status st;
    if ((st = veer__range_validate(range, diag)) || (st = veer__footprint_validate(footprint, diag))) return st;
    if (range->zone_count == 0) return veer_plan_create(drive, limits, route, options, out, diag);

    /* First pass without zones: the grid (which depends only on the path
     * and the options) and its figures. */
    veer_plan *plan = NULL;
    if ((st = veer_plan_create(drive, limits, route, options, &plan, diag))) return st;
    double R = veer__footprint_radius(footprint), D, rho;
    st = grid_figures(plan, R, &D, &rho);
    veer_plan_destroy(plan);
    if (st) return veer__fail(diag, st, -1, -1, -1, -1.0, none, "out of memory");

    zone_ctx z;
    memset(&z, 0, sizeof z);
    z.range = range;
    z.fp = footprint;
    for (int i = 0; i < range->zone_count; i++) veer__outline_box(&range->zones[i].area, z.zbox[i]);
    veer_speed_cap cap = {zone_cap, &z};
    for (int pass = 0; pass < 4; pass++) {
        z.grow = footprint->margin + D + 1e-3;
        z.rho = rho;
        plan = NULL;
        if ((st = veer__plan_create_with(drive, limits, route, options, &cap, &plan, diag))) return st;
        double D2, rho2;
        if ((st = grid_figures(plan, R, &D2, &rho2))) {
            veer_plan_destroy(plan);
            return veer__fail(diag, st, -1, -1, -1, -1.0, none, "out of memory");
        }
        if (D2 <= D && rho2 <= rho) {
            /* The plan keeps a copy of the cap for later use only through
             * plan->cap; it must not point at this stack frame. */
            plan->cap.cap = NULL;
            plan->cap.user = NULL;
            *out = plan;
            veer__diag_ok(diag);
            return VEER_OK;
        }
        /* the grid came out coarser than the first pass's: again with its figures */
        D = fmax(D, D2);
        rho = fmax(rho, rho2);
        veer_plan_destroy(plan);
    }
    return veer__fail(diag, VEER_ERR_STATE, -1, -1, -1, -1.0, none,
                      "speed zones: the planner's grid kept changing between passes");
}
