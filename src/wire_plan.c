/* Plans <-> Plan messages, and the compact profile.
 *
 * A Plan message carries the drive, limits and route; the path is rebuilt
 * from the route by path.c. The profile is carried as knots (s, sdot) per
 * rest-to-rest segment; between two knots sddot changes linearly with s
 * (sdot^2 is quadratic in s), and the decoder splits each knot interval into
 * grid intervals of constant sddot, the law the planner uses between its grid
 * points. The encoder keeps a grid point as a knot only where dropping it
 * would move sddot, sdot or the arrival time materially, steers each kept
 * knot's sdot within its tolerance so the accumulated time error stays near
 * zero, and then checks the result by sampling it against the plan,
 * tightening until it agrees.
 *
 * Profile.knots layout, per path segment in order:
 *   varint n (interior knots, >= 1), then n triples
 *     varint ds (>= 1, counts of s_step from the previous knot),
 *     zigzag varint dv (counts of sdot_step from the previous knot's sdot),
 *     zigzag varint du (counts of sddot_step: how much sddot changes over the
 *       interval that ends at this knot), and when du != 0 a varint r - 1:
 *       the interval is split into r (1..256) equal pieces,
 *   then du (and r - 1) of the last interval (to the segment's end).
 * Each segment starts at its s_begin at rest (the first at start_sdot) and
 * ends at its s_end at rest, implicitly. A knot interval of length h from sdot^2 = xa to xb with
 * sddot change du has sdot^2(sigma) = xa + b sigma + c sigma^2, c = du / h,
 * b = (xb - xa) / h - c h; the encoder splits it into about |du| /
 * sddot_split pieces (never more than the planner's grid had there).
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "wire_internal.h"

#define NONE_ID veer__limit(VEER_LIMIT_NONE, -1)

/* Quantization steps of s (s units) and sdot (s units per second): 1e-5,
 * finer for fine grids so that the sddot of short knot intervals keeps
 * (see quantum()). */
#define QUANTUM 1e-5
#define MAX_WINDOW 4096 /* grid intervals one knot interval may span */
#define MAX_SPLIT 256   /* pieces a knot interval may be split into */

/* ---- varints (protobuf base-128, zigzag for signed) ------------------------ */

typedef struct {
    uint8_t *p;
    size_t n, cap;
    int overflow;
} wbuf;

static void put_varint(wbuf *b, uint64_t v) {
    do {
        uint8_t c = (uint8_t)(v & 0x7Fu);
        v >>= 7;
        if (v) c |= 0x80u;
        if (b->n < b->cap) b->p[b->n] = c;
        else b->overflow = 1;
        b->n++;
    } while (v);
}

static uint64_t zigzag(int64_t v) { return v < 0 ? (((uint64_t)(-(v + 1))) << 1) | 1u : ((uint64_t)v) << 1; }
static int64_t unzigzag(uint64_t u) { return (u & 1u) ? -(int64_t)(u >> 1) - 1 : (int64_t)(u >> 1); }

typedef struct {
    const uint8_t *p;
    size_t n, pos;
} rbuf;

static int get_varint(rbuf *b, uint64_t *v) {
    uint64_t r = 0;
    for (int shift = 0; shift < 64; shift += 7) {
        if (b->pos >= b->n) return 0;
        uint8_t c = b->p[b->pos++];
        if (shift == 63 && c > 1) return 0;
        r |= (uint64_t)(c & 0x7Fu) << shift;
        if (!(c & 0x80u)) {
            *v = r;
            return 1;
        }
    }
    return 0;
}

/* ---- content hash ------------------------------------------------------ */

static bool hash_write(pb_ostream_t *os, const pb_byte_t *buf, size_t count) {
    veer__sha256_update((veer_sha256 *)os->state, buf, count);
    return true;
}

pb_ostream_t veer__wire_hash_stream(veer_sha256 *c) {
    pb_ostream_t os = {hash_write, c, SIZE_MAX, 0, NULL};
    return os;
}

veer_status veer__wire_plan_hash(veer_v1_Plan *m, uint8_t digest[32]) {
    /* The hash covers the encoding with content_hash empty: encode the
     * fields before and after it (content_hash is the last field, 12). */
    veer_sha256 c;
    veer__sha256_init(&c);
    pb_ostream_t os = veer__wire_hash_stream(&c);
    pb_size_t saved = m->content_hash.size;
    m->content_hash.size = 0;
    bool ok = pb_encode(&os, veer_v1_Plan_fields, m);
    m->content_hash.size = saved;
    veer__sha256_final(&c, digest);
    return ok ? VEER_OK : VEER_ERR_CAPACITY;
}

/* ---- rebuilding a plan from knots --------------------------------------- */

veer__plan_cap veer__plan_cap_max(void) {
    veer__plan_cap c = {VEER_WIRE_MAX_KNOTS, VEER_MAX_WAYPOINTS, VEER_MAX_LEGS, VEER_MAX_MODULES, 1, 1};
    return c;
}

size_t veer__wire_plan_bytes_for(const veer__plan_cap *cap) {
    veer__plan_caps c = veer__plan_caps_for(cap->waypoints, cap->legs);
    size_t grid = VEER__GRID_BYTES(cap->knots, cap->steered ? cap->modules : 0, 0);
    /* the grid area holds the scratch of the load first (load): the submessages, the route's head and,
     * when the plan does not keep its route, its legs and waypoints */
    int kept = cap->route;
    size_t scratch = VEER__PLAN_SCRATCH_BYTES(kept ? 0 : cap->legs, kept ? 0 : cap->waypoints);
    if (grid < scratch) grid = scratch;
    c.route = cap->route;
    return veer__plan_block_bytes(c) + VEER__ALIGN16(grid);
}

/* One knot interval: length h, sdot^2 from xa to xb, sdot^2 = xa + b sigma +
 * c sigma^2, split into r pieces. */
typedef struct {
    double h, xa, xb, b, c;
    int r;
} kinterval;

static kinterval make_interval(double h, double xa, double xb, double du, int r) {
    kinterval q;
    q.h = h, q.xa = xa, q.xb = xb;
    q.c = du / h;
    q.b = (xb - xa) / h - q.c * h;
    q.r = r < 1 ? 1 : r > MAX_SPLIT ? MAX_SPLIT : r;
    return q;
}

/* Pieces for a sddot change of du: |du| / split rounded up, no more than the
 * planner's grid intervals the knot interval covers (finer gains nothing). */
