/* The cart's receiver: reassembles one sealed plan from chunks in any
 * order, answers with gap reports, verifies the plan tag and the plan
 * counter, and checks commands (tag, sequence number). Fixed buffers, no
 * heap; per frame: one CRC and decode of at most VEER_LINK_FRAME_MAX bytes,
 * one copy of at most that many, bitmap work of at most
 * VEER_LINK_MAX_CHUNKS / 8 bytes; the frame that completes a plan adds one
 * HMAC over at most the link's max_plan_bytes.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "link_internal.h"
#include "veer/v1/plan.pb.h"

#define LINK_FAIL(diag, status, ...) veer__fail_plain((diag), (status), __VA_ARGS__)

/* Every plan the link can carry fits: a Plan message at its generated
 * maximum and its tag. */
_Static_assert(veer_v1_Plan_size <= VEER_LINK_MAX_PLAN_BYTES, "VEER_LINK_MAX_PLAN_BYTES is below the Plan maximum");
_Static_assert(sizeof(((veer_v1_PlanChunk *)0)->data.bytes) >= VEER_LINK_FRAME_MAX, "link.options: PlanChunk.data");
_Static_assert(sizeof(((veer_v1_GapReport *)0)->missing.bytes) == VEER_LINK_MAX_CHUNKS / 8,
               "link.options: GapReport.missing");


size_t veer_link_receiver_size_for(const veer_link_def *def) {
    if (!def) return 0;
    return VEER__ALIGN16(sizeof(veer_link_receiver) + veer__link_max_plan(def) + VEER_LINK_PLAN_TAG_BYTES);
}

size_t veer_link_receiver_size(void) {
    veer_link_def d = veer_default_link_def();
    return veer_link_receiver_size_for(&d);
}

void veer__link_receiver_setup(veer_link_receiver *rx, const veer_link_def *def, uint64_t accepted,
                               uint64_t command_seq) {
    memset(rx, 0, offsetof(veer_link_receiver, buf));
    rx->def = *def;
    rx->capacity = veer__link_max_plan(def) + VEER_LINK_PLAN_TAG_BYTES;
    rx->accepted = accepted;
    rx->command_seq = command_seq;
    rx->last_verdict = VEER_LINK_NONE;
}

veer_status veer_link_receiver_init(void *memory, size_t size, const veer_link_def *def, uint64_t accepted_plan_id,
                                    uint64_t command_seq, veer_link_receiver **out, veer_diag *diag) {
    if (!out) return LINK_FAIL(diag, VEER_ERR_NULL, "out is NULL");
    *out = NULL;
    if (!memory) return LINK_FAIL(diag, VEER_ERR_NULL, "receiver memory is NULL");
    veer_status st = veer_link_def_check(def, diag);
    if (st != VEER_OK) return st;
    if (size < veer_link_receiver_size_for(def) || ((uintptr_t)memory % sizeof(double)) != 0)
        return LINK_FAIL(diag, VEER_ERR_VALUE,
                         "receiver memory: needs %zu bytes aligned for double (veer_link_receiver_size_for())",
                         veer_link_receiver_size_for(def));
    veer_link_receiver *rx = memory;
    veer__link_receiver_setup(rx, def, accepted_plan_id, command_seq);
    *out = rx;
    veer__diag_ok(diag);
    return VEER_OK;
}

static int held(const veer_link_receiver *rx, uint32_t i) { return (rx->bitmap[i >> 3] >> (i & 7u)) & 1u; }

/* Drops the plan in reassembly. */
static void drop(veer_link_receiver *rx) {
    rx->active = rx->ready = 0;
    rx->have = 0;
}

