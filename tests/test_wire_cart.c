/* The cart's reader of Plan bytes (src/wire_cart.c, veer__wire_load_pb_cap)
 * against the decoded-message path (veer__wire_decode into a veer_v1_Plan,
 * then veer__wire_plan_load): bit-identical plans for the demo and random
 * carts and routes (random_case.h: every drive kind, jerk limits, plans made
 * on the move), the same verdict for every truncation and many single-byte
 * changes, the same acceptance of re-phrased but equivalent bytes (fields in
 * another order, unknown fields, repeated fields: protobuf's rules), a clear
 * refusal of what the reader does not take, and the workspace it needs.
 * The scenarios are invented test data. */
#include <criterion/criterion.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "wire_internal.h"
#include "diag_text.h"
#include "random_case.h"
#include "kestrel_demo.h"

/* ---- the two paths ------------------------------------------------------- */

typedef struct {
    uint8_t *bytes;
    size_t size;
} blob;

static size_t work_size(void) { return VEER__WIRE_WORK_BYTES; }

/* Decoded-message path, as veer_plan_load_pb was: the whole veer_v1_Plan, then the rebuild. */
static veer_status full_load(const uint8_t *b, size_t n, const veer__plan_cap *cap, void *work, const veer_plan **out,
                             veer_diag *d) {
    veer_v1_Plan *m = calloc(1, sizeof *m);
    veer_plan *p = NULL;
    *out = NULL;
    veer_status st = veer__wire_decode(veer_v1_Plan_fields, m, b, n, "plan", d);
    if (st == VEER_OK) st = veer__wire_plan_load(m, work, VEER__WIRE_PLAN_WORK_BYTES, cap, &p, d);
    free(m); /* the plan keeps nothing of the message */
    *out = p;
    return st;
}

static veer_status cart_load(const uint8_t *b, size_t n, const veer__plan_cap *cap, void *work, const veer_plan **out,
                             veer_diag *d) {
    veer__plan_cap max = veer__plan_cap_max();
    return veer__wire_load_pb_cap(b, n, work, veer__wire_work_bytes_for(cap ? cap : &max), cap, out, d);
}

/* Bit-identical plans: the same duration, legs, grid and samples every 5 ms. */
static void same_plan(const veer_plan *a, const veer_plan *b, const char *what) {
    cr_assert(a && b, "%s", what);
    cr_assert(memcmp(&(double){veer_plan_duration(a)}, &(double){veer_plan_duration(b)}, sizeof(double)) == 0,
              "%s: durations %.17g and %.17g", what, veer_plan_duration(a), veer_plan_duration(b));
    cr_assert_eq(veer_plan_leg_count(a), veer_plan_leg_count(b), "%s", what);
    cr_assert_eq(veer_plan_grid_count(a), veer_plan_grid_count(b), "%s", what);
    for (int k = 0; k < veer_plan_grid_count(a); k++) {
        double s1, v1, s2, v2;
        veer_limit_id i1, i2;
        cr_assert_eq(veer_plan_grid(a, k, &s1, &v1, &i1), VEER_OK);
        cr_assert_eq(veer_plan_grid(b, k, &s2, &v2, &i2), VEER_OK);
        cr_assert(memcmp(&s1, &s2, sizeof s1) == 0 && memcmp(&v1, &v2, sizeof v1) == 0, "%s: grid point %d", what,
                  k);
    }
    double T = veer_plan_duration(a);
    for (int q = 0;; q++) {
        double t = fmin(0.005 * q, T);
        veer_sample x, y;
        memset(&x, 0, sizeof x), memset(&y, 0, sizeof y);
        cr_assert_eq(veer_plan_sample(a, t, &x), VEER_OK);
        cr_assert_eq(veer_plan_sample(b, t, &y), VEER_OK);
        cr_assert(memcmp(&x, &y, sizeof x) == 0, "%s: samples differ at t = %.17g", what, t);
        if (t >= T) break;
    }
}

/* Loads b both ways; the verdicts must agree (both OK or both refused, with a message) and an
 * accepted plan must be the same. Returns the cart path's status; *full_st the other's. */
