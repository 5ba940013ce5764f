/* The player (cart side): arms plans the link hands over, steps the armed
 * plan at the control rate, stops under control on command, on a local
 * request and when the link goes quiet, and reports its state.
 *
 * Memory: the player struct (with its receiver), one plan workspace
 * (veer_plan_load_pb) and a copy of the armed plan's bytes. Plans are armed
 * only while the cart stands, so a new plan is decoded into the one
 * workspace; if it fails a check, the armed plan is decoded again from its
 * bytes (decoding is deterministic: the same plan, bit for bit), so a plan
 * that fails leaves the armed one as it was, at the price of a second
 * decode. This halves the player's memory against keeping two decoded plans.
 *
 * The controlled stop is veer__stop_step (stop.c), the braking the range
 * checks and veer_plan_stop_sample use: the hardest deceleration the plan's
 * own limits allow at each point, integrated in 1 ms steps.
 * SPDX-License-Identifier: MIT */
#include <stddef.h>
#include <string.h>
#include "link_internal.h"
#include "wire_internal.h"

#define PLAYER_FAIL(diag, status, ...) veer__fail_plain((diag), (status), __VA_ARGS__)

#define STOP_ADVANCE_MAX 0.1 /* s of braking one call advances at most (bounded work) */

struct veer_player {
    size_t memory_size;
    /* Of the definition, what is read after veer_player_init (the link's
     * definition is the receiver's copy, rx->def; the drive and limits live
     * on as their fingerprints). */
    char cart_name[sizeof(((veer_player_def *)0)->cart_name)];
    double link_timeout;
    uint8_t drive_hash[32], limits_hash[32]; /* canonical fingerprints of the cart's drive and limits */
    int module_count;
    int state, stop_reason, last_rejection;
    uint64_t plan_id;          /* armed, running or last plan */
    const veer_plan *plan;     /* in work; NULL before the first */
    veer__plan_cap cap;        /* the largest plan the cart takes */
    unsigned char *work;       /* the plan workspace, work_size bytes */
    size_t work_size;
    uint8_t *armed;            /* [link max_plan_bytes] the bytes plan was decoded from */
    size_t armed_size;
    double last_now;           /* latest time a call saw (the clock must not go back) */
    int seen_time;
    double last_auth;          /* time of the latest authenticated frame */
    double t_start;            /* clock time the plan started */
    /* The controlled stop: state at clock time stop_clock. */
    int seg;
    double s, sdot, sddot, stop_clock, stop_t0, stop_clock0;
    /* The latest output as far as it is read again (the reports, the body
     * at rest: rest_out): a sample's fields up to its pose, laid out as
     * there, and the steer angles; the rest of a sample at rest is zero.
     * A running or braking cart's output is sampled into the caller's out. */
    struct {
        double t;
        int phase, leg;
        double s, sdot, sddot, pose[3];
        double steer[VEER_MAX_MODULES];
    } last;
    uint32_t report_seq;
    veer_link_receiver *rx;    /* in the player's memory, after the armed plan's bytes */
};

/* ---- names -------------------------------------------------------------- */

#define TABLE_LOOKUP(fn, TABLE, field, fallback)        \
    const char *fn(int v) {                             \
        switch (v) {                                    \
            TABLE(field)                                \
        default:                                        \
            return fallback;                            \
        }                                               \
    }
#define NAME_CASE_(name, value, text) \
    case value:                       \
        return #name;
#define TEXT_CASE_(name, value, text) \
    case value:                       \
        return text;
TABLE_LOOKUP(veer_player_state_name, VEER_PLAYER_STATE_TABLE, NAME_CASE_, "UNKNOWN")
TABLE_LOOKUP(veer_player_state_str, VEER_PLAYER_STATE_TABLE, TEXT_CASE_, "unknown state")
TABLE_LOOKUP(veer_stop_reason_name, VEER_STOP_REASON_TABLE, NAME_CASE_, "UNKNOWN")
TABLE_LOOKUP(veer_stop_reason_str, VEER_STOP_REASON_TABLE, TEXT_CASE_, "unknown stop reason")

/* ---- the cart's fingerprint --------------------------------------------- */