static int pieces(double du, double split, int covered) {
    double r = ceil(fabs(du) / split - 1e-9);
    int cap = covered < 1 ? 1 : covered > MAX_SPLIT ? MAX_SPLIT : covered;
    return !(r >= 1.0) ? 1 : r > cap ? cap : (int)r;
}

/* sdot^2 at piece boundary m of r (the ends exactly). */
static double split_x(const kinterval *q, int m) {
    if (m <= 0) return q->xa;
    if (m >= q->r) return q->xb;
    double sg = q->h * m / q->r;
    return q->xa + q->b * sg + q->c * sg * sg;
}

/* Time across the interval as the decoded plan has it (constant sddot per
 * piece: 2 dl / (v_a + v_b)); infinite if it stands still inside. */
static double kinterval_time(const kinterval *q) {
    double t = 0.0, va = sqrt(q->xa);
    for (int m = 1; m <= q->r; m++) {
        double x = split_x(q, m);
        if (m < q->r && !(x > 0.0)) return VEER_UNLIMITED;
        double vb = sqrt(fmax(0.0, x));
        if (!(va + vb > 0.0)) return VEER_UNLIMITED;
        t += 2.0 * (q->h / q->r) / (va + vb);
        va = vb;
    }
    return t;
}

/* Time over an interval of length h from speed va to vb with sddot change
 * du in r pieces (+inf where it dips to rest). */
static double arrival_time(double h, double va, double vb, double du, int r) {
    kinterval q = make_interval(h, va * va, vb * vb, du, r);
    return kinterval_time(&q);
}

#define COUNT_LIMIT ((int64_t)1 << 40)

/* Parses the profile against the path's segments. With s, x NULL only counts
 * the grid points (*count); otherwise fills them and the segments' k0, k1. */
static veer_status parse_profile(const veer__profile_in *pr, const veer_path *path, double *s, double *x,
                                 veer_plan_segment *segs, int *count, veer_diag *diag) {
    if (!(pr->s_step >= 1e-9 && pr->s_step <= 1.0) || !(pr->sdot_step >= 1e-9 && pr->sdot_step <= 1.0) ||
        !(pr->sddot_step >= 1e-12 && pr->sddot_step <= 1e3) ||
        !(pr->sddot_split >= pr->sddot_step && pr->sddot_split <= 1e6) ||
        !(pr->start_sdot >= 0.0 && pr->start_sdot <= 1e4))
        return veer__fail_plain(diag, VEER_ERR_VALUE,
                                "plan.profile: steps s %g, sdot %g, sddot %g, split %g are out of range", pr->s_step,
                                pr->sdot_step, pr->sddot_step, pr->sddot_split);
    rbuf b = {pr->knots, pr->knots_size, 0};
    int k = 0;
    for (int j = 0; j < path->segment_count; j++) {
        const veer_path_segment *ps = &path->segments[j];
        uint64_t n;
        if (!get_varint(&b, &n) || n < 1 || n > VEER_WIRE_MAX_KNOTS)
            return veer__fail(diag, VEER_ERR_DECODE, -1, -1, -1, ps->s_begin, NONE_ID,
                              "plan.profile: segment %d of %d has no valid knot count", j, path->segment_count);
        if (k + 1 > VEER_WIRE_MAX_KNOTS)
            return veer__fail(diag, VEER_ERR_CAPACITY, -1, -1, -1, ps->s_begin, NONE_ID,
                              "plan.profile: more than %d grid points", VEER_WIRE_MAX_KNOTS);
        double x0 = j == 0 ? pr->start_sdot * pr->start_sdot : 0.0;
        if (segs) segs[j].k0 = k;
        if (s) s[k] = ps->s_begin, x[k] = x0;
        k++;
        int64_t cs = 0, cv = 0;
        double prev_s = ps->s_begin, prev_x = x0;
        for (uint64_t i = 0; i <= n; i++) {
            uint64_t ds = 0, dvz = 0, duz;
            int last = i == n;
            if ((!last && (!get_varint(&b, &ds) || !get_varint(&b, &dvz))) || !get_varint(&b, &duz))
                return veer__fail(diag, VEER_ERR_DECODE, -1, -1, k, ps->s_begin, NONE_ID,
                                  "plan.profile: the knots end early (segment %d)", j);
            int64_t dv = unzigzag(dvz), du = unzigzag(duz);
            uint64_t rm1 = 0;
            if (du != 0 && (!get_varint(&b, &rm1) || rm1 >= MAX_SPLIT))
                return veer__fail(diag, VEER_ERR_DECODE, -1, -1, k, ps->s_begin, NONE_ID,
                                  "plan.profile: knot interval %d has no valid piece count", k);
            if ((!last && (ds < 1 || ds > (uint64_t)COUNT_LIMIT)) || dv > COUNT_LIMIT || dv < -COUNT_LIMIT ||
                du > COUNT_LIMIT || du < -COUNT_LIMIT)
                return veer__fail(diag, VEER_ERR_VALUE, -1, -1, k, prev_s, NONE_ID,
                                  "plan.profile: knot interval %d has an out-of-range step", k);
            double sk = ps->s_end, xk = 0.0;
            if (!last) {
                cs += (int64_t)ds;
                cv += dv;
                sk = ps->s_begin + (double)cs * pr->s_step;
                double vk = (double)cv * pr->sdot_step;
                if (!(sk > prev_s) || !(sk < ps->s_end) || cv < 1 || cs > COUNT_LIMIT || vk > 1e4)
                    return veer__fail(diag, VEER_ERR_VALUE, -1, -1, k, sk, NONE_ID,
                                      "plan.profile: knot at s = %g, sdot = %g is outside segment %d [%g, %g] or "
                                      "at rest",
                                      sk, vk, j, ps->s_begin, ps->s_end);
                xk = vk * vk;
            }
            kinterval q = make_interval(sk - prev_s, prev_x, xk, (double)du * pr->sddot_step, (int)rm1 + 1);
            if (k + q.r > VEER_WIRE_MAX_KNOTS)
                return veer__fail(diag, VEER_ERR_CAPACITY, -1, -1, -1, ps->s_begin, NONE_ID,
                                  "plan.profile: more than %d grid points", VEER_WIRE_MAX_KNOTS);
            if (!isfinite(kinterval_time(&q)))
                return veer__fail(diag, VEER_ERR_VALUE, -1, -1, k, prev_s, NONE_ID,
                                  "plan.profile: the cart would stand still between s = %g and %g", prev_s, sk);
            for (int m = 1; m <= q.r; m++) {
                if (s) s[k] = m == q.r ? sk : prev_s + q.h * m / q.r, x[k] = split_x(&q, m);
                k++;
            }
            prev_s = sk, prev_x = xk;
        }
        if (segs) segs[j].k1 = k - 1;
    }
    if (b.pos != b.n)
        return veer__fail_plain(diag, VEER_ERR_DECODE,
                                "plan.profile: %zu bytes left after the last segment's knots", b.n - b.pos);
    if (pr->knot_count != (uint32_t)k)
        return veer__fail_plain(diag, VEER_ERR_VALUE,
                                "plan.profile: knot_count says %u, the knots give %d", (unsigned)pr->knot_count, k);
    *count = k;
    return VEER_OK;
}

