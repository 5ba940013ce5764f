/* Range checks along one plan: the footprint swept along the whole path
 * against the keep-in and keep-out areas, and the braking envelope (the
 * controlled stops of veer_plan_stop_info, the braking the player uses).
 *
 * The sweep is adaptive with a certified step. The signed clearance of a
 * rigid footprint is 1-Lipschitz in the largest displacement of its points,
 * and a point at body offset r moves by at most |dxy/ds| + |r| |dyaw/ds| per
 * unit s; with L bounding that over a grid interval, a step of
 * (g - g_worst + tol) / L from a pose of clearance g cannot pass over a
 * clearance lower than g_worst - tol (the Lipschitz bound behind Shubert's
 * sequential global search, SIAM J. Numer. Anal. 9, 1972, cited from
 * memory; used here only as a step rule).
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "range_internal.h"

#define BISECT_S 1e-5  /* path units: crossings located to this */
#define BISECT_T 1e-4  /* s: last safe stop located to this */

double *veer__range_speed_bounds(const veer_plan *plan, double radius) {
    double *L = veer__alloc((size_t)plan->n * sizeof(double));
    if (!L) return NULL;
    for (int j = 0; j < plan->segment_count; j++) {
        const veer_plan_segment *sg = &plan->segs[j];
        for (int k = sg->k0; k < sg->k1; k++) {
            double m = 0.0;
            for (int i = 0; i <= 8; i++) {
                double s = plan->s[k] + (plan->s[k + 1] - plan->s[k]) * i / 8.0;
                double q[3], dq[3], ddq[3];
                veer__path_eval(&plan->path, j, s, q, dq, ddq);
                m = fmax(m, hypot(dq[0], dq[1]) + radius * fabs(dq[2]));
            }
            L[k] = 1.02 * m + 1e-9;
        }
        L[sg->k1] = 0.0;
    }
    return L;
}

/* Grid interval k0 <= k < k1 of segment seg holding s. */
static int interval_at(const veer_plan *plan, int seg, double s) {
    int lo = plan->segs[seg].k0, hi = plan->segs[seg].k1;
    while (hi - lo > 1) {
        int mid = (lo + hi) / 2;
        if (plan->s[mid] <= s) lo = mid;
        else hi = mid;
    }
    return lo;
}

double veer__range_time_at(const veer_plan *plan, int seg, double s) {
    const veer_plan_segment *sg = &plan->segs[seg];
    if (s <= plan->s[sg->k0]) /* standing there since the previous segment's arrival */
        return seg == 0 ? 0.0 : plan->segs[seg - 1].t_move + plan->segs[seg - 1].move_time;
    if (s >= plan->s[sg->k1]) return plan->t[sg->k1];
    int k = interval_at(plan, seg, s);
    double ds = plan->s[k + 1] - plan->s[k];
    double x = plan->x[k] + (plan->x[k + 1] - plan->x[k]) * (s - plan->s[k]) / ds;
    double den = sqrt(plan->x[k]) + sqrt(fmax(x, 0.0));
    return plan->t[k] + (den > 0.0 ? 2.0 * (s - plan->s[k]) / den : 0.0);
}

/* ---- the sweep ------------------------------------------------------------ */

typedef struct {
    const veer_plan *plan;
    const veer_range *range;
    const veer_footprint *fp;
    double *L;
    double obox[VEER_MAX_KEEP_OUT][4];
} sweep;

typedef struct {
    int seg;
    double s, g, pose[3];
    veer_area_id area;
    double track; /* clearance of the tracked area */
} pose_eval;

/* Clearance of the footprint at (seg, s): the smallest over the areas.
 * Keep-out areas whose box is farther than the smallest so far are
 * skipped, except the tracked one. */
