/* libFuzzer target: PlanRequest bytes from any hand (a scenario file, a
 * script, another language) into the ground station's entry point
 * veer_plan_request_pb. Findings: a crash, a hang, a sanitizer report, a
 * status outside the table, a reply that is larger than the stated bound or
 * does not decode as a PlanReply, a reply whose status disagrees with the
 * return value, an error reply without a message, a successful reply whose
 * Plan does not load on the cart side, or memory left on the heap.
 *
 * Requests asking for more than FUZZ_MAX_GRID grid points are skipped, so
 * that one input costs milliseconds, not seconds; the grid size itself is
 * checked by the planner before any work (tests/test_plan_input.c).
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "fuzz_common.h"
#include "wire_internal.h"

#define FUZZ_MAX_GRID 4000

static veer_v1_PlanRequest req;
static veer_v1_PlanReply rep;
static uint8_t *reply;
static size_t reply_cap;
static uint8_t plan_bytes[veer_v1_Plan_size + 64];
static double work[(VEER__WIRE_WORK_BYTES + sizeof(double) - 1) / sizeof(double)];

int LLVMFuzzerInitialize(int *argc, char ***argv);
int LLVMFuzzerInitialize(int *argc, char ***argv) {
    (void)argc;
    (void)argv;
    fuzz_install_allocator();
    reply_cap = veer_plan_reply_size_bound(FUZZ_MAX_GRID + 64);
    reply = malloc(reply_cap);
    if (!reply) FUZZ_FAIL("no memory for the reply buffer");
    return 0;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);
int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
    veer_diag d;
    if (veer__wire_decode(veer_v1_PlanRequest_fields, &req, data, size, "request", &d) == VEER_OK &&
        req.has_options && req.options.grid_points > FUZZ_MAX_GRID)
        return 0;

    size_t n = 0;
    veer_status st = veer_plan_request_pb(data, size, reply, reply_cap, &n);
    FUZZ_CHECK(st >= VEER_OK && st <= VEER_ERR_LATE, "status %d outside the table", (int)st);
    FUZZ_CHECK(fuzz_heap_bytes == 0, "veer_plan_request_pb left %zu bytes on the heap", fuzz_heap_bytes);
    FUZZ_CHECK(st != VEER_ERR_BUFFER, "a reply of %zu bytes did not fit the bound of %zu", n, reply_cap);
    FUZZ_CHECK(n > 0 && n <= reply_cap, "reply size %zu (capacity %zu)", n, reply_cap);

    veer_status dst = veer__wire_decode(veer_v1_PlanReply_fields, &rep, reply, n, "reply", &d);
    FUZZ_CHECK(dst == VEER_OK, "the reply does not decode: %s", d.message);
    FUZZ_CHECK(rep.status == (veer_v1_Status)veer__wire_status_to_pb(st), "reply status %d, returned %s",
               (int)rep.status, veer_status_name(st));
    if (st != VEER_OK) {
        FUZZ_CHECK(rep.has_diagnostic && rep.diagnostic.message[0] != 0, "error reply (%s) without a message",
                   veer_status_name(st));
        FUZZ_CHECK(!rep.has_plan, "error reply (%s) carries a plan", veer_status_name(st));
        return 0;
    }
    FUZZ_CHECK(rep.has_plan, "successful reply without a plan");
    FUZZ_CHECK(isfinite(rep.duration) && rep.duration >= 0.0, "reply duration %g", rep.duration);

    /* The reply's plan, as a cart would receive it, loads without allocating. */
    size_t pn = 0;
    FUZZ_CHECK(veer__wire_encode(veer_v1_Plan_fields, &rep.plan, plan_bytes, sizeof plan_bytes, &pn, &d) == VEER_OK,
               "the reply's plan does not re-encode: %s", d.message);
    const veer_plan *p = NULL;
    fuzz_cart_side = 1;
    veer_status lst = veer_plan_load_pb(plan_bytes, pn, work, sizeof work, &p, &d);
    FUZZ_CHECK(lst == VEER_OK, "a plan veer made does not load: %s: %s", veer_status_name(lst), d.message);
    /* The Plan states the duration of its own compact profile, which the
     * decoder holds it to; the reply's duration is the planner's. */
    FUZZ_CHECK(fabs(veer_plan_duration(p) - rep.plan.duration) <= 1e-6 * (1.0 + rep.plan.duration),
               "loaded plan lasts %.9f s, it says %.9f s", veer_plan_duration(p), rep.plan.duration);
    veer_sample s;
    double T = veer_plan_duration(p);
    for (int k = 0; k <= 8; k++) {
        veer_status sst = veer_plan_sample(p, T * k / 8.0, &s);
        FUZZ_CHECK(sst == VEER_OK && fuzz_sample_finite(&s), "sample at %g of a planned request", T * k / 8.0);
    }
    fuzz_cart_side = 0;
    return 0;
}