static int take_chunk(veer_link_receiver *rx, const veer__link_chunk *c, veer_link_event *ev) {
    ev->plan_id = c->plan_id;
    if (c->plan_id == 0 || c->count == 0 || c->count > VEER_LINK_MAX_CHUNKS ||
        c->sealed_size <= VEER_LINK_PLAN_TAG_BYTES ||
        c->sealed_size > VEER_LINK_MAX_PLAN_BYTES + VEER_LINK_PLAN_TAG_BYTES || c->index >= c->count)
        return VEER_LINK_CHUNK_RANGE;
    uint32_t d = veer__link_chunk_bytes(c->count, c->sealed_size);
    if (!d || d > (uint32_t)rx->def.frame_size ||
        c->data_size != veer__link_chunk_length(c->index, c->count, c->sealed_size))
        return VEER_LINK_CHUNK_RANGE;
    if (c->sealed_size > rx->capacity) {
        /* A plan larger than this cart takes: say so in the gap report (as
         * a settled plan's verdict) so the ground station stops sending it,
         * unless another plan is coming in. Nothing else changes. */
        if (c->plan_id <= rx->accepted) return VEER_LINK_REPLAY;
        if (!rx->active) {
            rx->last_plan_id = c->plan_id;
            rx->last_count = c->count;
            rx->last_verdict = VEER_LINK_CAPACITY;
            ev->gaps_due = 1;
        }
        return VEER_LINK_CAPACITY;
    }
    /* The plan the cart settled last: tell the ground station again (a plan
     * whose tag failed may come again: it starts over below). */
    if (!rx->active && rx->last_plan_id && c->plan_id == rx->last_plan_id && rx->last_verdict != VEER_LINK_PLAN_TAG) {
        ev->gaps_due = 1;
        return VEER_LINK_DUPLICATE;
    }
    if (c->plan_id <= rx->accepted) return VEER_LINK_REPLAY;
    if (rx->active && c->plan_id < rx->plan_id) return VEER_LINK_STALE;
    if (!rx->active || c->plan_id > rx->plan_id) { /* a newer plan: start over */
        rx->active = 1;
        rx->ready = 0;
        rx->plan_id = c->plan_id;
        rx->count = c->count;
        rx->sealed = c->sealed_size;
        rx->chunk_bytes = d;
        rx->have = 0;
        memset(rx->bitmap, 0, (c->count + 7u) / 8u);
    } else if (c->count != rx->count || c->sealed_size != rx->sealed) {
        return VEER_LINK_INCONSISTENT;
    }
    if (c->index == c->count - 1) ev->gaps_due = 1; /* the end of a round: say what is missing */
    if (held(rx, c->index)) return VEER_LINK_DUPLICATE;
    memcpy(rx->buf + (size_t)c->index * d, c->data, c->data_size);
    rx->bitmap[c->index >> 3] |= (uint8_t)(1u << (c->index & 7u));
    rx->have++;
    if (rx->have < rx->count) return VEER_LINK_NONE;
    /* Complete: verify the plan tag over the header and the Plan bytes. */
    ev->gaps_due = 1;
    size_t plan_size = rx->sealed - VEER_LINK_PLAN_TAG_BYTES;
    uint8_t tag[VEER_LINK_PLAN_TAG_BYTES];
    veer__link_plan_tag(rx->def.key, rx->def.cart, rx->plan_id, rx->buf, plan_size, tag);
    if (!veer__link_equal(tag, rx->buf + plan_size, VEER_LINK_PLAN_TAG_BYTES)) {
        rx->last_plan_id = rx->plan_id;
        rx->last_count = rx->count;
        rx->last_verdict = VEER_LINK_PLAN_TAG;
        drop(rx); /* a resend of the same plan starts over */
        return VEER_LINK_PLAN_TAG;
    }
    rx->ready = 1;
    ev->plan_ready = 1;
    return VEER_LINK_NONE;
}

static int take_command(veer_link_receiver *rx, const veer_v1_Command *c, veer_link_event *ev) {
    ev->plan_id = c->plan_id;
    if (c->seq <= rx->command_seq) return VEER_LINK_COMMAND_REPLAY;
    if (c->kind < veer_v1_CommandKind_COMMAND_KIND_HEARTBEAT || c->kind > veer_v1_CommandKind_COMMAND_KIND_STOP)
        return VEER_LINK_COMMAND;
    rx->command_seq = c->seq;
    ev->command = (int)c->kind;
    ev->seq = c->seq;
    /* A heartbeat while a plan comes in asks what is missing (a settled
     * plan's verdict is said again for any of its chunks). */
    if (c->kind == veer_v1_CommandKind_COMMAND_KIND_HEARTBEAT && rx->active) ev->gaps_due = 1;
    return VEER_LINK_NONE;
}

