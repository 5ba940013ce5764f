/* libFuzzer target: Plan bytes off the radio into the cart-side decoders
 * (veer_plan_load_pb: the cart's field-by-field reader, wire_cart.c;
 * veer_plan_sample_pb: a decoded veer_v1_Plan), then every reader of the
 * decoded plan. Findings: a crash, a sanitizer report, a NaN or infinity in
 * any output, a status outside the table, any allocation by the cart-side
 * code, the decoders disagreeing (status, or duration to the bit; the one
 * allowed difference: the cart's reader refuses jerk_window in pieces,
 * which the decoder takes), or a plan the library encodes that it then
 * cannot load.
 *
 * Most mutations break the plan's content hash and its stated duration,
 * which the decoder checks last (after everything else has been parsed).
 * So that mutated plans also reach the readers, the target repairs both on
 * a second pass and loads the repaired bytes: the hash by recomputing it
 * (as the encoder does), the duration from the figure the decoder's message
 * reports. The hash protects against damage, not forgery (link.h's plan tag
 * does that), so a repaired plan is exactly what a careless or hostile
 * ground station could send with a valid tag.
 * SPDX-License-Identifier: MIT */
#include <stdlib.h>
#include <string.h>
#include "fuzz_common.h"
#include "wire_internal.h"

/* Workspace for veer_plan_load_pb, aligned for double. */
static double work[(VEER__WIRE_WORK_BYTES + sizeof(double) - 1) / sizeof(double)];
static veer_v1_Plan msg;
static uint8_t fixed[veer_v1_Plan_size + 64];
static veer_sample table[64];

static void check_status(veer_status st, const char *what) {
    FUZZ_CHECK(st >= VEER_OK && st <= VEER_ERR_LATE && veer_status_name(st)[0] != 'u', "%s: status %d outside the table",
               what, (int)st);
}

static void check_diag(const veer_diag *d, veer_status st, const char *what) {
    FUZZ_CHECK(memchr(d->message, 0, sizeof d->message) != NULL, "%s: diag message not terminated", what);
    if (st != VEER_OK) FUZZ_CHECK(d->message[0] != 0, "%s failed (%s) without a message", what, veer_status_name(st));
}

static void sample_at(const veer_plan *p, double t) {
    veer_sample s;
    memset(&s, 0, sizeof s);
    veer_status st = veer_plan_sample(p, t, &s);
    check_status(st, "veer_plan_sample");
    if (isnan(t)) return; /* a NaN time may be refused */
    FUZZ_CHECK(st == VEER_OK, "veer_plan_sample(%g) of a loaded plan failed: %s", t, veer_status_name(st));
    FUZZ_CHECK(fuzz_sample_finite(&s), "veer_plan_sample(%g) gave a non-finite value", t);
    FUZZ_CHECK(s.module_count == veer_plan_module_count(p), "sample module count %d, plan %d", s.module_count,
               veer_plan_module_count(p));
}