/* The plan's timeline from its knots: times, steer angles, re-steer phases,
 * dwells, leg summaries (the same steps as the planner after its solve). */
static veer_status timeline(veer_plan *plan, double from[VEER_MAX_MODULES], veer_diag *diag) {
    const veer_path *path = &plan->path;
    int M = plan->module_count;
    for (int j = 0; j < plan->segment_count; j++) {
        veer_plan_segment *sg = &plan->segs[j];
        sg->dwell = path->segments[j].dwell;
        double t = 0.0;
        for (int k = sg->k0; k <= sg->k1; k++) {
            if (k > sg->k0) t += 2.0 * (plan->s[k] - plan->s[k - 1]) / (sqrt(plan->x[k - 1]) + sqrt(plan->x[k]));
            plan->t[k] = t;
        }
        if (!isfinite(t))
            return veer__fail(diag, VEER_ERR_VALUE, path->segments[j].leg, path->segments[j].waypoint, sg->k0,
                              path->segments[j].s_begin, NONE_ID, "plan.profile: segment %d has no finite time", j);
        sg->raw_time = t;
        sg->move_time = t + sg->tau - veer__segment_lead(plan, j); /* tau: the profile's jerk window, 0 without */
        veer_status st = veer__steer_segment(plan, j, from, NULL, diag); /* twists from the path: no array */
        if (st != VEER_OK) return st;
        if (j == 0 && plan->x_start > 0.0) sg->resteer_time = 0.0; /* already pointing along the motion */
        for (int i = 0; i < M; i++) from[i] = veer__plan_steer(plan, sg->k1, i);
    }
    veer__plan_timeline(plan);
    return VEER_OK;
}

/* The segments' jerk-limiting windows: none, or one per segment. */
static double jerk_at(const veer__profile_in *pr, int j) {
    if (pr->jerk) return pr->jerk[j];
    uint64_t u = 0;
    for (int i = 7; i >= 0; i--) u = u << 8 | pr->jerk_packed[8 * j + i];
    double v;
    memcpy(&v, &u, sizeof v);
    return v;
}

static veer_status jerk_windows(const veer__profile_in *pr, veer_plan *plan, veer_diag *diag) {
    if (pr->jerk_count == 0) return VEER_OK;
    if (pr->jerk_count != (size_t)plan->segment_count)
        return veer__fail_plain(diag, VEER_ERR_VALUE,
                                "plan.profile: %d jerk windows for %d path segments", (int)pr->jerk_count,
                                plan->segment_count);
    for (int j = 0; j < plan->segment_count; j++) {
        double tau = jerk_at(pr, j);
        if (!(tau >= 0.0 && tau <= 3600.0))
            return veer__fail_plain(diag, VEER_ERR_VALUE,
                                    "plan.profile: jerk window %d is %g s", j, tau);
        plan->segs[j].tau = tau;
    }
    return VEER_OK;
}

/* Everything but the profile: versions, drive, limits, route, path, and the
 * modules' angles at the start (from). plan starts a block of
 * veer__plan_block_bytes(caps) bytes; the route's head is rebuilt into rb,
 * its legs and waypoints into the block (caps.route: rb's arrays are set
 * to the plan's route, whose head is then written too) or into rb's
 * arrays, which the plan does not keep. rb's caps are the caller's. */
static veer_status load_head(const veer__plan_in *m, veer_plan *plan, veer__plan_caps caps, veer__route_buf *rb,
                             double from[VEER_MAX_MODULES], veer_diag *diag) {
    if (m->schema_version != VEER_WIRE_SCHEMA_VERSION)
        return veer__fail_plain(diag, VEER_ERR_VERSION,
                                "plan: schema version %u, this library reads version %d", (unsigned)m->schema_version,
                                VEER_WIRE_SCHEMA_VERSION);
    if (m->path_model != VEER_WIRE_PATH_MODEL)
        return veer__fail_plain(diag, VEER_ERR_VERSION,
                                "plan: made with path model %u, this library builds paths with model %d",
                                (unsigned)m->path_model, VEER_WIRE_PATH_MODEL);
    if (!m->drive || !m->limits || !m->has_route || !m->has_profile)
        return veer__fail_plain(diag, VEER_ERR_VALUE, "plan: the %s is missing",
                                !m->drive ? "drive" : !m->limits ? "limits" : !m->has_route ? "route" : "profile");
    memset(plan, 0, sizeof *plan);
    veer__plan_attach(plan, caps);
    veer_status st;
    if ((st = veer__wire_drive_from_pb(m->drive, &plan->drive, diag))) return st;
    if ((st = veer_drive_check(&plan->drive, diag))) return st;
    plan->module_count = veer_drive_module_count(&plan->drive);
    plan->steered = plan->drive.kind == VEER_DRIVE_STEERED;
    if ((st = veer__wire_limits_from_pb(m->limits, plan->module_count, &plan->limits, diag))) return st;
    if ((st = veer__limits_check(&plan->drive, &plan->limits, diag))) return st;
    plan->options = veer_default_plan_options();
    if (m->options && (st = veer__wire_options_from_pb(m->options, &plan->options, diag))) return st;
    veer_route *kept = plan->route;
    if (kept) rb->legs = kept->legs, rb->waypoints = kept->waypoints;
    if ((st = veer__wire_route_from_in(&m->route, plan->module_count, rb, diag))) return st;
    if (kept) veer__route_set_head(kept, &rb->view);
    const veer__route_view *route = &rb->view;
    veer__row_ctx_init(&plan->rows, &plan->drive, &plan->limits, &plan->options);
    if ((st = veer__path_build(route, &plan->path, diag))) return st;
    plan->segment_count = plan->path.segment_count;
    plan->leg_count = route->leg_count;
    for (int i = 0; i < plan->module_count; i++) from[i] = route->has_start_steer ? route->start_steer[i] : 0.0;
    return VEER_OK;
}