/* The fingerprints are SHA-256 over the 8-byte little-endian length and the
 * canonical encoding of the DriveDef and of the Limits message that
 * veer__wire_drive_to_pb and veer__wire_limits_to_pb make. The Limits
 * message (1.2 KB as a nanopb struct) is never built: its fields are written
 * into the hash one module at a time, as nanopb's encoder writes them, so a
 * cart's stack holds one ModuleLimits (144 bytes) instead; the DriveDef
 * (336 bytes) likewise, one ModuleDef at a time. */
typedef bool (*put_config)(pb_ostream_t *o, const veer_drive_def *drive, const veer_limits *limits);

static veer_status hash_config(put_config put, const veer_drive_def *drive, const veer_limits *limits,
                               uint8_t out[32]) {
    pb_ostream_t sz = PB_OSTREAM_SIZING;
    if (!put(&sz, drive, limits)) return VEER_ERR_CAPACITY;
    size_t n = sz.bytes_written;
    veer_sha256 st;
    veer__sha256_init(&st);
    uint8_t len[8];
    for (int i = 0; i < 8; i++) len[i] = (uint8_t)((uint64_t)n >> (8 * i));
    veer__sha256_update(&st, len, sizeof len);
    pb_ostream_t os = veer__wire_hash_stream(&st);
    if (!put(&os, drive, limits)) return VEER_ERR_CAPACITY;
    veer__sha256_final(&st, out);
    return VEER_OK;
}

static bool put_f64(pb_ostream_t *o, uint32_t tag, double v) {
    return pb_encode_tag(o, PB_WT_64BIT, tag) && pb_encode_fixed64(o, &v);
}

/* The DriveDef message of veer__wire_drive_to_pb (wire_request.c), field by
 * field in number order as nanopb's encoder writes it (kind left out when
 * 0, modules_out packed), one ModuleDef at a time. */
static bool put_drive(pb_ostream_t *o, const veer_drive_def *drive, const veer_limits *limits) {
    (void)limits;
    uint32_t kind = (uint32_t)drive->kind;
    if (kind != 0 && !(pb_encode_tag(o, PB_WT_VARINT, veer_v1_DriveDef_kind_tag) && pb_encode_varint(o, kind)))
        return false;
    if (drive->kind == VEER_DRIVE_STEERED || drive->kind == VEER_DRIVE_OMNI) {
        int n = drive->module_count < 0 ? 0 : drive->module_count > VEER_MAX_MODULES ? VEER_MAX_MODULES : drive->module_count;
        for (int i = 0; i < n; i++) {
            veer_v1_ModuleDef m;
            memset(&m, 0, sizeof m);
            m.x = drive->modules[i].x;
            m.y = drive->modules[i].y;
            m.drive_angle = drive->kind == VEER_DRIVE_OMNI ? drive->modules[i].drive_angle : 0.0;
            if (!pb_encode_tag(o, PB_WT_STRING, veer_v1_DriveDef_modules_tag) ||
                !pb_encode_submessage(o, veer_v1_ModuleDef_fields, &m))
                return false;
        }
    }
    if (!put_f64(o, veer_v1_DriveDef_wheel_radius_tag, drive->wheel_radius)) return false;
    if (drive->kind == VEER_DRIVE_MECANUM &&
        !(put_f64(o, veer_v1_DriveDef_half_wheelbase_tag, drive->half_wheelbase) &&
          put_f64(o, veer_v1_DriveDef_half_track_tag, drive->half_track) &&
          put_f64(o, veer_v1_DriveDef_roller_angle_tag, drive->roller_angle)))
        return false;
    if (drive->kind == VEER_DRIVE_DIFFERENTIAL &&
        !(put_f64(o, veer_v1_DriveDef_track_width_tag, drive->track_width) &&
          put_f64(o, veer_v1_DriveDef_skid_factor_tag, drive->skid_factor)))
        return false;
    /* modules_out: the indices (each one byte as a varint) packed in one field */
    uint8_t out[VEER_MAX_MODULES];
    size_t count = 0;
    for (int i = 0; i < VEER_MAX_MODULES && i < veer_drive_module_count(drive); i++)
        if (drive->modules[i].out) out[count++] = (uint8_t)i;
    return count == 0 || (pb_encode_tag(o, PB_WT_STRING, veer_v1_DriveDef_modules_out_tag) &&
                          pb_encode_string(o, out, count));
}

/* Module i's limits as they count: only the limits that apply to the drive
 * kind (steering limits mean nothing to fixed-wheel drives). */