static veer_status both(const uint8_t *b, size_t n, const veer__plan_cap *cap, void *w1, void *w2,
                        veer_status *full_st, const char *what) {
    const veer_plan *p1 = NULL, *p2 = NULL;
    veer_diag d1, d2;
    veer_status s1 = full_load(b, n, cap, w1, &p1, &d1);
    veer_status s2 = cart_load(b, n, cap, w2, &p2, &d2);
    cr_assert_eq(s1 == VEER_OK, s2 == VEER_OK, "%s: decoded message %s (%s), cart reader %s (%s)", what,
                 veer_status_name(s1), d1.message, veer_status_name(s2), d2.message);
    if (s2 != VEER_OK) {
        cr_assert_null(p2, "%s", what);
        cr_assert(d2.status == s2 && d2.message[0] != 0, "%s: refused without a message", what);
    } else {
        same_plan(p1, p2, what);
    }
    if (full_st) *full_st = s1;
    return s2;
}

static blob encode(const veer_plan *p) {
    blob b = {malloc(veer_v1_Plan_size), 0};
    veer_diag d;
    cr_assert_eq(veer_plan_encode_pb(p, b.bytes, veer_v1_Plan_size, &b.size, &d), VEER_OK, "%s", d.message);
    return b;
}

/* Plans the route (it must plan) and encodes it. */
static blob planned(const veer_drive_def *dr, const veer_limits *l, const veer_route *r) {
    veer_plan *p = NULL;
    veer_diag d;
    cr_assert_eq(veer_plan_create(dr, l, r, NULL, &p, &d), VEER_OK, "%s", d.message);
    blob b = encode(p);
    veer_plan_destroy(p);
    return b;
}

static blob demo_bytes(void) {
    veer_drive_def dr;
    veer_limits l;
    veer_route r;
    cr_assert_eq(kestrel_demo(&dr, &l, &r), VEER_OK);
    return planned(&dr, &l, &r);
}

/* A random case of random_case.h that plans; 0 if the planner refused it (a named refusal). */
static int case_bytes(veer_drive_kind kind, uint64_t seed, blob *out, case_def *c) {
    rng r = {seed};
    random_cart(&r, kind, c);
    cr_assert(random_route(&r, c));
    veer_plan *p = NULL;
    veer_diag d;
    if (veer_plan_create(&c->drive, &c->limits, &c->route, &c->options, &p, &d) != VEER_OK) return 0;
    veer_status st = veer_plan_encode_pb(p, NULL, 0, &out->size, &d);
    if (st != VEER_ERR_BUFFER) { /* a plan over the message's capacity: a named refusal */
        veer_plan_destroy(p);
        return 0;
    }
    *out = encode(p);
    veer_plan_destroy(p);
    return 1;
}

/* A jerk-limited plan (mecanum, so jerk windows on every segment), optionally on the move. */
static blob jerk_bytes(int moving) {
    veer_drive_def dr = veer_default_drive_def(VEER_DRIVE_MECANUM);
    veer_limits l = veer_default_limits();
    l.body_jerk = 4.0, l.body_accel = 1.0, l.body_speed = 1.5;
    veer_route r = veer_default_route(0.0, 0.0, 0.0);
    veer_leg tr = veer_default_leg(VEER_LEG_TRAVEL);
    cr_assert_eq(veer_route_add_leg(&r, &tr), VEER_OK);
    veer_waypoint a = veer_default_waypoint(4.0, 0.0), b = veer_default_waypoint(4.0, 3.0);
    a.stop = 1;
    cr_assert_eq(veer_route_add_waypoint(&r, &a), VEER_OK);
    cr_assert_eq(veer_route_add_waypoint(&r, &b), VEER_OK);
    if (moving) {
        r.has_start_twist = 1;
        r.start_twist[0] = 0.5;
    }
    return planned(&dr, &l, &r);
}

/* ---- top-level fields, for re-phrasing a plan ---------------------------- */

typedef struct {
    size_t at, end; /* bytes of the whole field, tag included */
    uint32_t tag;
    size_t body;    /* where a length-delimited field's contents start */
} field;

static int fields_of(const uint8_t *b, size_t n, field *f, int cap) {
    pb_istream_t s = pb_istream_from_buffer(b, n);
    int k = 0;
    while (s.bytes_left) {
        pb_wire_type_t wt;
        uint32_t tag;
        bool eof;
        size_t at = n - s.bytes_left;
        cr_assert(pb_decode_tag(&s, &wt, &tag, &eof) && k < cap);
        size_t body = 0;
        if (wt == PB_WT_STRING) {
            pb_istream_t t = s;
            uint32_t len;
            cr_assert(pb_decode_varint32(&t, &len));
            body = n - t.bytes_left;
        }
        cr_assert(pb_skip_field(&s, wt));
        f[k++] = (field){at, n - s.bytes_left, tag, body};
    }
    return k;
}