/* 1 if m's content hash matches its contents. */
static int hash_matches(const veer__plan_in *m) {
    uint8_t h[32];
    if (m->content_hash_size != 32) return 0;
    int hashed = m->msg ? veer__wire_plan_hash(m->msg, h) == VEER_OK : m->digest_ok;
    return hashed && memcmp(m->msg ? h : m->digest, m->content_hash, 32) == 0;
}

/* The rebuilt plan against its message: the duration it said and whether
 * its content hash matched (hash_matches). */
static veer_status check_tail(double said, int hash_ok, const veer_plan *plan, veer_diag *diag) {
    double d = plan->duration;
    if (!(fabs(said - d) <= 1e-6 * (1.0 + d)))
        return veer__fail_plain(diag, VEER_ERR_DECODE,
                                "plan: it says it lasts %.6f s, but rebuilds to %.6f s (altered, or made by a library "
                                "that builds paths differently)",
                                said, d);
    if (!hash_ok)
        return veer__fail_plain(diag, VEER_ERR_DECODE,
                                "plan: the content hash does not match its contents (altered or damaged)");
    return VEER_OK;
}

/* A plan beyond the workspace's capacity: VEER_ERR_CAPACITY, saying which. */
static veer_status over_cap(const char *what, int n, int cap, veer_diag *diag) {
    return veer__fail_plain(diag, VEER_ERR_CAPACITY, "plan: %d %s, this cart takes at most %d", n, what, cap);
}

/* The rest of a load, from the grid on (n grid points at grid). The grid
 * overwrites the scratch, where the cart's m lies (veer__plan_msgs): what
 * is read of m after that is kept here first. A function of its own: the
 * copy is not on the stack while the head is loaded. */
static VEER__NOINLINE veer_status load_grid(const veer__plan_in *m, veer_plan *plan, int n, char *grid,
                                            double from[VEER_MAX_MODULES], int check_hash, veer_diag *diag) {
    veer__profile_in pr = m->profile;
    double said = m->duration;
    int hash_ok = check_hash && hash_matches(m);
    veer__plan_lay_grid(plan, n, grid, 0);
    veer_status st = parse_profile(&pr, &plan->path, plan->s, plan->x, plan->segs, &n, diag);
    plan->x_start = pr.start_sdot * pr.start_sdot;
    if (st == VEER_OK) st = jerk_windows(&pr, plan, diag);
    if (st == VEER_OK) st = timeline(plan, from, diag);
    if (st == VEER_OK && check_hash) st = check_tail(said, hash_ok, plan, diag);
    return st;
}

static veer_status load(const veer__plan_in *m, void *work, size_t work_size, const veer__plan_cap *cap, veer_plan **out,
                        int check_hash, veer_diag *diag) {
    veer__plan_cap max = veer__plan_cap_max();
    if (!cap) cap = &max;
    size_t need = veer__wire_plan_bytes_for(cap);
    if (!work || work_size < need || ((uintptr_t)work % sizeof(double)) != 0)
        return veer__fail_plain(diag, VEER_ERR_VALUE, "plan workspace: needs %zu bytes aligned for double", need);
    veer__plan_caps caps = veer__plan_caps_for(cap->waypoints, cap->legs);
    caps.route = cap->route;
    veer_plan *plan = (veer_plan *)work;
    char *grid = (char *)work + veer__plan_block_bytes(caps);
    /* The cart's m and its submessages may lie where the grid goes (veer__plan_msgs): m's drive, limits,
     * route and options are read by load_head only, and the route's head is rebuilt there too, with the
     * legs and waypoints of a route the plan does not keep behind it (need counts the room; more than
     * cap's legs or waypoints are refused as they are read); load_grid keeps the rest of m. */
    veer__route_buf *rb = &((veer__plan_msgs *)grid)->route;
    rb->legs = (veer_leg *)(grid + VEER__ALIGN16(sizeof(veer__plan_msgs)));
    rb->waypoints = (veer_waypoint *)((char *)rb->legs + VEER__ALIGN16((size_t)cap->legs * sizeof(veer_leg)));
    rb->leg_cap = cap->legs, rb->waypoint_cap = cap->waypoints;
    double from[VEER_MAX_MODULES];
    veer_status st = load_head(m, plan, caps, rb, from, diag);
    int n = 0;
    if (st == VEER_OK && plan->module_count > cap->modules)
        st = over_cap("modules", plan->module_count, cap->modules, diag);
    if (st == VEER_OK && plan->steered && !cap->steered)
        st = veer__fail_plain(diag, VEER_ERR_CAPACITY,
                              "plan: for steered modules, this cart has fixed wheels (its workspace keeps no steer "
                              "angles)");
    if (st == VEER_OK) st = parse_profile(&m->profile, &plan->path, NULL, NULL, NULL, &n, diag);
    if (st == VEER_OK && n > cap->knots) st = over_cap("knots", n, cap->knots, diag);
    if (st == VEER_OK) st = load_grid(m, plan, n, grid, from, check_hash, diag);
    if (st == VEER_OK) *out = plan; /* alloc_size 0 (load_head): it lives in the caller's workspace */
    return st;
}

void veer__wire_plan_in_from_msg(veer_v1_Plan *m, veer__plan_in *in) {
    memset(in, 0, sizeof *in);
    in->schema_version = m->schema_version;
    in->library_version = m->library_version;
    in->path_model = m->path_model;
    in->drive = m->has_drive ? &m->drive : NULL;
    in->limits = m->has_limits ? &m->limits : NULL;
    in->has_route = m->has_route;
    veer__route_in_from_msg(&m->route, &in->route);
    in->options = m->has_options ? &m->options : NULL;
    in->has_profile = m->has_profile;
    const veer_v1_Profile *pr = &m->profile;
    veer__profile_in *q = &in->profile;
    q->s_step = pr->s_step, q->sdot_step = pr->sdot_step, q->sddot_step = pr->sddot_step;
    q->sddot_split = pr->sddot_split, q->start_sdot = pr->start_sdot;
    q->knot_count = pr->knot_count, q->grid_points = pr->grid_points;
    q->knots = pr->knots.bytes, q->knots_size = pr->knots.size;
    q->jerk_count = pr->jerk_window_count, q->jerk = pr->jerk_window;
    in->duration = m->duration, in->length = m->length;
    in->content_hash = m->content_hash.bytes, in->content_hash_size = m->content_hash.size;
    in->msg = m;
}