static void evaluate(const sweep *w, int seg, double s, veer_area_id track, pose_eval *out) {
    double dq[3], ddq[3];
    veer_outline F;
    double fbox[4];
    out->seg = seg;
    out->s = s;
    veer__path_eval(&w->plan->path, seg, s, out->pose, dq, ddq);
    veer__footprint_world(w->fp, out->pose, &F);
    veer__outline_box(&F, fbox);
    double m = w->fp->margin;
    double g = veer__outline_clearance(&F, &w->range->keep_in, 1) - m;
    veer_area_id area = {VEER_AREA_KEEP_IN, -1};
    out->track = track.kind == VEER_AREA_KEEP_IN ? g : VEER_UNLIMITED;
    for (int i = 0; i < w->range->keep_out_count; i++) {
        int tracked = track.kind == VEER_AREA_KEEP_OUT && track.index == i;
        if (!tracked && veer__box_distance(fbox, w->obox[i]) - m >= g) continue;
        double c = veer__outline_clearance(&F, &w->range->keep_out[i], 0) - m;
        if (tracked) out->track = c;
        if (c < g) {
            g = c;
            area.kind = VEER_AREA_KEEP_OUT;
            area.index = i;
        }
    }
    out->g = g;
    out->area = area;
}

static void set_event(const sweep *w, const pose_eval *e, double margin, veer_range_event *ev) {
    ev->t = veer__range_time_at(w->plan, e->seg, e->s);
    ev->s = e->s;
    memcpy(ev->pose, e->pose, sizeof ev->pose);
    ev->area = e->area;
    ev->margin = margin;
}

typedef struct {
    veer_range_report report;
    int worst_seg, violation_seg;
} sweep_result;

static void run_sweep(const sweep *w, sweep_result *res) {
    const veer_plan *plan = w->plan;
    veer_range_report r;
    memset(&r, 0, sizeof r);
    r.worst.margin = VEER_UNLIMITED;
    veer_area_id none = {VEER_AREA_NONE, -1}, track = none;
    int in_run = 0;
    double run_min = 0.0;
    pose_eval e, prev;
    memset(&e, 0, sizeof e);
    memset(&prev, 0, sizeof prev);
    int have_prev = 0;
    res->worst_seg = res->violation_seg = 0;
    /* An incumbent first: the clearance at every grid point. Steps are then
     * fine only where the clearance comes near the lowest value. */
    for (int j = 0; j < plan->segment_count; j++)
        for (int k = plan->segs[j].k0; k <= plan->segs[j].k1; k++) {
            evaluate(w, j, plan->s[k], none, &e);
            r.poses++;
            if (e.g < r.worst.margin) {
                set_event(w, &e, e.g, &r.worst);
                res->worst_seg = j;
            }
        }
    for (int j = 0; j < plan->segment_count; j++) {
        const veer_plan_segment *sg = &plan->segs[j];
        int k = sg->k0;
        double s = plan->s[sg->k0], s_end = plan->s[sg->k1];
        have_prev = 0;
        for (;;) {
            evaluate(w, j, s, track, &e);
            r.poses++;
            if (e.g < r.worst.margin) {
                set_event(w, &e, e.g, &r.worst);
                res->worst_seg = j;
            }
            if (!r.violated && e.g < 0.0) {
                /* The first violation: bisect back to where it begins. */
                pose_eval hi = e;
                if (have_prev) {
                    double lo_s = prev.s, hi_s = e.s;
                    for (int it = 0; it < 60 && hi_s - lo_s > BISECT_S; it++) {
                        pose_eval mid;
                        evaluate(w, j, 0.5 * (lo_s + hi_s), none, &mid);
                        r.poses++;
                        if (mid.g < 0.0) hi_s = mid.s, hi = mid;
                        else lo_s = mid.s;
                    }
                }
                r.violated = 1;
                res->violation_seg = j;
                set_event(w, &hi, hi.g, &r.first_violation);
                track = hi.area;
                in_run = 1;
                evaluate(w, j, s, track, &e); /* the tracked area's clearance here */
                run_min = fmin(hi.g, e.track);
            } else if (in_run) {
                if (e.track < 0.0) {
                    run_min = fmin(run_min, e.track);
                } else {
                    /* back to clear: bisect to where (within this segment) */
                    pose_eval lo = e;
                    if (have_prev && prev.seg == j) {
                        double lo_s = prev.s, hi_s = e.s;
                        for (int it = 0; it < 60 && hi_s - lo_s > BISECT_S; it++) {
                            pose_eval mid;
                            evaluate(w, j, 0.5 * (lo_s + hi_s), track, &mid);
                            r.poses++;
                            if (mid.track < 0.0) lo_s = mid.s, run_min = fmin(run_min, mid.track);
                            else hi_s = mid.s, lo = mid;
                        }
                    }
                    lo.area = track;
                    set_event(w, &lo, 0.0, &r.first_violation_end);
                    r.first_violation.margin = run_min;
                    in_run = 0;
                    track = none;
                }
            }
            prev = e;
            have_prev = 1;
            if (s >= s_end) break;
            while (k + 1 < sg->k1 && s >= plan->s[k + 1]) k++;
            double Lk = fmax(w->L[k], 1e-12);
            /* Until a violation is found the floor stays >= 0, so none
             * deeper than the tolerance can be passed over. */
            double floor = r.violated ? r.worst.margin : fmax(r.worst.margin, 0.0);
            double step = (e.g - floor + VEER_RANGE_TOL) / Lk;
            if (in_run) step = fmin(step, (e.track - run_min + VEER_RANGE_TOL) / Lk);
            double next = s + step;
            if (next >= plan->s[k + 1]) next = plan->s[k + 1]; /* one interval's bound per step */
            if (next > s_end || k + 1 >= sg->k1) next = fmin(next, s_end);
            s = next;
        }
    }
    if (in_run) { /* still violating at the end of the plan */
        e.area = track;
        set_event(w, &e, e.track, &r.first_violation_end);
        r.first_violation.margin = run_min;
    }
    r.clear = r.worst.margin >= 0.0;
    res->report = r;
}