static size_t put(uint8_t *o, const uint8_t *src, size_t n) {
    memcpy(o, src, n);
    return n;
}

static size_t put_varint(uint8_t *o, uint64_t v) {
    size_t k = 0;
    do {
        o[k] = (uint8_t)(v & 0x7f);
        v >>= 7;
        if (v) o[k] |= 0x80;
        k++;
    } while (v);
    return k;
}

/* ---- tests ---------------------------------------------------------------- */

Test(wire_cart, plans_are_bit_identical_to_the_decoded_message_path, .timeout = 600) {
    void *w1 = aligned_alloc(16, work_size()), *w2 = aligned_alloc(16, work_size());
    char what[96];
    blob b = demo_bytes();
    veer_status fs;
    cr_assert_eq(both(b.bytes, b.size, NULL, w1, w2, &fs, "demo"), VEER_OK);
    free(b.bytes);
    for (int moving = 0; moving < 2; moving++) {
        b = jerk_bytes(moving);
        snprintf(what, sizeof what, "jerk-limited%s", moving ? " on the move" : "");
        cr_assert_eq(both(b.bytes, b.size, NULL, w1, w2, &fs, what), VEER_OK);
        free(b.bytes);
    }
    static const veer_drive_kind kinds[] = {VEER_DRIVE_STEERED, VEER_DRIVE_MECANUM, VEER_DRIVE_OMNI,
                                            VEER_DRIVE_DIFFERENTIAL};
    int planned = 0, moving = 0, jerk = 0;
    for (int pass = 0; pass < 2; pass++) {
        force_moving_jerk = pass; /* the second pass: jerk limits, on the move */
        for (size_t k = 0; k < 4; k++)
            for (uint64_t i = 0; i < 4; i++) {
                case_def c;
                memset(&c, 0, sizeof c); /* random_route sets moving only when it is */
                uint64_t seed = 0x5eed0000u + 97u * i + 13u * k + 1000u * (uint64_t)pass;
                if (!case_bytes(kinds[k], seed, &b, &c)) continue;
                planned++, moving += c.moving, jerk += c.jerk;
                snprintf(what, sizeof what, "kind %d seed %#llx", (int)kinds[k], (unsigned long long)seed);
                cr_assert_eq(both(b.bytes, b.size, NULL, w1, w2, &fs, what), VEER_OK);
                /* on a cart sized for exactly this plan, too */
                veer_plan_needs need;
                veer_diag d;
                cr_assert_eq(veer_plan_needs_pb(b.bytes, b.size, &need, &d), VEER_OK);
                veer__plan_cap cap = {(int)need.knots, (int)need.waypoints, (int)need.legs, (int)need.modules, 0, 1};
                cr_assert_eq(both(b.bytes, b.size, &cap, w1, w2, &fs, what), VEER_OK);
                cap.knots--;
                cr_assert_eq(both(b.bytes, b.size, &cap, w1, w2, &fs, what), VEER_ERR_CAPACITY);
                cr_assert_eq(fs, VEER_ERR_CAPACITY);
                free(b.bytes);
            }
    }
    force_moving_jerk = 0;
    cr_log_info("wire_cart: %d random plans (%d on the move, %d jerk-limited) bit-identical", planned, moving, jerk);
    cr_assert(planned >= 20 && moving >= 4 && jerk >= 4, "%d plans, %d moving, %d jerk", planned, moving, jerk);
    free(w1);
    free(w2);
}