size_t veer__wire_plan_grid_at(const veer__plan_cap *cap) {
    veer__plan_caps c = veer__plan_caps_for(cap->waypoints, cap->legs);
    c.route = cap->route;
    return veer__plan_block_bytes(c);
}

veer_status veer__wire_plan_load_in(const veer__plan_in *in, void *work, size_t work_size, const veer__plan_cap *cap,
                                    veer_plan **out, veer_diag *diag) {
    *out = NULL;
    veer_status st = load(in, work, work_size, cap, out, 1, diag);
    if (st == VEER_OK) veer__diag_ok(diag);
    return st;
}

veer_status veer__wire_plan_load(veer_v1_Plan *m, void *work, size_t work_size, const veer__plan_cap *cap,
                                 veer_plan **out, veer_diag *diag) {
    veer__plan_in in;
    veer__wire_plan_in_from_msg(m, &in);
    return veer__wire_plan_load_in(&in, work, work_size, cap, out, diag);
}

veer_status veer__wire_plan_decode_heap(veer_v1_Plan *msg, veer_plan **out, veer_diag *diag) {
    *out = NULL;
    veer__plan_in in, *m = &in;
    veer__wire_plan_in_from_msg(msg, &in);
    /* one block sized for the message's route (counts beyond the maxima fail in load_head, the plan's
     * route having room for the maxima) */
    veer__plan_caps caps = veer__plan_caps_for((int)m->route.waypoints_count, (int)m->route.legs_count);
    size_t bytes = veer__plan_block_bytes(caps);
    veer_plan *plan = veer__calloc(1, bytes);
    if (!plan) return veer__fail_plain(diag, VEER_ERR_NO_MEMORY, "out of memory");
    double from[VEER_MAX_MODULES];
    veer__route_buf rb; /* its arrays are the plan's route's */
    rb.leg_cap = VEER_MAX_LEGS, rb.waypoint_cap = VEER_MAX_WAYPOINTS;
    veer_status st = load_head(m, plan, caps, &rb, from, diag);
    plan->alloc_size = bytes;
    int n = 0;
    if (st == VEER_OK) st = parse_profile(&m->profile, &plan->path, NULL, NULL, NULL, &n, diag);
    if (st != VEER_OK) {
        veer__free(plan, bytes);
        return st;
    }
    size_t gb = VEER__GRID_BYTES(n, plan->steered ? plan->module_count : 0, 0);
    char *grid = veer__alloc(gb);
    if (!grid) {
        veer__free(plan, bytes);
        return veer__fail_plain(diag, VEER_ERR_NO_MEMORY, "out of memory");
    }
    st = load_grid(m, plan, n, grid, from, 1, diag);
    plan->grid_bytes = gb;
    if (st != VEER_OK) {
        veer_plan_destroy(plan);
        return st;
    }
    veer__diag_ok(diag);
    *out = plan;
    return VEER_OK;
}

/* ---- comparing two plans by sampling ------------------------------------ */

/* Largest |value| / limit over the samples for each limit kind. */
static void limit_ratios(const veer_plan *p, const veer_sample *o, double r[VEER_LIMIT_PATH_END + 1]) {
    const veer_limits *l = &p->limits;
    for (int i = 0; i < o->module_count; i++) {
        const veer_module_limits *ml = &l->modules[i];
        const veer_module_setpoint *ms = &o->modules[i];
        r[VEER_LIMIT_WHEEL_SPEED] = fmax(r[VEER_LIMIT_WHEEL_SPEED], fabs(ms->wheel_rate) / ml->wheel_rate);
        r[VEER_LIMIT_WHEEL_ACCEL] = fmax(r[VEER_LIMIT_WHEEL_ACCEL], fabs(ms->wheel_accel) / ml->wheel_accel);
        if (p->steered)
            r[VEER_LIMIT_STEER_RATE] = fmax(r[VEER_LIMIT_STEER_RATE], fabs(ms->steer_rate) / ml->steer_rate);
    }
    r[VEER_LIMIT_BODY_SPEED] =
        fmax(r[VEER_LIMIT_BODY_SPEED], hypot(o->twist_world[0], o->twist_world[1]) / l->body_speed);
    r[VEER_LIMIT_BODY_ACCEL] =
        fmax(r[VEER_LIMIT_BODY_ACCEL], hypot(o->accel_world[0], o->accel_world[1]) / l->body_accel);
    r[VEER_LIMIT_YAW_RATE] = fmax(r[VEER_LIMIT_YAW_RATE], fabs(o->twist_world[2]) / l->yaw_rate);
    r[VEER_LIMIT_YAW_ACCEL] = fmax(r[VEER_LIMIT_YAW_ACCEL], fabs(o->accel_world[2]) / l->yaw_accel);
}

void veer__wire_compare(const veer_plan *a, const veer_plan *b, int samples, veer_wire_figures *f) {
    memset(f, 0, sizeof *f);
    double T = fmax(a->duration, b->duration);
    if (samples < 2) samples = 2;
    double ra[VEER_LIMIT_PATH_END + 1] = {0}, rb[VEER_LIMIT_PATH_END + 1] = {0};
    for (int q = 0; q < samples; q++) {
        double t = T * q / (samples - 1);
        veer_sample sa, sb;
        if (veer_plan_sample(a, t, &sa) != VEER_OK || veer_plan_sample(b, t, &sb) != VEER_OK) {
            f->position = f->angle = VEER_UNLIMITED;
            return;
        }
        f->position = fmax(f->position, hypot(sa.pose[0] - sb.pose[0], sa.pose[1] - sb.pose[1]));
        f->angle = fmax(f->angle, fabs(sa.pose[2] - sb.pose[2]));
        for (int i = 0; i < sa.module_count; i++)
            f->angle = fmax(f->angle, fabs(sa.modules[i].steer - sb.modules[i].steer));
        limit_ratios(a, &sa, ra);
        limit_ratios(b, &sb, rb);
    }
    f->limit_excess = 0.0;
    for (int k = 0; k <= VEER_LIMIT_PATH_END; k++) {
        f->ratio_a = fmax(f->ratio_a, ra[k]);
        f->ratio_b = fmax(f->ratio_b, rb[k]);
        double e = rb[k] - fmax(1.0, ra[k]);
        if (e > f->limit_excess) f->limit_excess = e, f->worst_kind = k;
    }
    f->duration = fabs(a->duration - b->duration);
}