static veer_module_limits counted_module(const veer_drive_def *drive, const veer_limits *limits, int i) {
    veer_module_limits m = limits->modules[i];
    if (drive->kind != VEER_DRIVE_STEERED) {
        veer_module_limits unset = veer__default_module_limits();
        m.steer_rate = unset.steer_rate;
        m.steer_min = unset.steer_min;
        m.steer_max = unset.steer_max;
    }
    return m;
}

/* The Limits message of veer__wire_limits_to_pb (wire_request.c) over the
 * counted module limits, field by field in number order: module_entries
 * ModuleLimits entries (none when every module is unlimited, one when all
 * are alike, else one per module), a limit present when finite. */
static VEER__NOINLINE int module_entries(const veer_drive_def *drive, const veer_limits *limits) {
    int n = veer_drive_module_count(drive);
    if (n < 0) n = 0;
    if (n > VEER_MAX_MODULES) n = VEER_MAX_MODULES;
    veer_module_limits unset = veer__default_module_limits(), first = counted_module(drive, limits, 0);
    int all_same = 1, any = 0;
    for (int i = 0; i < n; i++) {
        veer_module_limits m = counted_module(drive, limits, i);
        if (memcmp(&m, &first, sizeof m) != 0) all_same = 0;
        if (memcmp(&m, &unset, sizeof m) != 0) any = 1;
    }
    return any ? (all_same ? 1 : n) : 0;
}