/* Every cut and many single-byte changes: the same verdict on both paths. */
static void damage(const blob *b, int *mismatch, int *accepted) {
    void *w1 = aligned_alloc(16, work_size()), *w2 = aligned_alloc(16, work_size());
    uint8_t *m = malloc(b->size);
    char what[80];
    for (size_t n = 0; n < b->size; n++) {
        snprintf(what, sizeof what, "cut to %zu of %zu bytes", n, b->size);
        veer_status fs, cs = both(b->bytes, n, NULL, w1, w2, &fs, what);
        cr_assert_neq(cs, VEER_OK, "%s", what);
        *mismatch += cs != fs;
    }
    static const uint8_t flips[] = {0x01, 0x02, 0x08, 0x40, 0x80, 0xff};
    for (size_t i = 0; i < b->size; i++)
        for (int v = 0; v < 8; v++) {
            memcpy(m, b->bytes, b->size);
            if (v < 6) m[i] ^= flips[v];
            else m[i] = v == 6 ? 0 : (uint8_t)(m[i] + 1);
            if (m[i] == b->bytes[i]) continue;
            snprintf(what, sizeof what, "byte %zu changed to %#x", i, m[i]);
            veer_status fs, cs = both(m, b->size, NULL, w1, w2, &fs, what);
            if (cs != fs) {
                /* jerk_window's tag made unpacked: the reader refuses the pieces (DECODE), the decoder
                 * takes them and refuses the values (VALUE) */
                cr_log_info("%s: cart reader %s, decoder %s", what, veer_status_name(cs), veer_status_name(fs));
                cr_assert(cs == VEER_ERR_DECODE && fs == VEER_ERR_VALUE, "%s", what);
            }
            *mismatch += cs != fs;
            *accepted += cs == VEER_OK;
        }
    free(m);
    free(w1);
    free(w2);
}

Test(wire_cart, damaged_plans_get_the_same_verdict, .timeout = 600) {
    int mismatch = 0, accepted = 0;
    blob b = demo_bytes();
    damage(&b, &mismatch, &accepted);
    size_t n1 = b.size;
    free(b.bytes);
    b = jerk_bytes(1);
    damage(&b, &mismatch, &accepted);
    cr_log_info("wire_cart: cuts and byte changes of %zu + %zu bytes: %d accepted by both (a bool's non-zero "
                "value), %d refused with another status",
                n1, b.size, accepted, mismatch);
    free(b.bytes);
    /* Accepted changes leave the contents as they were (both() compared the plans); the statuses of
     * refusals agree but where jerk_window's tag turns unpacked (see damage()). */
    cr_expect_leq(accepted, 32);
    cr_expect_leq(mismatch, 4, "%d refusals with another status", mismatch);
}

Test(wire_cart, an_altered_content_hash_is_refused) {
    blob b = demo_bytes();
    void *w1 = aligned_alloc(16, work_size()), *w2 = aligned_alloc(16, work_size());
    field f[16];
    int k = fields_of(b.bytes, b.size, f, 16);
    cr_assert_eq(f[k - 1].tag, veer_v1_Plan_content_hash_tag);
    cr_assert_eq(f[k - 1].end - f[k - 1].body, 32u);
    for (size_t i = f[k - 1].body; i < f[k - 1].end; i += 7) {
        b.bytes[i] ^= 0x10;
        veer_status fs, cs = both(b.bytes, b.size, NULL, w1, w2, &fs, "altered hash");
        cr_assert(cs == VEER_ERR_DECODE && fs == VEER_ERR_DECODE);
        const veer_plan *p;
        veer_diag d;
        cr_assert_eq(cart_load(b.bytes, b.size, NULL, w2, &p, &d), VEER_ERR_DECODE);
        cr_assert(diag_says(&d, "content hash"), "%s", d.message);
        b.bytes[i] ^= 0x10;
    }
    /* a hash of 31 bytes: refused; of 33: over the field's capacity */
    uint8_t *o = malloc(b.size + 8);
    size_t n = put(o, b.bytes, f[k - 1].at);
    o[n++] = (uint8_t)(veer_v1_Plan_content_hash_tag << 3 | PB_WT_STRING), o[n++] = 31;
    n += put(o + n, b.bytes + f[k - 1].body, 31);
    veer_status fs;
    cr_assert_eq(both(o, n, NULL, w1, w2, &fs, "31-byte hash"), VEER_ERR_DECODE);
    n = put(o, b.bytes, f[k - 1].at);
    o[n++] = (uint8_t)(veer_v1_Plan_content_hash_tag << 3 | PB_WT_STRING), o[n++] = 33;
    n += put(o + n, b.bytes + f[k - 1].body, 32);
    o[n++] = 0;
    cr_assert_eq(both(o, n, NULL, w1, w2, &fs, "33-byte hash"), VEER_ERR_CAPACITY);
    cr_assert_eq(fs, VEER_ERR_CAPACITY);
    free(o);
    free(b.bytes);
    free(w1);
    free(w2);
}