/* ---- choosing knots ----------------------------------------------------- */

typedef struct {
    int64_t cs, cv; /* s and sdot counts from the segment start */
    int64_t cu;     /* sddot change over the interval that ends here, counts */
    int r;          /* pieces of that interval */
} qknot;

typedef struct {
    double s, v, u, split; /* steps of s, sdot, sddot; split size */
    double ev, et, eu;     /* tolerances: sdot, arrival time, sddot */
} coder;

/* The plan's own sdot^2 at s, linear between its grid points k and k + 1. */
static double x_at(const double *s, const double *x, int N, int k, double at) {
    while (k > 0 && at < s[k]) k--;
    while (k < N - 1 && at > s[k + 1]) k++;
    double f = (at - s[k]) / (s[k + 1] - s[k]);
    return fmax(0.0, x[k] + (x[k + 1] - x[k]) * f);
}

/* sddot change over [si, si + h] that best fits the plan's sdot^2 at its grid
 * points i+1 .. jj-1 (least squares of the relative error, ends held; near
 * rest the time depends on sdot^2 relative to itself), in counts. */
static int64_t fit_du(const double *s, const double *x, int i, int jj, double si, double h, double xa, double xb,
                      double step) {
    double num = 0.0, den = 0.0, floor_x = 1e-6 * fmax(fmax(xa, xb), 1e-12);
    for (int k = i + 1; k < jj; k++) {
        double sg = s[k] - si, w = sg * (sg - h), r = x[k] - (xa + (xb - xa) * sg / h);
        double wt = 1.0 / fmax(x[k], floor_x);
        num += wt * w * r;
        den += wt * w * w;
    }
    if (!(den > 0.0)) return 0;
    double du = num / den * h / step;
    return fabs(du) < 1e12 ? (int64_t)llround(du) : 0;
}

/* Does interval q, starting at si, follow the plan's grid points i .. jj
 * (speeds, sddot per interval, times since point i) within the tolerances?
 * The arrival-time error carried in from earlier intervals is steered away
 * at the knots instead (choose_knots). */
static double grid_u(const double *s, const double *x, int k) { return (x[k + 1] - x[k]) / (2.0 * (s[k + 1] - s[k])); }

static int follows(const coder *cd, const kinterval *q, const double *s, const double *x, const double *t, int N,
                   int i, int jj, double si) {
    for (int m = 1; m < q->r; m++)
        if (!(split_x(q, m) > 0.0)) return 0;
    /* The sddot of the decoded pieces at each end of a grid interval must lie between the plan's
     * sddot on the two grid intervals that meet there (within eu): at a grid point the planner's
     * rows hold for both, so they hold for anything between. */
    for (int k = i; k < jj; k++) {
        double uk = grid_u(s, x, k);
        for (int e = 0; e < 2; e++) {
            int other = e == 0 ? k - 1 : k + 1;
            double uo = other >= 0 && other < N ? grid_u(s, x, other) : uk;
            double at = e == 0 ? s[k] - si + 1e-9 * q->h : s[k + 1] - si - 1e-9 * q->h;
            int m = (int)floor(fmin(fmax(at, 0.0), q->h) * q->r / q->h);
            if (m >= q->r) m = q->r - 1;
            double uq = 0.5 * (q->b + 2.0 * q->c * (m + 0.5) * q->h / q->r);
            if (uq < fmin(uk, uo) - cd->eu || uq > fmax(uk, uo) + cd->eu) return 0;
        }
    }
    double th = 0.0, sp = 0.0, vp = sqrt(q->xa);
    for (int k = i + 1; k < jj; k++) {
        double sg = s[k] - si;
        double xh = q->xa + q->b * sg + q->c * sg * sg;
        if (!(xh > 0.0)) return 0;
        double vh = sqrt(xh), vk = sqrt(x[k]);
        th += 2.0 * (sg - sp) / (vp + vh);
        sp = sg, vp = vh;
        if (fabs(vh - vk) > cd->ev || fabs(th - (t[k] - t[i])) > cd->et) return 0;
    }
    return 1;
}

/* Knots of segment j: writes at most cap interior knots to out and the last
 * interval (to the segment's end) to *last; returns the knot count (-1 over
 * cap). */
