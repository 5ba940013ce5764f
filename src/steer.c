/* Steer angles of steered modules: continuous along the path (no spurious
 * half-turns; a standing module keeps its angle) and the re-steer phase at
 * each rest, where every module takes the shorter steer motion or the
 * reverse choice (wheel reversed) that its steer range allows.
 * SPDX-License-Identifier: MIT */
#include "plan_internal.h"

#include <float.h>

#define VEER_STILL 1e-9
/* Direction changes larger than this between two grid points are tracked
 * through sub-steps, so a fast sweep near an ICR keeps its branch. */
#define VEER_STEER_STEP (VEER_PI / 4.0)

double veer__steer_near(double dir, double ref) {
    double k = nearbyint((ref - dir) / VEER_PI);
    return dir + k * VEER_PI;
}

/* Direction of module i given the body twist per unit sdot; 0 when the
 * module stands (speed below VEER_STILL). */
static int dir_of(const veer_drive_def *d, int i, const double xi[3], double *dir) {
    double vx = xi[0] - xi[2] * d->modules[i].y, vy = xi[1] + xi[2] * d->modules[i].x;
    if (vx * vx + vy * vy <= VEER_STILL * VEER_STILL) return 0; /* |v| <= VEER_STILL, without hypot's cost */
    *dir = atan2(vy, vx);
    return 1;
}

static int module_dir(const veer_plan *plan, int seg, int i, double s, double *dir) {
    veer_point_kin pk;
    veer__point_kin(&plan->path, seg, s, &pk);
    return dir_of(&plan->drive, i, pk.xi, dir);
}

/* Follows the branch from s_a (angle *ref) to s_b, where the module's
 * direction is dir_b (have_b: it moves there); fast sweeps are tracked
 * through sub-steps evaluated on the path. */
static void track(const veer_plan *plan, int seg, int i, double sa, double sb, int have_b, double dir_b, double *ref,
                  int depth) {
    if (!have_b) return;
    double next = veer__steer_near(dir_b, *ref);
    if (fabs(next - *ref) > VEER_STEER_STEP && depth < 6 && sb - sa > 1e-12) {
        const int parts = 8;
        for (int p = 1; p <= parts; p++) {
            double s0 = sa + (sb - sa) * (p - 1) / parts, s1 = sa + (sb - sa) * p / parts, d1 = 0.0;
            int h = module_dir(plan, seg, i, s1, &d1);
            track(plan, seg, i, s0, s1, h, d1, ref, depth + 1);
        }
        return;
    }
    *ref = next;
}

/* An angle as the grid keeps it: the nearest float; when that crosses
 * steer_min or steer_max, the float nearest to a moved inside by 2^-23 |a|
 * (more than that rounding's error, 2^-24 |a|). So an angle within the
 * range stays within (a rest at steer_max = pi/2), one up to 1e-9 outside
 * (follow's tolerance) moves no further out, and a float within the range
 * comes back unchanged: a start angle kept so is the grid's angle exactly. */
VEER__NOINLINE static float keep(double a, const veer_module_limits *ml) {
    float f = (float)a;
    double e = (double)FLT_EPSILON * fabs(a);
    if ((double)f > ml->steer_max) f = (float)(a - e);
    if ((double)f < ml->steer_min) f = (float)(a + e);
    return f;
}

/* Steer angles of module i along segment j from start angle a0 (a kept
 * float); 0 if they leave i's steer range (then *where is the grid point). */
static int follow(veer_plan *plan, int j, int i, const double *xi, double a0, int *where) {
    const veer_plan_segment *sg = &plan->segs[j];
    const veer_module_limits *ml = &plan->limits.modules[i];
    int M = plan->module_count;
    double ref = a0;
    for (int k = sg->k0; k <= sg->k1; k++) {
        if (k > sg->k0) {
            double d = 0.0;
            int h = xi ? dir_of(&plan->drive, i, xi + 3 * (k - sg->k0), &d) : module_dir(plan, j, i, plan->s[k], &d);
            track(plan, j, i, plan->s[k - 1], plan->s[k], h, d, &ref, 0);
        }
        if (ref < ml->steer_min - 1e-9 || ref > ml->steer_max + 1e-9) {
            *where = k;
            return 0;
        }
        plan->steer[(size_t)k * (size_t)M + (size_t)i] = keep(ref, ml);
    }
    return 1;
}

veer_status veer__steer_segment(veer_plan *plan, int j, const double *from, const double *xi, veer_diag *diag) {
    veer_plan_segment *sg = &plan->segs[j];
    int M = plan->module_count;
    double t_max = 0.0;
    for (int i = 0; i < M; i++) {
        /* fixed wheels report the direction they push (drive.h) and have no grid array */
        if (j == 0) plan->start_steer[i] = plan->steered ? from[i] : veer__fixed_steer(&plan->drive, i);
        if (!plan->steered) continue;
        const veer_module_limits *ml = &plan->limits.modules[i];
        /* The direction the module must face when the motion starts: at the
         * first grid point where it moves (it may stand at the very start;
         * one out of service never moves). */
        double dir = 0.0;
        int moves = 0;
        for (int k = sg->k0; k <= sg->k1 && !moves && !plan->drive.modules[i].out; k++) {
            double s = plan->s[k];
            if (k == sg->k0) s += 1e-9 * (plan->s[sg->k1] - plan->s[sg->k0]);
            moves = module_dir(plan, j, i, s, &dir);
        }
        if (!moves) { /* standing or out of service: the angle stays, as the grid keeps it */
            float a = keep(from[i], ml);
            for (int k = sg->k0; k <= sg->k1; k++) plan->steer[(size_t)k * (size_t)M + (size_t)i] = a;
            continue;
        }
        /* Candidates dir + k pi, nearest to the current angle first: the
         * shorter motion (k = 0), then the reverse choice on the near side,
         * and so on alternately (d = from - base within [-pi/2, pi/2]: k pi
         * is |k pi - d| away; a tie goes below first), until one stays
         * within the steer range. */
        double base = veer__steer_near(dir, from[i]);
        int side = base < from[i] ? 1 : -1;
        int where = sg->k0, ok = 0;
        double chosen = 0.0;
        for (int c = 0; c < 9 && !ok; c++) { /* follow refuses a candidate outside the range at k0 */
            int w = sg->k0;
            /* kept as a float: the grid keeps it at k0 exactly, where the re-steer phase ends */
            double a = (double)keep(base + (double)((c + 1) / 2 * (c & 1 ? side : -side)) * VEER_PI, ml);
            if (follow(plan, j, i, xi, a, &w)) {
                ok = 1;
                chosen = a;
            } else if (w > where) {
                where = w;
            }
        }
        if (!ok) {
            char name[32];
            veer_limit_name(veer__limit(VEER_LIMIT_STEER_RANGE, i), name, sizeof name);
            return veer__fail(diag, VEER_ERR_INFEASIBLE, plan->path.segments[j].leg, plan->path.segments[j].waypoint,
                              where, plan->s[where], veer__limit(VEER_LIMIT_STEER_RANGE, i),
                              "leg %d: module %d would turn past its steer range [%g, %g] rad at s = %.3f; "
                              "add a stop so it can re-steer (%s)",
                              plan->path.segments[j].leg, i, ml->steer_min, ml->steer_max, plan->s[where], name);
        }
        if (isfinite(ml->steer_rate)) {
            double t = fabs(chosen - from[i]) / ml->steer_rate;
            if (t > t_max) t_max = t;
        }
    }
    sg->resteer_time = t_max;
    return VEER_OK;
}