static bool put_limits(pb_ostream_t *o, const veer_drive_def *drive, const veer_limits *limits) {
    int entries = module_entries(drive, limits);
    for (int i = 0; i < entries; i++) {
        veer_module_limits l = counted_module(drive, limits, i);
        veer_v1_ModuleLimits m;
        veer__wire_module_limits_to_pb(&l, &m);
        if (!pb_encode_tag(o, PB_WT_STRING, veer_v1_Limits_modules_tag) ||
            !pb_encode_submessage(o, veer_v1_ModuleLimits_fields, &m))
            return false;
    }
#define BODY_LIMIT_(f) \
    (!isfinite(limits->f) || (pb_encode_tag(o, PB_WT_64BIT, veer_v1_Limits_##f##_tag) && pb_encode_fixed64(o, &limits->f)))
    return BODY_LIMIT_(body_speed) && BODY_LIMIT_(body_accel) && BODY_LIMIT_(yaw_rate) && BODY_LIMIT_(yaw_accel) &&
           BODY_LIMIT_(body_jerk);
#undef BODY_LIMIT_
}

/* SHA-256 of the canonical DriveDef and of the canonical Limits. */
static veer_status config_hashes(const veer_drive_def *drive, const veer_limits *limits, uint8_t dh[32],
                                 uint8_t lh[32]) {
    veer_status st = hash_config(put_drive, drive, limits, dh);
    return st != VEER_OK ? st : hash_config(put_limits, drive, limits, lh);
}

/* ---- set-up ------------------------------------------------------------- */

veer_player_def veer_default_player_def(void) {
    veer_player_def d;
    memset(&d, 0, sizeof d);
    d.link = veer_default_link_def();
    d.drive = veer_default_drive_def(VEER_DRIVE_STEERED);
    d.limits = veer_default_limits();
    d.link_timeout = 1.0;
    return d;
}

/* The decoded-plan capacity of def (0 when a capacity is out of range). */
static int plan_cap(const veer_player_def *def, veer__plan_cap *cap) {
    int modules = veer_drive_module_count(&def->drive);
    if (modules <= 0 || def->max_knots > VEER_WIRE_MAX_KNOTS || def->max_waypoints > VEER_MAX_WAYPOINTS ||
        def->max_legs > VEER_MAX_LEGS)
        return 0;
    cap->modules = modules;
    cap->knots = def->max_knots ? (int)def->max_knots : VEER_WIRE_MAX_KNOTS;
    cap->waypoints = def->max_waypoints ? (int)def->max_waypoints : VEER_MAX_WAYPOINTS;
    cap->legs = def->max_legs ? (int)def->max_legs : VEER_MAX_LEGS;
    cap->route = 0; /* the player never encodes its plan: the route is rebuilt in scratch and dropped */
    cap->steered = def->drive.kind == VEER_DRIVE_STEERED; /* fixed wheels: no steer angles at the knots */
    return 1;
}

/* The player's memory: the struct, the plan workspace, the armed plan's
 * bytes, the receiver. */
static size_t layout(const veer_player_def *def, const veer__plan_cap *cap, size_t *work, size_t *armed) {
    *work = VEER__ALIGN16(veer__wire_work_bytes_for(cap));
    *armed = VEER__ALIGN16(veer__link_max_plan(&def->link));
    return VEER__ALIGN16(sizeof(veer_player)) + *work + *armed + veer_link_receiver_size_for(&def->link);
}

size_t veer_player_size_for(const veer_player_def *def) {
    veer__plan_cap cap;
    size_t work, armed;
    if (!def || !plan_cap(def, &cap) || !veer__link_max_plan_ok(def->link.max_plan_bytes)) return 0;
    return layout(def, &cap, &work, &armed);
}

size_t veer_player_size(void) {
    veer_player_def d = veer_default_player_def();
    d.drive.module_count = VEER_MAX_MODULES;
    return veer_player_size_for(&d);
}

#define LAST_HEAD offsetof(veer_sample, twist_world) /* bytes of a sample that last keeps as they are */
_Static_assert(offsetof(veer_player, last.pose) - offsetof(veer_player, last) == offsetof(veer_sample, pose) &&
                   offsetof(veer_player, last.steer) - offsetof(veer_player, last) == LAST_HEAD,
               "last is laid out as a sample's head");

/* Keeps sample o (finite) as the latest output; rest: the body stands
 * there. */
static void hold(veer_player *p, const veer_sample *o, int rest) {
    memcpy(&p->last, o, LAST_HEAD);
    if (rest) p->last.sdot = 0.0;
    for (int i = 0; i < p->module_count; i++) p->last.steer[i] = o->modules[i].steer;
}

/* The body at rest where the latest output left it: its pose, zero rates,
 * steer angles held. */
static void rest_out(const veer_player *p, veer_sample *o) {
    memset(o, 0, sizeof *o);
    memcpy(o, &p->last, LAST_HEAD);
    o->phase = VEER_PHASE_DONE;
    o->sdot = o->sddot = 0.0;
    o->module_count = p->module_count;
    for (int i = 0; i < p->module_count; i++) o->modules[i].steer = p->last.steer[i];
}

veer_status veer_player_init(void *memory, size_t size, const veer_player_def *def, veer_player **out,
                             veer_diag *diag) {
    if (!out) return PLAYER_FAIL(diag, VEER_ERR_NULL, "out is NULL");
    *out = NULL;
    if (!memory || !def) return PLAYER_FAIL(diag, VEER_ERR_NULL, "%s is NULL", !memory ? "memory" : "def");
    veer_status st;
    if ((st = veer_link_def_check(&def->link, diag))) return st;
    if ((st = veer_drive_check(&def->drive, diag))) return st;
    veer__plan_cap cap;
    if (!plan_cap(def, &cap))
        return PLAYER_FAIL(diag, VEER_ERR_VALUE,
                           "capacity: max_knots %u, max_waypoints %u, max_legs %u: at most %d, %d, %d (0: the most)",
                           (unsigned)def->max_knots, (unsigned)def->max_waypoints, (unsigned)def->max_legs,
                           VEER_WIRE_MAX_KNOTS, VEER_MAX_WAYPOINTS, VEER_MAX_LEGS);
    size_t work_size, armed_size, need = layout(def, &cap, &work_size, &armed_size);
    if (size < need || ((uintptr_t)memory % sizeof(double)) != 0)
        return PLAYER_FAIL(diag, VEER_ERR_VALUE, "player memory: needs %zu bytes aligned for double "
                                                 "(veer_player_size_for())",
                           need);
    if ((st = veer__limits_check(&def->drive, &def->limits, diag))) return st;
    if (!memchr(def->cart_name, 0, sizeof def->cart_name) || !veer__wire_utf8_ok(def->cart_name))
        return PLAYER_FAIL(diag, VEER_ERR_VALUE, "cart_name must be UTF-8 of at most %zu bytes",
                           sizeof def->cart_name - 1);
    if (!(def->link_timeout >= 0.05 && def->link_timeout <= 60.0))
        return PLAYER_FAIL(diag, VEER_ERR_VALUE, "link_timeout %g s is outside 0.05..60 s", def->link_timeout);
    uint8_t dh[32], lh[32];
    if ((st = config_hashes(&def->drive, &def->limits, dh, lh)))
        return PLAYER_FAIL(diag, st, "the cart's drive and limits do not encode");
    veer_player *p = memory;
    memset(p, 0, sizeof *p);
    p->memory_size = size;
    p->cap = cap;
    memcpy(p->cart_name, def->cart_name, sizeof p->cart_name);
    p->link_timeout = def->link_timeout;
    memcpy(p->drive_hash, dh, 32);
    memcpy(p->limits_hash, lh, 32);
    p->module_count = veer_drive_module_count(&def->drive);
    p->state = VEER_PLAYER_IDLE;
    p->stop_reason = VEER_STOP_NONE;
    p->last_rejection = VEER_LINK_NONE;
    unsigned char *base = (unsigned char *)memory + VEER__ALIGN16(sizeof(veer_player));
    p->work = base;
    p->work_size = work_size;
    p->armed = base + work_size;
    p->rx = (veer_link_receiver *)(p->armed + armed_size);
    p->last.leg = -1; /* the rest of last zero */
    veer__link_receiver_setup(p->rx, &def->link, def->accepted_plan_id, def->command_seq);
    *out = p;
    veer__diag_ok(diag);
    return VEER_OK;
}

/* ---- time and the sample ------------------------------------------------ */

static int time_ok(const veer_player *p, double now) { return isfinite(now) && (!p->seen_time || now >= p->last_now); }

static void saw(veer_player *p, double now) {
    p->last_now = now;
    p->seen_time = 1;
}

static int sample_finite(const veer_sample *o) {
    double acc = o->t + o->s + o->sdot + o->sddot;
    for (int k = 0; k < 3; k++)
        acc += o->pose[k] + o->twist_world[k] + o->twist_body[k] + o->accel_world[k] + o->accel_body[k];
    for (int i = 0; i < o->module_count; i++)
        acc += o->modules[i].steer + o->modules[i].steer_rate + o->modules[i].wheel_rate + o->modules[i].wheel_accel;
    return isfinite(acc);
}

static void fault(veer_player *p) {
    p->state = VEER_PLAYER_FAULT;
    p->stop_reason = VEER_STOP_FAULT;
    p->last.sdot = 0.0; /* at rest where the last good output was */
}

/* ---- stopping ----------------------------------------------------------- */

/* Stops at clock time T (>= the plan's start): brakes along the path from
 * the plan's state at T, or stands at once if the body already stands.
 * Scratch: room for a sample (what it leaves there is not read). */
static void begin_stop(veer_player *p, double T, int reason, veer_sample *scratch) {
    double tp = T - p->t_start;
    if (tp < 0.0) tp = 0.0;
    if (tp > p->plan->duration) tp = p->plan->duration;
    int seg;
    double s, v, u;
    int phase = veer__plan_state(p->plan, tp, &seg, &s, &v, &u);
    p->stop_reason = reason;
    if (phase == VEER_PHASE_MOVING && v > 0.0) {
        p->state = VEER_PLAYER_STOPPING;
        p->seg = seg;
        p->s = s;
        p->sdot = v;
        p->sddot = u;
        p->stop_clock = p->stop_clock0 = T;
        p->stop_t0 = tp;
        return;
    }
    /* Standing (re-steer phase, dwell, end): hold the modules where they are. */
    if (veer_plan_sample(p->plan, tp, scratch) != VEER_OK || !sample_finite(scratch)) {
        fault(p);
        return;
    }
    hold(p, scratch, 1);
    p->state = VEER_PLAYER_STOPPED;
}

/* Advances a controlled stop to clock time now (bounded) and samples it
 * into out: 1 while the body still moves (out is the output), else 0. */
static int advance_stop(veer_player *p, double now, veer_sample *out) {
    double dt = now - p->stop_clock;
    if (dt > STOP_ADVANCE_MAX) dt = STOP_ADVANCE_MAX;
    int moving = dt > 0.0 ? veer__stop_step(p->plan, p->seg, &p->s, &p->sdot, &p->sddot, dt) : p->sdot > 0.0;
    p->stop_clock = now;
    memset(out, 0, sizeof *out);
    veer__sample_state(p->plan, p->seg, p->s, p->sdot, moving ? p->sddot : 0.0, out);
    out->t = p->stop_t0 + (now - p->stop_clock0);
    out->phase = moving ? VEER_PHASE_MOVING : VEER_PHASE_DONE;
    if (!sample_finite(out)) {
        fault(p);
        return 0;
    }
    hold(p, out, !moving);
    if (!moving) p->state = VEER_PLAYER_STOPPED;
    return moving;
}

/* Ends a run whose plan time reached the duration (scratch as begin_stop). */
static void end_of_plan(veer_player *p, veer_sample *scratch) {
    if (veer_plan_sample(p->plan, p->plan->duration, scratch) != VEER_OK || !sample_finite(scratch)) {
        fault(p);
        return;
    }
    hold(p, scratch, 1);
    p->state = VEER_PLAYER_STOPPED;
    p->stop_reason = VEER_STOP_END_OF_PLAN;
}

/* The link watchdog: a running cart that heard nothing authentic for
 * link_timeout stops, braking from the moment the timeout ran out
 * (scratch as begin_stop). */
static int watchdog(veer_player *p, double now, veer_sample *scratch) {
    if (p->state != VEER_PLAYER_RUNNING) return 0;
    double deadline = p->last_auth + p->link_timeout;
    if (!(now > deadline)) return 0;
    if (deadline - p->t_start >= p->plan->duration) { /* the plan had ended first */
        end_of_plan(p, scratch);
        return 0;
    }
    begin_stop(p, deadline > p->last.t + p->t_start ? deadline : p->last.t + p->t_start, VEER_STOP_LINK_LOST,
               scratch);
    return 1;
}

/* For a frame, which has no sample to lend: the watchdog at now (reason
 * VEER_STOP_NONE; 1 if it stopped the cart) or a stop for reason at now.
 * The scratch on a frame of its own, not on the stack while a frame arms
 * a plan. */
static VEER__NOINLINE int frame_stop(veer_player *p, double now, int reason) {
    veer_sample o;
    if (reason == VEER_STOP_NONE) return watchdog(p, now, &o);
    begin_stop(p, now, reason, &o);
    return 1;
}

/* ---- arming ------------------------------------------------------------- */

/* The cart name a Plan message carries (field 11), or "" if none. */
static int plan_names_other_cart(const uint8_t *bytes, size_t size, const char *name) {
    if (!name[0]) return 0;
    pb_istream_t in = pb_istream_from_buffer(bytes, size);
    uint32_t tag;
    pb_wire_type_t wt;
    bool eof;
    size_t found = 0;
    const uint8_t *text = NULL;
    while (pb_decode_tag(&in, &wt, &tag, &eof)) {
        if (tag == veer_v1_Plan_cart_id_tag && wt == PB_WT_STRING) {
            uint32_t n;
            if (!pb_decode_varint32(&in, &n) || n > in.bytes_left) return 1;
            text = bytes + (size - in.bytes_left);
            found = n;
            if (!pb_read(&in, NULL, n)) return 1;
        } else if (!pb_skip_field(&in, wt)) {
            return 1;
        }
    }
    if (!text || found == 0) return 0; /* an unnamed plan: the tag and cart number bind it */
    return found != strlen(name) || memcmp(text, name, found) != 0;
}

/* A decoded plan against the cart: its cart name, drive and limits (the
 * arming verdict). A function of its own, kept out of load's frame: its
 * locals are not on the stack while a plan is decoded. */
static VEER__NOINLINE int check_plan(const veer_player *p, const uint8_t *bytes, size_t size, const veer_plan *plan) {
    if (plan_names_other_cart(bytes, size, p->cart_name)) return VEER_LINK_CART_NAME;
    uint8_t dh[32], lh[32];
    if (config_hashes(&plan->drive, &plan->limits, dh, lh) != VEER_OK) return VEER_LINK_DECODE;
    if (memcmp(dh, p->drive_hash, 32) != 0) return VEER_LINK_DRIVE;
    if (memcmp(lh, p->limits_hash, 32) != 0) return VEER_LINK_LIMITS;
    return VEER_LINK_NONE;
}

/* Decodes bytes into the workspace and checks them against the cart: the
 * arming verdict; *out is the plan when it is VEER_LINK_NONE, else NULL. */
static int load(veer_player *p, const uint8_t *bytes, size_t size, const veer_plan **out) {
    const veer_plan *plan = NULL;
    *out = NULL;
    veer_status st = veer__wire_load_pb_cap(bytes, size, p->work, p->work_size, &p->cap, &plan, NULL);
    if (st == VEER_ERR_CAPACITY) return VEER_LINK_CAPACITY;
    if (st != VEER_OK || !plan) return VEER_LINK_DECODE;
    int verdict = check_plan(p, bytes, size, plan);
    if (verdict == VEER_LINK_NONE) *out = plan;
    return verdict;
}

/* Reports the armed plan's start; the modules stay where they are until
 * START. A function of its own, kept out of arm's frame: its sample (424
 * bytes) is not on the stack while a plan is decoded. */
static VEER__NOINLINE void show_start(veer_player *p) {
    veer_sample o;
    if (veer_plan_sample(p->plan, 0.0, &o) == VEER_OK && sample_finite(&o)) {
        for (int i = 0; i < p->module_count; i++) o.modules[i].steer = p->last.steer[i];
        hold(p, &o, 1);
        p->last.t = 0.0;
    }
}

static int arm(veer_player *p, double now) {
    const uint8_t *bytes;
    size_t size;
    uint64_t id;
    if (veer_link_receiver_plan(p->rx, &bytes, &size, &id) != VEER_OK) return VEER_LINK_STATE;
    if (p->state == VEER_PLAYER_RUNNING || p->state == VEER_PLAYER_STOPPING) return VEER_LINK_BUSY;
    if (p->state == VEER_PLAYER_FAULT) return VEER_LINK_STATE;
    if (size > veer__link_max_plan(&p->rx->def)) return VEER_LINK_CAPACITY; /* the receiver takes no larger plan */
    const veer_plan *plan;
    int verdict = load(p, bytes, size, &plan);
    if (verdict != VEER_LINK_NONE) {
        /* The workspace held the armed (or last) plan: decode it again. It
         * passed every check before, so this cannot fail; if it did, the
         * player would hold no plan rather than a broken one. */
        if (p->plan && load(p, p->armed, p->armed_size, &p->plan) != VEER_LINK_NONE) fault(p);
        return verdict;
    }
    memcpy(p->armed, bytes, size);
    p->armed_size = size;
    /* Every check passed: switch. */
    p->plan = plan;
    p->plan_id = id;
    p->state = VEER_PLAYER_ARMED;
    p->last_auth = now;
    show_start(p);
    return VEER_LINK_NONE;
}

/* ---- frames ------------------------------------------------------------- */

static int command(veer_player *p, int kind, uint64_t plan_id, double now, veer_player_event *ev) {
    p->last_auth = now;
    ev->report_due = 1;
    switch (kind) {
    case VEER_LINK_COMMAND_HEARTBEAT:
        return VEER_LINK_NONE;
    case VEER_LINK_COMMAND_START:
        if (p->state != VEER_PLAYER_ARMED) return VEER_LINK_STATE;
        if (plan_id != p->plan_id) return VEER_LINK_NOT_ARMED;
        p->state = VEER_PLAYER_RUNNING;
        p->t_start = now;
        p->stop_reason = VEER_STOP_NONE;
        ev->started = 1;
        return VEER_LINK_NONE;
    case VEER_LINK_COMMAND_STOP:
        if (p->state == VEER_PLAYER_RUNNING) {
            frame_stop(p, now, VEER_STOP_COMMAND);
            ev->stopped = 1;
        } else if (p->state == VEER_PLAYER_ARMED) { /* the armed plan is dropped: it can never start */
            p->state = VEER_PLAYER_STOPPED;
            p->stop_reason = VEER_STOP_COMMAND;
            ev->stopped = 1;
        }
        return VEER_LINK_NONE;
    default:
        return VEER_LINK_COMMAND;
    }
}

veer_status veer_player_frame(veer_player *p, const uint8_t *frame, size_t size, double now,
                              veer_player_event *ev) {
    if (!p || !ev) return VEER_ERR_NULL;
    if (!time_ok(p, now)) return VEER_ERR_VALUE;
    saw(p, now);
    veer_player_event e;
    memset(&e, 0, sizeof e);
    if (frame_stop(p, now, VEER_STOP_NONE)) e.stopped = 1;
    veer_status st = veer_link_receive(p->rx, frame, size, &e.link);
    if (st != VEER_OK) return st; /* cannot happen: every ready plan is settled below */
    e.reason = e.link.reason;
    if (e.link.plan_ready) {
        int verdict = arm(p, now);
        st = veer_link_receiver_settle(p->rx, verdict);
        (void)st; /* the plan is ready and the verdict a valid reason */
        e.reason = verdict;
        e.armed = verdict == VEER_LINK_NONE;
        e.report_due = 1;
    }
    if (e.link.command) e.reason = command(p, e.link.command, e.link.plan_id, now, &e);
    if (e.reason != VEER_LINK_NONE && e.reason != VEER_LINK_DUPLICATE) p->last_rejection = e.reason;
    *ev = e;
    return VEER_OK;
}

/* ---- stepping ----------------------------------------------------------- */

veer_status veer_player_step(veer_player *p, double now, veer_sample *out) {
    if (!p || !out) return VEER_ERR_NULL;
    if (!time_ok(p, now)) return VEER_ERR_VALUE;
    saw(p, now);
    watchdog(p, now, out);
    if (p->state == VEER_PLAYER_RUNNING) {
        double tp = now - p->t_start;
        if (tp >= p->plan->duration) {
            end_of_plan(p, out);
        } else if (veer_plan_sample(p->plan, tp, out) != VEER_OK || !sample_finite(out)) {
            fault(p);
        } else {
            hold(p, out, 0);
            return VEER_OK;
        }
    } else if (p->state == VEER_PLAYER_STOPPING && advance_stop(p, now, out)) {
        return VEER_OK;
    }
    rest_out(p, out); /* at rest: the last good output, standing */
    return VEER_OK;
}

veer_status veer_player_stop(veer_player *p, double now) {
    if (!p) return VEER_ERR_NULL;
    if (!time_ok(p, now)) return VEER_ERR_VALUE;
    saw(p, now);
    veer_sample o; /* scratch */
    if (watchdog(p, now, &o)) return VEER_OK;
    if (p->state == VEER_PLAYER_RUNNING) {
        begin_stop(p, now, VEER_STOP_LOCAL, &o);
    } else if (p->state == VEER_PLAYER_ARMED) {
        p->state = VEER_PLAYER_STOPPED;
        p->stop_reason = VEER_STOP_LOCAL;
    }
    return VEER_OK;
}

/* ---- reports ------------------------------------------------------------ */

veer_status veer_player_status(const veer_player *p, veer_link_report *out) {
    if (!p || !out) return VEER_ERR_NULL;
    veer_link_report r;
    memset(&r, 0, sizeof r);
    r.state = p->state;
    r.plan_id = p->plan_id;
    r.t = p->last.t;
    r.s = p->last.s;
    r.sdot = p->last.sdot;
    r.leg = p->plan ? p->last.leg : -1;
    r.stop_reason = p->stop_reason;
    r.last_rejection = p->last_rejection;
    r.accepted_plan_id = p->rx->accepted;
    r.command_seq = p->rx->command_seq;
    for (int k = 0; k < 3; k++) r.pose[k] = p->last.pose[k];
    r.report_seq = p->report_seq;
    *out = r;
    return VEER_OK;
}

veer_status veer_player_report_frame(veer_player *p, uint8_t *out, size_t capacity, size_t *size) {
    if (!p || !size) return VEER_ERR_NULL;
    veer_link_report r;
    veer_status st = veer_player_status(p, &r);
    if (st != VEER_OK) return st;
    r.report_seq = p->report_seq + 1;
    st = veer__link_report_frame(&p->rx->def, &r, out, capacity, size);
    if (st == VEER_OK) p->report_seq++;
    return st;
}

veer_status veer_player_report_pb(const veer_player *p, uint8_t *out, size_t capacity, size_t *size) {
    if (!p || !size) return VEER_ERR_NULL;
    veer_link_report r;
    veer_status st = veer_player_status(p, &r);
    if (st != VEER_OK) return st;
    veer_v1_PlayerReport m;
    veer__link_report_to_pb(&r, &m);
    return veer__wire_encode(veer_v1_PlayerReport_fields, &m, out, capacity, size, NULL);
}

veer_status veer_player_gap_frame(const veer_player *p, uint8_t *out, size_t capacity, size_t *size) {
    if (!p) return VEER_ERR_NULL;
    return veer_link_gap_frame(p->rx, out, capacity, size);
}

const veer_plan *veer_player_plan(const veer_player *p) { return p ? p->plan : NULL; }
const veer_link_receiver *veer_player_receiver(const veer_player *p) { return p ? p->rx : NULL; }