static int choose_knots(const veer_plan *plan, int j, const coder *cd, qknot *out, int cap, qknot *last) {
    const veer_plan_segment *sg = &plan->segs[j];
    const double *s = plan->s + sg->k0, *x = plan->x + sg->k0, *t = plan->t + sg->k0;
    int N = sg->k1 - sg->k0;
    double sb = plan->path.segments[j].s_begin, se = plan->path.segments[j].s_end;
    int64_t c_end = (int64_t)floor((se - sb) / cd->s - 0.5);
    int count = 0, i = 0;
    qknot ki = {0, 0, 0, 1};
    double si = sb, vi = sqrt(x[0]), D = 0.0; /* D: arrival time of the kept knots minus the plan's, at knot i */
    while (i < N) {
        int best = -1;
        qknot kb = {0, 0, 0, 1};
        for (int jj = i + 1; jj <= N; jj++) {
            if (best >= 0 && jj - i > MAX_WINDOW) break;
            qknot kj = {0, 0, 0, 1};
            double sj, vj;
            if (jj == N) {
                kj.cs = c_end + 1, sj = se, vj = 0.0;
            } else {
                kj.cs = (int64_t)llround((s[jj] - sb) / cd->s);
                if (kj.cs <= ki.cs || kj.cs > c_end) continue; /* cannot be placed apart from its neighbours */
                sj = sb + (double)kj.cs * cd->s;
                /* The plan's speed where the knot lands, not at the grid point it stands for. */
                kj.cv = (int64_t)llround(sqrt(x_at(s, x, N, jj, sj)) / cd->v);
                if (kj.cv < 1) kj.cv = 1;
                vj = (double)kj.cv * cd->v;
            }
            if (best < 0) { /* the nearest placeable point is always acceptable */
                best = jj, kb = kj;
                if (cd->ev <= 0.0) break;
                continue;
            }
            double h = sj - si;
            kj.cu = fit_du(s, x, i, jj, si, h, vi * vi, vj * vj, cd->u);
            kj.r = pieces((double)kj.cu * cd->u, cd->split, jj - i);
            kinterval q = make_interval(h, vi * vi, vj * vj, (double)kj.cu * cd->u, kj.r);
            if (!follows(cd, &q, s, x, t, N, i, jj, si)) break;
            best = jj, kb = kj;
        }
        /* Steer the kept knot's sdot so the arrival time error stays near zero, within ev / 2 and
         * changing the sddot of the intervals on either side by at most eu / 4. */
        double sj = best == N ? se : sb + (double)kb.cs * cd->s;
        if (best < N) {
            double h = fmin(sj - si, s[best + 1] - sj); /* this interval and the shortest the next can be */
            double dv = fmin(0.5 * cd->ev, 0.25 * cd->eu * h / fmax((double)kb.cv * cd->v, cd->v));
            double span = dv / cd->v; /* counts the sdot may move; none unless positive (NaN, -inf too) */
            int64_t c0 = kb.cv, r = span >= 1.0 ? (int64_t)floor(fmin(span, 1e15)) : 0;
            int64_t lo = c0 - r < 1 ? 1 : c0 - r, hi = c0 + r;
            /* The arrival error falls as the end speed c rises (every split
             * point's speed rises with it): bisect for its change of sign, in
             * O(log r) steps (r reaches billions on long grid intervals). */
            double goal = t[best] - t[i] - D;
            while (hi - lo > 1) {
                int64_t mid = lo + (hi - lo) / 2;
                if (arrival_time(sj - si, vi, (double)mid * cd->v, (double)kb.cu * cd->u, kb.r) > goal) lo = mid;
                else hi = mid;
            }
            double e_lo = fabs(arrival_time(sj - si, vi, (double)lo * cd->v, (double)kb.cu * cd->u, kb.r) - goal);
            double e_hi = fabs(arrival_time(sj - si, vi, (double)hi * cd->v, (double)kb.cu * cd->u, kb.r) - goal);
            kb.cv = e_hi < e_lo ? hi : lo;
        }
        double vj = best == N ? 0.0 : (double)kb.cv * cd->v;
        kinterval q = make_interval(sj - si, vi * vi, vj * vj, (double)kb.cu * cd->u, kb.r);
        double T = kinterval_time(&q);
        if (!isfinite(T)) { /* a fitted curve that dips to rest: fall back to constant sddot */
            kb.cu = 0, kb.r = 1;
            q = make_interval(sj - si, vi * vi, vj * vj, 0.0, 1);
            T = kinterval_time(&q);
        }
        D += T - (t[best] - t[i]);
        if (best < N) {
            if (count >= cap) return -1;
            out[count++] = kb;
        } else {
            *last = kb;
        }
        i = best, ki = kb, si = sj, vi = vj;
    }
    return count;
}

/* A step small against the plan's shortest grid interval h: below
 * h / 256, from the ladder 1e-5, 5e-6, 2e-6, 1e-6, ... */
static double quantum(const veer_plan *plan) {
    double h = VEER_UNLIMITED;
    for (int j = 0; j < plan->segment_count; j++)
        for (int k = plan->segs[j].k0; k < plan->segs[j].k1; k++) h = fmin(h, plan->s[k + 1] - plan->s[k]);
    double q = QUANTUM;
    static const double ladder[3] = {1.0, 0.5, 0.2};
    for (int e = 0; e < 4; e++)
        for (int i = 0; i < 3; i++) {
            q = QUANTUM * ladder[i] * pow(0.1, e);
            if (q <= h / 256.0) return q;
        }
    return q;
}

/* Writes the profile of plan at one tolerance level into pr: sdot within
 * level * 0.1 % of the segment's top speed, sddot within level * 0.1 % of its
 * largest, arrival within the time the segment's top speed takes for
 * level * 1e-4 s units; level 0 keeps every point. */
static veer_status write_profile(const veer_plan *plan, double level, qknot *tmp, veer_v1_Profile *pr,
                                 veer_diag *diag) {
    memset(pr, 0, sizeof *pr);
    double umax_plan = 1e-6;
    for (int j = 0; j < plan->segment_count; j++)
        for (int k = plan->segs[j].k0; k < plan->segs[j].k1; k++)
            umax_plan = fmax(umax_plan, fabs(plan->x[k + 1] - plan->x[k]) / (2.0 * (plan->s[k + 1] - plan->s[k])));
    coder cd;
    cd.s = cd.v = quantum(plan);
    cd.u = 1e-4 * umax_plan;
    cd.split = fmax(cd.u, 0.5e-3 * level * umax_plan);
    pr->s_step = cd.s;
    pr->sdot_step = cd.v;
    pr->sddot_step = cd.u;
    pr->sddot_split = cd.split;
    pr->start_sdot = sqrt(plan->x_start);
    for (int j = 0; j < plan->segment_count; j++)
        if (plan->segs[j].tau > 0.0) pr->jerk_window_count = (pb_size_t)plan->segment_count;
    for (int j = 0; j < (int)pr->jerk_window_count; j++) pr->jerk_window[j] = plan->segs[j].tau;
    pr->grid_points = (uint32_t)plan->n;
    wbuf b = {pr->knots.bytes, 0, sizeof pr->knots.bytes, 0};
    int total = 0;
    for (int j = 0; j < plan->segment_count; j++) {
        const veer_plan_segment *sg = &plan->segs[j];
        double vmax = 0.0, umax = 0.0;
        for (int k = sg->k0; k <= sg->k1; k++) vmax = fmax(vmax, sqrt(plan->x[k]));
        for (int k = sg->k0; k < sg->k1; k++)
            umax = fmax(umax, fabs(plan->x[k + 1] - plan->x[k]) / (2.0 * (plan->s[k + 1] - plan->s[k])));
        cd.ev = level * 1e-3 * vmax;
        cd.eu = level * 1e-3 * umax;
        cd.et = level * 1e-4 / fmax(vmax, 1e-3); /* 1e-4 s units at top speed */
        qknot last = {0, 0, 0, 1};
        int n = choose_knots(plan, j, &cd, tmp, VEER_WIRE_MAX_KNOTS, &last);
        if (n == 0)
            return veer__fail(diag, VEER_ERR_VALUE, plan->path.segments[j].leg, plan->path.segments[j].waypoint,
                              sg->k0, plan->s[sg->k0], NONE_ID,
                              "plan: segment %d is too short to carry a profile (%g s units)", j,
                              plan->path.segments[j].s_end - plan->path.segments[j].s_begin);
        total += 1; /* grid points the decoder will make: the start, then each interval's pieces */
        for (int i = 0; i <= n && n > 0; i++) total += i < n ? tmp[i].r : last.r;
        if (n < 0 || total > VEER_WIRE_MAX_KNOTS)
            return veer__fail_plain(diag, VEER_ERR_CAPACITY,
                                    "plan: the profile needs more than the %d grid points a decoded plan holds; plan "
                                    "with fewer grid points",
                                    VEER_WIRE_MAX_KNOTS);
        put_varint(&b, (uint64_t)n);
        int64_t ps = 0, pv = 0;
        for (int i = 0; i < n; i++) {
            put_varint(&b, (uint64_t)(tmp[i].cs - ps));
            put_varint(&b, zigzag(tmp[i].cv - pv));
            put_varint(&b, zigzag(tmp[i].cu));
            if (tmp[i].cu != 0) put_varint(&b, (uint64_t)(tmp[i].r - 1));
            ps = tmp[i].cs, pv = tmp[i].cv;
        }
        put_varint(&b, zigzag(last.cu));
        if (last.cu != 0) put_varint(&b, (uint64_t)(last.r - 1));
    }
    if (b.overflow)
        return veer__fail_plain(
            diag, VEER_ERR_CAPACITY,
            "plan: the profile needs %zu bytes, a Plan message holds %d; plan with fewer grid points", b.n,
            VEER_WIRE_MAX_PROFILE_BYTES);
    pr->knots.size = (pb_size_t)b.n;
    pr->knot_count = (uint32_t)total;
    return VEER_OK;
}