/* Every reader of a loaded plan; cart-side, so nothing may allocate. */
static void exercise(const veer_plan *p, fuzz_reader *r) {
    double T = veer_plan_duration(p), L = veer_plan_length(p);
    FUZZ_CHECK(isfinite(T) && T >= 0.0, "duration %g", T);
    FUZZ_CHECK(isfinite(L) && L >= 0.0, "length %g", L);
    const double probe[] = {0.0, 1e-9, 0.25, 0.5, 0.75, 1.0 - 1e-12, 1.0};
    for (size_t k = 0; k < sizeof probe / sizeof probe[0]; k++) sample_at(p, probe[k] * T);
    sample_at(p, -1.0);
    sample_at(p, T + 1.0);
    sample_at(p, 1e300);
    double t;
    uint64_t bits = fuzz_u64(r);
    memcpy(&t, &bits, sizeof t);
    sample_at(p, t);

    int legs = veer_plan_leg_count(p);
    FUZZ_CHECK(legs >= 0 && legs <= VEER_MAX_LEGS, "leg count %d", legs);
    for (int i = -1; i <= legs; i++) {
        veer_leg_summary ls;
        veer_status st = veer_plan_leg(p, i, &ls);
        check_status(st, "veer_plan_leg");
        if (i < 0 || i == legs) {
            FUZZ_CHECK(st != VEER_OK, "veer_plan_leg(%d) of %d legs succeeded", i, legs);
            continue;
        }
        FUZZ_CHECK(st == VEER_OK && isfinite(ls.start) && isfinite(ls.duration) && isfinite(ls.s_begin) &&
                       isfinite(ls.s_end) && isfinite(ls.resteer_time) && isfinite(ls.dwell_time),
                   "leg %d summary", i);
    }
    int G = veer_plan_grid_count(p);
    FUZZ_CHECK(G >= 0, "grid count %d", G);
    for (int k = 0; k < G; k += 1 + G / 16) {
        double s, sd;
        veer_limit_id id;
        veer_status st = veer_plan_grid(p, k, &s, &sd, &id);
        FUZZ_CHECK(st == VEER_OK && isfinite(s) && isfinite(sd) && sd >= 0.0, "grid point %d", k);
    }
    for (int k = 0; k <= 4; k++) {
        double q[3], dq[3], ddq[3];
        veer_status st = veer_plan_path_at(p, L * k / 4.0, q, dq, ddq);
        FUZZ_CHECK(st == VEER_OK && fuzz_finite3(q) && fuzz_finite3(dq) && fuzz_finite3(ddq), "path_at(%g)",
                   L * k / 4.0);
    }
    /* A table at a rate that keeps it to the buffer, or the buffer rule. */
    double rate = T > 0.0 ? 60.0 / T : 1.0;
    if (rate > 1e6) rate = 1e6;
    size_t rows = 0;
    veer_status st = veer_plan_table(p, rate, table, sizeof table / sizeof table[0], &rows);
    check_status(st, "veer_plan_table");
    if (st == VEER_OK)
        for (size_t k = 0; k < rows; k++) FUZZ_CHECK(fuzz_sample_finite(&table[k]), "table row %zu", k);
    else
        FUZZ_CHECK(st == VEER_ERR_BUFFER || st == VEER_ERR_VALUE, "veer_plan_table: %s", veer_status_name(st));
    /* A controlled stop from a point of the plan. */
    double ts = T * (fuzz_u8(r) / 255.0);
    veer_stop_info info;
    st = veer_plan_stop_info(p, ts, &info);
    check_status(st, "veer_plan_stop_info");
    if (st == VEER_OK) {
        FUZZ_CHECK(isfinite(info.duration) && info.duration >= 0.0 && isfinite(info.s_end), "stop info");
        /* Braking time is bounded (1 ms steps); sample a few points of it. */
        if (info.duration < 600.0)
            for (int k = 0; k <= 4; k++) {
                veer_sample s;
                st = veer_plan_stop_sample(p, ts, info.duration * k / 4.0, &s);
                FUZZ_CHECK(st == VEER_OK && fuzz_sample_finite(&s), "stop sample %d: %s", k, veer_status_name(st));
            }
    }
}

/* Loads bytes on the cart side; exercises the plan when it loads. Returns the status. */
static veer_status cart_load(const uint8_t *data, size_t size, fuzz_reader *r, veer_diag *diag) {
    const veer_plan *p = NULL;
    fuzz_cart_side = 1;
    veer_status st = veer_plan_load_pb(data, size, work, sizeof work, &p, diag);
    check_status(st, "veer_plan_load_pb");
    check_diag(diag, st, "veer_plan_load_pb");
    FUZZ_CHECK((st == VEER_OK) == (p != NULL), "load status %s with plan %p", veer_status_name(st), (const void *)p);
    if (p) exercise(p, r);
    veer_sample s;
    veer_status st2 = veer_plan_sample_pb(data, size, 0.5 * (p ? veer_plan_duration(p) : 0.0), &s);
    fuzz_cart_side = 0;
    int pieces = st == VEER_ERR_DECODE && strstr(diag->message, "pieces") != NULL;
    FUZZ_CHECK(st2 == st || pieces, "veer_plan_sample_pb says %s, veer_plan_load_pb %s (%s)",
               veer_status_name(st2), veer_status_name(st), diag->message);
    if (st2 == VEER_OK) FUZZ_CHECK(fuzz_sample_finite(&s), "veer_plan_sample_pb gave a non-finite value");

    /* The heap decoder (ground side) makes the same checks. */
    veer_plan *h = NULL;
    veer_diag hd;
    veer_status st3 = veer_plan_decode_pb(data, size, &h, &hd);
    FUZZ_CHECK(st3 == st2, "veer_plan_decode_pb says %s, veer_plan_sample_pb %s", veer_status_name(st3),
               veer_status_name(st2));
    if (h) {
        if (p)
            FUZZ_CHECK(veer_plan_duration(h) == veer_plan_duration(p),
                       "the heap decoder and the cart's reader give different durations");
        veer_plan_destroy(h);
    }
    FUZZ_CHECK(fuzz_heap_bytes == 0, "%zu bytes left on the heap", fuzz_heap_bytes);
    return st;
}