/* Bytes that are not the encoder's but mean the same plan: protobuf readers take them, and the
 * content hash (over the contents, re-encoded) still matches, on both paths. */
Test(wire_cart, equivalent_phrasings_are_read_alike) {
    blob b = jerk_bytes(0);
    void *w1 = aligned_alloc(16, work_size()), *w2 = aligned_alloc(16, work_size());
    field f[16];
    int k = fields_of(b.bytes, b.size, f, 16);
    uint8_t *o = malloc(2 * b.size + 64);
    size_t n = 0;
    veer_status fs;
    const veer_plan *p;
    veer_diag d;
    /* 1. the fields in reverse order */
    for (int i = k - 1; i >= 0; i--) n += put(o + n, b.bytes + f[i].at, f[i].end - f[i].at);
    cr_assert_eq(both(o, n, NULL, w1, w2, &fs, "reversed"), VEER_OK);
    /* 2. unknown fields of every wire type, at the start and the end */
    static const uint8_t unknown[] = {13 << 3 | 0, 0x96, 0x01, 14 << 3 | 1, 1, 2, 3, 4, 5, 6, 7, 8,
                                      15 << 3 | 2, 2, 'h', 'i', 13 << 3 | 5, 1, 2, 3, 4,
                                      0x88, 0x08, 3 /* field 129, varint */};
    n = put(o, unknown, sizeof unknown);
    n += put(o + n, b.bytes, b.size);
    n += put(o + n, unknown, sizeof unknown);
    cr_assert_eq(both(o, n, NULL, w1, w2, &fs, "unknown fields"), VEER_OK);
    /* 3. scalars twice, the first wrong (the last one counts), and a bogus content hash before the real one */
    n = 0;
    o[n++] = veer_v1_Plan_schema_version_tag << 3, o[n++] = 7;
    o[n++] = veer_v1_Plan_duration_tag << 3 | PB_WT_64BIT;
    n += put(o + n, (const uint8_t *)"\x01\x02\x03\x04\x05\x06\x07\x08", 8);
    o[n++] = veer_v1_Plan_content_hash_tag << 3 | PB_WT_STRING, o[n++] = 2, o[n++] = 0xaa, o[n++] = 0xbb;
    n += put(o + n, b.bytes, b.size);
    cr_assert_eq(both(o, n, NULL, w1, w2, &fs, "repeated scalars"), VEER_OK);
    /* 4. the profile split in two Profile fields (merged), and the route given twice (merged:
     * the second copy's lists append, so that plan is another one and refused by its hash) */
    int prof = -1, route = -1;
    for (int i = 0; i < k; i++) {
        if (f[i].tag == veer_v1_Plan_profile_tag) prof = i;
        if (f[i].tag == veer_v1_Plan_route_tag) route = i;
    }
    cr_assert(prof >= 0 && route >= 0);
    field pf[16];
    int pk = fields_of(b.bytes + f[prof].body, f[prof].end - f[prof].body, pf, 16);
    cr_assert_geq(pk, 4);
    n = put(o, b.bytes, f[prof].at);
    for (int half = 0; half < 2; half++) {
        size_t len = 0;
        for (int i = half; i < pk; i += 2) len += pf[i].end - pf[i].at;
        o[n++] = veer_v1_Plan_profile_tag << 3 | PB_WT_STRING;
        n += put_varint(o + n, len);
        for (int i = half; i < pk; i += 2) n += put(o + n, b.bytes + f[prof].body + pf[i].at, pf[i].end - pf[i].at);
    }
    n += put(o + n, b.bytes + f[prof].end, b.size - f[prof].end);
    cr_assert_eq(both(o, n, NULL, w1, w2, &fs, "profile in two"), VEER_OK);
    n = put(o, b.bytes, f[route].end);
    n += put(o + n, b.bytes + f[route].at, b.size - f[route].at);
    cr_assert_neq(both(o, n, NULL, w1, w2, &fs, "route twice"), VEER_OK);
    /* ... and the route's fields in order, split in 2 Route fields, then whole and followed by empty Route
     * fields up to VEER__ROUTE_PIECES + 1: merged, the same route. The cart's reader takes up to
     * VEER__ROUTE_PIECES (every encoder writes the route as one field). */
    field rf[160];
    int rk = fields_of(b.bytes + f[route].body, f[route].end - f[route].body, rf, 160);
    cr_assert_geq(rk, 2, "the route has %d fields", rk);
    for (int pieces = 2; pieces <= VEER__ROUTE_PIECES + 1; pieces++) {
        n = put(o, b.bytes, f[route].at);
        for (int q = 0; q < pieces; q++) {
            int from = pieces == 2 ? (q == 0 ? 0 : rk / 2) : (q == 0 ? 0 : rk);
            int to = pieces == 2 ? (q == 0 ? rk / 2 : rk) : rk;
            size_t len = from < to ? rf[to - 1].end - rf[from].at : 0;
            o[n++] = veer_v1_Plan_route_tag << 3 | PB_WT_STRING;
            n += put_varint(o + n, len);
            if (len) n += put(o + n, b.bytes + f[route].body + rf[from].at, len);
        }
        n += put(o + n, b.bytes + f[route].end, b.size - f[route].end);
        if (pieces <= VEER__ROUTE_PIECES) {
            cr_assert_eq(both(o, n, NULL, w1, w2, &fs, "route in pieces"), VEER_OK, "%d pieces", pieces);
        } else {
            cr_assert_eq(full_load(o, n, NULL, w1, &p, &d), VEER_OK, "%s", d.message);
            cr_assert_eq(cart_load(o, n, NULL, w2, &p, &d), VEER_ERR_DECODE);
            cr_assert(diag_says(&d, "route") && diag_says(&d, "pieces"), "%s", d.message);
        }
    }
    /* 5. what the cart's reader refuses and the decoder takes: jerk_window in two packed fields */
    int jw = -1;
    for (int i = 0; i < pk; i++)
        if (pf[i].tag == veer_v1_Profile_jerk_window_tag) jw = i;
    cr_assert(jw >= 0, "the plan has no jerk windows");
    const uint8_t *jb = b.bytes + f[prof].body + pf[jw].body;
    size_t jl = (size_t)(b.bytes + f[prof].body + pf[jw].end - jb);
    cr_assert(jl >= 16 && jl % 8 == 0, "%zu bytes of jerk windows", jl);
    uint8_t sub[512];
    size_t sn = 0;
    for (int i = 0; i < pk; i++)
        if (i != jw) sn += put(sub + sn, b.bytes + f[prof].body + pf[i].at, pf[i].end - pf[i].at);
    sub[sn++] = veer_v1_Profile_jerk_window_tag << 3 | PB_WT_STRING, sub[sn++] = 8;
    sn += put(sub + sn, jb, 8);
    sub[sn++] = veer_v1_Profile_jerk_window_tag << 3 | PB_WT_STRING;
    sn += put_varint(sub + sn, jl - 8);
    sn += put(sub + sn, jb + 8, jl - 8);
    cr_assert_leq(sn, sizeof sub);
    n = put(o, b.bytes, f[prof].at);
    o[n++] = veer_v1_Plan_profile_tag << 3 | PB_WT_STRING;
    n += put_varint(o + n, sn);
    n += put(o + n, sub, sn);
    n += put(o + n, b.bytes + f[prof].end, b.size - f[prof].end);
    cr_assert_eq(full_load(o, n, NULL, w1, &p, &d), VEER_OK, "%s", d.message);
    cr_assert_eq(cart_load(o, n, NULL, w2, &p, &d), VEER_ERR_DECODE);
    cr_assert(diag_says(&d, "jerk_window") && diag_says(&d, "pieces"), "%s", d.message);
    free(o);
    free(b.bytes);
    free(w1);
    free(w2);
}