veer_status veer_link_receive(veer_link_receiver *rx, const uint8_t *frame, size_t size, veer_link_event *ev) {
    if (!rx || !ev) return VEER_ERR_NULL;
    if (rx->ready) return VEER_ERR_STATE;
    veer_link_event e;
    memset(&e, 0, sizeof e);
    veer__link_frame f;
    int why = veer__link_decode(&rx->def, frame, size, &f);
    if (why == VEER_LINK_NONE || why == VEER_LINK_FRAME_TAG) {
        e.kind = f.which_body == veer_v1_LinkFrame_chunk_tag     ? VEER_LINK_KIND_CHUNK
                 : f.which_body == veer_v1_LinkFrame_command_tag ? VEER_LINK_KIND_COMMAND
                 : f.which_body == veer_v1_LinkFrame_gaps_tag    ? VEER_LINK_KIND_GAPS
                                                                 : VEER_LINK_KIND_REPORT;
    }
    if (why == VEER_LINK_NONE) {
        if (e.kind == VEER_LINK_KIND_CHUNK) why = take_chunk(rx, &f.body.chunk, &e);
        else if (e.kind == VEER_LINK_KIND_COMMAND) why = take_command(rx, &f.body.command, &e);
        else why = VEER_LINK_WRONG_DIRECTION;
    }
    e.reason = why;
    rx->counts[why]++;
    *ev = e;
    return VEER_OK;
}

veer_status veer_link_receiver_plan(const veer_link_receiver *rx, const uint8_t **plan, size_t *plan_size,
                                    uint64_t *plan_id) {
    if (!rx || !plan || !plan_size) return VEER_ERR_NULL;
    if (!rx->ready) return VEER_ERR_STATE;
    *plan = rx->buf;
    *plan_size = rx->sealed - VEER_LINK_PLAN_TAG_BYTES;
    if (plan_id) *plan_id = rx->plan_id;
    return VEER_OK;
}

veer_status veer_link_receiver_settle(veer_link_receiver *rx, int verdict) {
    if (!rx) return VEER_ERR_NULL;
    if (!rx->ready) return VEER_ERR_STATE;
    if (verdict < 0 || verdict >= VEER_LINK_REASON_COUNT) return VEER_ERR_VALUE;
    if (verdict == VEER_LINK_NONE) rx->accepted = rx->plan_id;
    rx->last_plan_id = rx->plan_id;
    rx->last_count = rx->count;
    rx->last_verdict = verdict;
    drop(rx);
    return VEER_OK;
}

uint64_t veer_link_receiver_accepted(const veer_link_receiver *rx) { return rx ? rx->accepted : 0; }
uint64_t veer_link_receiver_command_seq(const veer_link_receiver *rx) { return rx ? rx->command_seq : 0; }
uint32_t veer_link_receiver_count(const veer_link_receiver *rx, int reason) {
    return rx && reason >= 0 && reason < VEER_LINK_REASON_COUNT ? rx->counts[reason] : 0;
}

veer_status veer_link_receiver_gaps(const veer_link_receiver *rx, veer_link_gaps *out) {
    if (!rx || !out) return VEER_ERR_NULL;
    veer_link_gaps g;
    memset(&g, 0, sizeof g);
    if (rx->active && !rx->ready) {
        g.plan_id = rx->plan_id;
        g.count = rx->count;
        g.missing_count = rx->count - rx->have;
        uint32_t base = 0;
        while (base < rx->count && held(rx, base)) base++;
        g.base = base;
        g.bits = rx->count - base;
        for (uint32_t i = 0; i < g.bits; i++)
            if (!held(rx, base + i)) g.missing[i >> 3] |= (uint8_t)(1u << (i & 7u));
    } else if (rx->last_plan_id) {
        g.plan_id = rx->last_plan_id;
        g.count = g.base = rx->last_count;
        g.complete = 1;
        g.verdict = rx->last_verdict;
    }
    *out = g;
    return VEER_OK;
}

veer_status veer_link_gap_frame(const veer_link_receiver *rx, uint8_t *out, size_t capacity, size_t *size) {
    if (!rx || !size) return VEER_ERR_NULL;
    veer_link_gaps g;
    veer_status st = veer_link_receiver_gaps(rx, &g);
    if (st != VEER_OK) return st;
    return veer__link_gaps_frame(&rx->def, &g, out, capacity, size);
}

veer_status veer_link_report_frame(const veer_link_receiver *rx, const veer_link_report *report, uint8_t *out,
                                   size_t capacity, size_t *size) {
    if (!rx || !report || !size) return VEER_ERR_NULL;
    return veer__link_report_frame(&rx->def, report, out, capacity, size);
}