/* The duration the decoder says the plan rebuilds to, from its message. */
static int rebuilt_duration(const veer_diag *d, double *out) {
    const char *k = strstr(d->message, "rebuilds to ");
    if (!k) return 0;
    char *end = NULL;
    double v = strtod(k + strlen("rebuilds to "), &end);
    if (end == k + strlen("rebuilds to ") || !isfinite(v)) return 0;
    *out = v;
    return 1;
}

static size_t repair(void) {
    uint8_t h[32];
    if (veer__wire_plan_hash(&msg, h) != VEER_OK) return 0;
    memcpy(msg.content_hash.bytes, h, 32);
    msg.content_hash.size = 32;
    size_t n = 0;
    veer_diag d;
    if (veer__wire_encode(veer_v1_Plan_fields, &msg, fixed, sizeof fixed, &n, &d) != VEER_OK) return 0;
    return n;
}

int LLVMFuzzerInitialize(int *argc, char ***argv);
int LLVMFuzzerInitialize(int *argc, char ***argv) {
    (void)argc;
    (void)argv;
    fuzz_install_allocator();
    return 0;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    /* The last 9 bytes, when there are more than 9, steer the readers (a
     * sample time and a stop point); the plan is all of the input. */
    fuzz_reader r = {data, size, size > 9 ? size - 9 : size};
    veer_diag diag;
    veer_status st = cart_load(data, size, &r, &diag);
    if (st == VEER_OK) {
        /* What the library decoded it must also encode into bytes it loads. */
        const veer_plan *p = NULL;
        if (veer_plan_load_pb(data, size, work, sizeof work, &p, &diag) != VEER_OK)
            FUZZ_FAIL("second load failed: %s", diag.message);
        size_t n = 0;
        veer_status est = veer_plan_encode_pb(p, fixed, sizeof fixed, &n, &diag);
        check_status(est, "veer_plan_encode_pb");
        FUZZ_CHECK(fuzz_heap_bytes == 0, "veer_plan_encode_pb left %zu bytes on the heap", fuzz_heap_bytes);
        if (est == VEER_OK) {
            r.i = size > 9 ? size - 9 : size;
            veer_status st2 = cart_load(fixed, n, &r, &diag);
            FUZZ_CHECK(st2 == VEER_OK, "a plan veer_plan_encode_pb wrote does not load: %s", diag.message);
        }
        return 0;
    }
    /* Second pass: repair the hash (and the stated duration) and load again. */
    if (veer__wire_decode(veer_v1_Plan_fields, &msg, data, size, "plan", &diag) != VEER_OK) return 0;
    size_t n = repair();
    if (!n) return 0;
    r.i = size > 9 ? size - 9 : size;
    st = cart_load(fixed, n, &r, &diag);
    double d;
    if (st != VEER_OK && rebuilt_duration(&diag, &d)) {
        msg.duration = d;
        n = repair();
        if (!n) return 0;
        r.i = size > 9 ? size - 9 : size;
        (void)cart_load(fixed, n, &r, &diag);
    }
    return 0;
}