Test(wire_cart, malformed_fields_are_refused_as_the_decoder_refuses_them) {
    void *w1 = aligned_alloc(16, work_size()), *w2 = aligned_alloc(16, work_size());
    veer_status fs, cs;
    struct {
        const char *what;
        uint8_t b[24];
        size_t n;
    } cases[] = {
        {"zero tag", {0x08, 0x01, 0x00, 0x10, 0x05}, 5},
        {"uint32 over 32 bits", {0x08, 0x80, 0x80, 0x80, 0x80, 0x10}, 6},
        {"wrong wire type", {0x0a, 0x00}, 2},
        {"group wire type", {0x6b, 0x6c}, 2},
        {"jerk_window cut mid-value", {0x42, 14, 0x4a, 12, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12}, 16},
        {"knots over capacity", {0x42, 0x04, 0x22, 0x81, 0x80, 0x01}, 6},
        {"zero tag in the profile", {0x42, 0x03, 0x18, 0x05, 0x00, 0x50, 0x01}, 7},
        {"profile longer than the message", {0x42, 0x09, 0x18, 0x05}, 4},
        {"knot_count with a fixed64 wire type", {0x42, 0x09, 0x19, 1, 2, 3, 4, 5, 6, 7, 8}, 11},
        {"drive not a message", {0x22, 0x02, 0xff, 0xff}, 4},
        {"cart_id over capacity", {0x5a, 0x40}, 2},
        {"empty", {0}, 0},
        {"one unpacked jerk window", {0x42, 0x09, 0x49, 0, 0, 0, 0, 0, 0, 0xf0, 0x3f}, 11},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        cs = both(cases[i].b, cases[i].n, NULL, w1, w2, &fs, cases[i].what);
        cr_expect_eq(cs, fs, "%s: cart reader %s, decoder %s", cases[i].what, veer_status_name(cs),
                     veer_status_name(fs));
        cr_expect_neq(cs, VEER_OK, "%s", cases[i].what);
    }
    const veer_plan *p;
    veer_diag d;
    cr_assert_eq(veer__wire_load_pb_cap(NULL, 4, w2, work_size(), NULL, &p, &d), VEER_ERR_NULL);
    free(w1);
    free(w2);
}