/* Validates the inputs and prepares a sweep; on failure nothing is allocated. */
static veer_status sweep_begin(sweep *w, const veer_plan *plan, const veer_range *range,
                               const veer_footprint *footprint, const void *report, veer_diag *diag) {
    veer_limit_id none = veer__limit(VEER_LIMIT_NONE, -1);
    if (!plan || !report)
        return veer__fail(diag, VEER_ERR_NULL, -1, -1, -1, -1.0, none, "%s is NULL", !plan ? "plan" : "report");
    veer_status st;
    if ((st = veer__range_validate(range, diag)) || (st = veer__footprint_validate(footprint, diag))) return st;
    if (range->keep_in.count == 0)
        return veer__fail(diag, VEER_ERR_VALUE, -1, -1, -1, -1.0, none,
                          "the range has no keep-in area; a plan can only be checked inside one");
    w->plan = plan;
    w->range = range;
    w->fp = footprint;
    for (int i = 0; i < range->keep_out_count; i++) veer__outline_box(&range->keep_out[i], w->obox[i]);
    w->L = veer__range_speed_bounds(plan, veer__footprint_radius(footprint));
    if (!w->L) return veer__fail(diag, VEER_ERR_NO_MEMORY, -1, -1, -1, -1.0, none, "out of memory");
    return VEER_OK;
}

static void sweep_end(sweep *w) { veer__free(w->L, (size_t)w->plan->n * sizeof(double)); }

veer_status veer_plan_check_range(const veer_plan *plan, const veer_range *range, const veer_footprint *footprint,
                                  veer_range_report *report, veer_diag *diag) {
    veer__diag_ok(diag);
    sweep w;
    veer_status st = sweep_begin(&w, plan, range, footprint, report, diag);
    if (st) return st;
    sweep_result res;
    run_sweep(&w, &res);
    sweep_end(&w);
    *report = res.report;
    return VEER_OK;
}

/* ---- braking envelope ----------------------------------------------------- */

/* Where a stop begun at t ends (global s); the info in *info. */
static double stop_end(const veer_plan *plan, double t, veer_stop_info *info, int *count) {
    if (veer_plan_stop_info(plan, t, info) != VEER_OK) { /* cannot happen for a valid plan and finite t */
        memset(info, 0, sizeof *info);
        return -VEER_UNLIMITED;
    }
    (*count)++;
    return info->s_end;
}