/* The check samples every millisecond (at least 2000, at most 50000 times). */
static int samples_for(double duration) {
    double n = duration / 0.001;
    return n < 2000.0 ? 2000 : n > 50000.0 ? 50000 : (int)n + 1;
}

/* The encoder keeps this share of each tolerance in hand, for sampling
 * between its sample times. */
#define MARGIN 0.9

veer_status veer__wire_plan_to_pb(const veer_plan *plan, const veer_v1_PlanRequest *request, veer_v1_Plan *m,
                                  veer_diag *diag) {
    memset(m, 0, sizeof *m);
    m->schema_version = VEER_WIRE_SCHEMA_VERSION;
    m->library_version = VEER_VERSION_HEX;
    m->path_model = VEER_WIRE_PATH_MODEL;
    m->has_drive = m->has_limits = m->has_route = m->has_options = m->has_profile = true;
    veer__wire_options_to_pb(&plan->options, &m->options); /* always explicit: grid size and polygon */
    if (request) {
        m->drive = request->drive;
        if (request->has_limits) m->limits = request->limits;
        m->route = request->route;
        const char *cart_id = request->cart_id;
        size_t n = strlen(cart_id);
        if (n >= sizeof m->cart_id || !veer__wire_utf8_ok(cart_id))
            return veer__fail_plain(diag, VEER_ERR_VALUE,
                                    "cart_id must be UTF-8 of at most %zu bytes", sizeof m->cart_id - 1);
        memcpy(m->cart_id, cart_id, n + 1);
    } else {
        veer__wire_drive_to_pb(&plan->drive, &m->drive);
        veer__wire_limits_to_pb(&plan->limits, plan->module_count, &m->limits);
        if (!plan->route)
            return veer__fail_plain(diag, VEER_ERR_STATE,
                                    "plan: loaded by a cart's player, which keeps no route: encode the plan it came from");
        veer__wire_route_to_pb(plan->route, plan->module_count, &m->route);
    }

    size_t wb = VEER__WIRE_PLAN_WORK_BYTES, tb = (size_t)plan->n * sizeof(qknot);
    void *work = veer__alloc(wb);
    qknot *tmp = veer__alloc(tb);
    if (!work || !tmp) {
        veer__free(work, wb);
        veer__free(tmp, tb);
        return veer__fail_plain(diag, VEER_ERR_NO_MEMORY, "out of memory");
    }
    /* From coarse to fine; level 0 keeps every grid point. */
    static const double levels[] = {6.0, 4.0, 3.0, 2.0, 1.0, 0.5, 0.25, 0.1, 0.0};
    veer_status st = VEER_ERR_STATE;
    veer_wire_figures fig = {0};
    veer_plan *dec = NULL;
    veer_diag d2;
    for (size_t L = 0; L < sizeof levels / sizeof levels[0]; L++) {
        st = write_profile(plan, levels[L], tmp, &m->profile, diag);
        if (st != VEER_OK) break; /* capacity: a finer level only needs more */
        veer__plan_in in;
        veer__wire_plan_in_from_msg(m, &in);
        st = load(&in, work, wb, NULL, &dec, 0, &d2);
        if (st != VEER_OK) {
            if (diag) *diag = d2;
            break;
        }
        veer__wire_compare(plan, dec, samples_for(plan->duration), &fig);
        if (fig.position <= MARGIN * VEER_WIRE_TOL_POSITION && fig.angle <= MARGIN * VEER_WIRE_TOL_ANGLE &&
            fig.limit_excess <= MARGIN * VEER_WIRE_TOL_LIMIT)
            break;
        st = VEER_ERR_STATE;
    }
    if (st == VEER_OK) {
        m->duration = dec->duration;
        m->length = dec->path.length;
    } else if (st == VEER_ERR_STATE) {
        veer__fail(diag, st, -1, -1, -1, -1.0, NONE_ID,
                   "plan: its compact profile does not reproduce it (%.3g m, %.3g rad, %.3g of a limit off)",
                   fig.position, fig.angle, fig.limit_excess);
    }
    veer__free(work, wb);
    veer__free(tmp, tb);
    if (st != VEER_OK) return st;
    uint8_t h[32];
    if ((st = veer__wire_plan_hash(m, h)) != VEER_OK)
        return veer__fail(diag, st, -1, -1, -1, -1.0, NONE_ID, "plan: cannot be encoded");
    memcpy(m->content_hash.bytes, h, 32);
    m->content_hash.size = 32;
    return VEER_OK;
}