Test(wire_cart, garbage_never_loads_and_never_crashes, .timeout = 300) {
    void *w1 = aligned_alloc(16, work_size()), *w2 = aligned_alloc(16, work_size());
    blob b = demo_bytes();
    uint8_t *g = calloc(1, b.size + 64); /* bytes beyond the plan stay zero where no noise goes */
    uint64_t x = 0x2545F4914F6CDD1Dull;
    int mismatch = 0;
    for (int round = 0; round < 3000; round++) {
        x ^= x << 13, x ^= x >> 7, x ^= x << 17;
        size_t n = (size_t)(x % (b.size + 64));
        /* half pure noise, half the plan with a noisy stretch */
        memcpy(g, b.bytes, n < b.size ? n : b.size);
        size_t from = round % 2 ? 0 : (size_t)((x >> 20) % (n + 1)), to = from + (size_t)((x >> 40) % 24);
        for (size_t i = from; i < n && (round % 2 || i < to); i++) {
            x ^= x << 13, x ^= x >> 7, x ^= x << 17;
            g[i] = (uint8_t)x;
        }
        veer_status fs, cs = both(g, n, NULL, w1, w2, &fs, "garbage");
        cr_assert_neq(cs, VEER_OK);
        mismatch += cs != fs;
    }
    cr_log_info("wire_cart: 3000 garbage inputs refused, %d with another status", mismatch);
    free(g);
    free(b.bytes);
    free(w1);
    free(w2);
}

Test(wire_cart, workspace_needs_no_decoded_message) {
    veer__plan_cap small = {200, 4, 2, 4, 0, 1}, max = veer__plan_cap_max();
    size_t before = VEER__ALIGN16(veer__wire_plan_bytes_for(&small)) + VEER__ALIGN16(sizeof(veer_v1_Plan));
    size_t now = veer__wire_work_bytes_for(&small);
    cr_log_info("wire_cart: workspace for 200 knots, 4 waypoints, 2 legs, 4 modules: %zu B (with a decoded "
                "message %zu B); any plan %zu B; veer_v1_Plan %zu B, veer__plan_msgs %zu B",
                now, before, veer__wire_work_bytes_for(&max), sizeof(veer_v1_Plan), sizeof(veer__plan_msgs));
    cr_assert_eq(now, veer__wire_plan_bytes_for(&small), "the submessages fit where the grid goes");
    cr_assert_lt(veer__wire_work_bytes_for(&max) + sizeof(veer_v1_Plan), (size_t)VEER__WIRE_WORK_BYTES + 16);
    /* a cap so small that the scratch needs more than the grid: the submessages and the route's head,
     * then room for its one leg and two waypoints, each block at a 16-byte offset */
    veer__plan_cap tiny = {8, 2, 1, 1, 0, 1};
    cr_assert_eq(veer__wire_work_bytes_for(&tiny),
                 veer__wire_plan_grid_at(&tiny) + VEER__ALIGN16(VEER__ALIGN16(sizeof(veer__plan_msgs)) +
                                                                VEER__ALIGN16(sizeof(veer_leg)) +
                                                                2 * sizeof(veer_waypoint)));
    /* the demo in exactly its workspace; one byte less is refused before anything is read */
    blob b = demo_bytes();
    veer_plan_needs need;
    veer_diag d;
    cr_assert_eq(veer_plan_needs_pb(b.bytes, b.size, &need, &d), VEER_OK);
    veer__plan_cap cap = {(int)need.knots, (int)need.waypoints, (int)need.legs, (int)need.modules, 0, 1};
    size_t ws = veer__wire_work_bytes_for(&cap);
    void *w = aligned_alloc(16, (ws + 15) / 16 * 16);
    const veer_plan *p;
    cr_assert_eq(veer__wire_load_pb_cap(b.bytes, b.size, w, ws - 1, &cap, &p, &d), VEER_ERR_VALUE);
    cr_assert(diag_says(&d, "workspace") && !p, "%s", d.message);
    cr_assert_eq(veer__wire_load_pb_cap(b.bytes, b.size, w, ws, &cap, &p, &d), VEER_OK, "%s", d.message);
    cr_log_info("wire_cart: the demo (%zu B, %u knots) needs %zu B of workspace (with a decoded message %zu B)",
                b.size, need.knots, ws,
                VEER__ALIGN16(veer__wire_plan_bytes_for(&cap)) + VEER__ALIGN16(sizeof(veer_v1_Plan)));
    free(w);
    free(b.bytes);
}