veer_status veer_plan_check_braking(const veer_plan *plan, const veer_range *range, const veer_footprint *footprint,
                                    veer_braking_report *report, veer_diag *diag) {
    veer__diag_ok(diag);
    sweep w;
    veer_status st = sweep_begin(&w, plan, range, footprint, report, diag);
    if (st) return st;
    sweep_result res;
    run_sweep(&w, &res);
    sweep_end(&w);
    const veer_range_report *rr = &res.report;

    veer_braking_report b;
    memset(&b, 0, sizeof b);
    b.clear = rr->clear;
    b.worst_margin = rr->worst.margin;
    b.worst_s = rr->worst.s;
    b.worst_area = rr->worst.area;
    veer_stop_info info;

    /* The longest stop: from up to ~200 evenly spread grid points, then
     * every grid point around the longest, then 1 ms steps around that. */
    int stride = plan->n / 200 > 1 ? plan->n / 200 : 1;
    int best_k = -1;
    double best = -1.0;
    for (int k = 0; k < plan->n; k += stride) {
        double e = stop_end(plan, plan->t[k], &info, &b.stops);
        if (e - info.s_start > best) best = e - info.s_start, best_k = k, b.stop_distance_t = info.t;
    }
    int k_lo = best_k - stride > 0 ? best_k - stride : 0;
    int k_hi = best_k + stride < plan->n - 1 ? best_k + stride : plan->n - 1;
    for (int k = k_lo; k <= k_hi; k++) {
        double e = stop_end(plan, plan->t[k], &info, &b.stops);
        if (e - info.s_start > best) best = e - info.s_start, best_k = k, b.stop_distance_t = info.t;
    }
    {
        double t0 = plan->t[best_k > 0 ? best_k - 1 : 0], t1 = plan->t[best_k + 1 < plan->n ? best_k + 1 : best_k];
        if (t1 < t0) { /* grid points of different segments: stay within this one */
            t0 = plan->t[best_k];
            t1 = plan->t[best_k];
        }
        double tb = plan->t[best_k]; /* at most 0.5 s either side (a dwell may lie between grid points) */
        t0 = fmax(t0, tb - 0.5);
        t1 = fmin(t1, tb + 0.5);
        for (double t = t0; t <= t1; t += 1e-3) {
            double e = stop_end(plan, t, &info, &b.stops);
            if (e - info.s_start > best) best = e - info.s_start, b.stop_distance_t = info.t;
        }
    }
    stop_end(plan, b.stop_distance_t, &info, &b.stops);
    b.stop_distance = info.s_end - info.s_start;
    b.stop_duration = info.duration;
    b.stop_speed = info.sdot_start;

    /* The earliest instant whose stop reaches the worst pose: stop ends move
     * forward with their start, so bisect between the start of the worst
     * pose's segment and the moment the plan itself gets there. */
    {
        int j = res.worst_seg;
        double lo = plan->segs[j].t_move, hi = rr->worst.t;
        if (hi < lo) hi = lo;
        if (stop_end(plan, lo, &info, &b.stops) >= b.worst_s - 1e-12) {
            b.worst_t = lo;
        } else {
            while (hi - lo > BISECT_T) {
                double mid = 0.5 * (lo + hi);
                if (stop_end(plan, mid, &info, &b.stops) >= b.worst_s - 1e-12) hi = mid;
                else lo = mid;
            }
            b.worst_t = hi;
        }
    }

    /* The last instant a stop ends short of the first violation. */
    if (rr->violated) {
        double sv = rr->first_violation.s, lo = 0.0, hi = rr->first_violation.t;
        double e0 = stop_end(plan, 0.0, &info, &b.stops);
        if (!(e0 < sv)) {
            b.last_safe_stop_t = -1.0;
            b.last_safe_stop_s = -1.0;
        } else {
            double e_lo = e0;
            while (hi - lo > BISECT_T) {
                double mid = 0.5 * (lo + hi);
                double e = stop_end(plan, mid, &info, &b.stops);
                if (e < sv) lo = mid, e_lo = e;
                else hi = mid;
            }
            b.last_safe_stop_t = lo;
            b.last_safe_stop_s = e_lo;
        }
    } else {
        b.last_safe_stop_t = plan->duration;
        b.last_safe_stop_s = plan->path.length;
    }
    *report = b;
    return VEER_OK;
}