/* The reader's veer__plan_in lies in the workspace's scratch, beside the
 * submessages (veer__plan_msgs), and the load lays the grid over it: a
 * workspace of veer__wire_work_bytes_for a cap holds the largest plan of
 * that cap, whether the grid (the demo) or the scratch (the demo at 16 grid
 * points: few knots) is the larger part of it. The load writes nothing past
 * the workspace, and the plan is the decoded-message path's, bit for bit. */
Test(wire_cart, workspace_for_a_cap_holds_its_largest_plan) {
    veer_drive_def dr;
    veer_limits l;
    veer_route r;
    cr_assert_eq(kestrel_demo(&dr, &l, &r), VEER_OK);
    for (int few = 0; few < 2; few++) {
        veer_plan_options o = veer_default_plan_options();
        if (few) o.grid_points = 16;
        veer_plan *made = NULL;
        veer_diag d;
        cr_assert_eq(veer_plan_create(&dr, &l, &r, &o, &made, &d), VEER_OK, "%s", d.message);
        blob b = encode(made);
        veer_plan_destroy(made);
        veer_plan_needs need;
        cr_assert_eq(veer_plan_needs_pb(b.bytes, b.size, &need, &d), VEER_OK);
        veer__plan_cap cap = {(int)need.knots, (int)need.waypoints, (int)need.legs, (int)need.modules, 0, 1};
        size_t grid = VEER__GRID_BYTES(cap.knots, cap.modules, 0),
               scratch = VEER__PLAN_SCRATCH_BYTES(cap.legs, cap.waypoints);
        cr_assert(few ? grid < scratch : grid > scratch, "%u knots: grid %zu B, scratch %zu B", need.knots, grid,
                  scratch);
        size_t ws = veer__wire_work_bytes_for(&cap), guard = 256;
        cr_assert_geq(ws, veer__wire_plan_grid_at(&cap) + scratch);
        unsigned char *w = aligned_alloc(16, (ws + guard + 15) / 16 * 16);
        memset(w, 0xA5, ws + guard);
        const veer_plan *p = NULL, *f = NULL;
        cr_assert_eq(veer__wire_load_pb_cap(b.bytes, b.size, w, ws, &cap, &p, &d), VEER_OK, "%s", d.message);
        size_t touched = 0;
        for (size_t i = ws; i < ws + guard; i++) touched += w[i] != 0xA5;
        cr_assert_eq(touched, 0u, "%zu bytes written past the %zu-byte workspace", touched, ws);
        void *wf = aligned_alloc(16, work_size());
        cr_assert_eq(full_load(b.bytes, b.size, &cap, wf, &f, &d), VEER_OK, "%s", d.message);
        same_plan(f, p, few ? "few knots" : "the demo");
        cr_log_info("wire_cart: %u knots, %u waypoints, %u legs: workspace %zu B (grid %zu B, scratch %zu B)",
                    need.knots, need.waypoints, need.legs, ws, grid, scratch);
        free(wf);
        free(w);
        free(b.bytes);
    }
}
