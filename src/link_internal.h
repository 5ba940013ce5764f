/* veer internals of the radio link (link_*.c) and the player (player.c).
 * Not installed; nanopb types stay behind this header.
 * SPDX-License-Identifier: MIT */
#ifndef VEER_LINK_INTERNAL_H
#define VEER_LINK_INTERNAL_H

#include <stdint.h>
#include <pb.h>
#include "internal.h"
#include "veer/link.h"
#include "veer/player.h"
#include "veer/v1/link.pb.h"

/* Plan bytes a link's cart takes at most (max_plan_bytes, 0: the largest),
 * and whether a max_plan_bytes is in range. */
static inline uint32_t veer__link_max_plan(const veer_link_def *def) {
    return def->max_plan_bytes ? def->max_plan_bytes : (uint32_t)VEER_LINK_MAX_PLAN_BYTES;
}
static inline int veer__link_max_plan_ok(uint32_t v) {
    return v == 0 || (v >= VEER_LINK_MIN_PLAN_BYTES && v <= VEER_LINK_MAX_PLAN_BYTES);
}
/* Encoded tag field at a frame's end: key 15 / wire type 2, length 16, tag. */
#define VEER__LINK_TAG_FIELD_BYTES (2 + VEER_LINK_FRAME_TAG_BYTES)

/* ---- link_mac.c: HMAC-SHA-256 over the link's messages ------------------- */

/* Plan tag over "veer-link-plan-1" || cart || plan_id || size || plan (RFC 2104). */
void veer__link_plan_tag(const uint8_t key[VEER_LINK_KEY_BYTES], uint32_t cart, uint64_t plan_id,
                         const uint8_t *plan, size_t size, uint8_t tag[VEER_LINK_PLAN_TAG_BYTES]);
/* Frame tag over "veer-link-frame-1" || body, truncated to 16 bytes (RFC 2104 section 5). */
void veer__link_frame_tag(const uint8_t key[VEER_LINK_KEY_BYTES], const uint8_t *body, size_t size,
                          uint8_t tag[VEER_LINK_FRAME_TAG_BYTES]);
/* Comparison of n bytes in time independent of their contents: 1 when equal. */
int veer__link_equal(const uint8_t *a, const uint8_t *b, size_t n);
/* Zeros n bytes at p with stores the compiler may not drop (key material). */
void veer__link_wipe(void *p, size_t n);

/* ---- link_frame.c: frames on the air -------------------------------------- */

/* Chunking of a sealed plan of `sealed` bytes for frames of frame_size
 * bytes: chunk count and bytes per chunk (all but the last). 0 when it
 * cannot be cut into at most VEER_LINK_MAX_CHUNKS chunks. */
int veer__link_chunking(uint32_t cart, uint64_t plan_id, uint32_t sealed, int frame_size, uint32_t *count,
                        uint32_t *chunk_bytes);
/* Bytes per chunk (all but the last) a (count, sealed) pair implies, and
 * the length of chunk index; 0 when the pair is inconsistent. */
uint32_t veer__link_chunk_bytes(uint32_t count, uint32_t sealed);
uint32_t veer__link_chunk_length(uint32_t index, uint32_t count, uint32_t sealed);

/* Encodes the LinkFrame {def->cart, body} whose body is the submessage msg
 * of kind (veer_v1_LinkFrame_*_tag, fields its descriptor), as nanopb
 * encodes that LinkFrame, tagged when tagged, with its CRC-32 into out (no
 * generated LinkFrame on the stack). Buffer rules as wire.h.
 * VEER_ERR_CAPACITY when the frame is larger than frame_size. */
veer_status veer__link_encode(const veer_link_def *def, pb_size_t kind, const pb_msgdesc_t *fields, const void *msg,
                              int tagged, uint8_t *out, size_t capacity, size_t *size);
/* A decoded frame: veer_v1_LinkFrame's fields, but a chunk's data and the
 * tag stay where they lie in the frame's bytes (no frame-sized copy on a
 * cart's stack: 312 bytes instead of the generated struct's 1080). */
typedef struct {
    uint64_t plan_id;
    uint32_t index, count, sealed_size;
    const uint8_t *data; /* [data_size] in the frame's bytes */
    size_t data_size;
} veer__link_chunk;

typedef struct {
    uint32_t cart;
    pb_size_t which_body; /* veer_v1_LinkFrame_*_tag of the body; 0: none */
    union {
        veer__link_chunk chunk;
        veer_v1_Command command;
        veer_v1_GapReport gaps;
        veer_v1_PlayerReport report;
    } body;
    const uint8_t *tag; /* [tag_size] in the frame's bytes */
    size_t tag_size;
} veer__link_frame;

/* Checks a frame's size and CRC and decodes it into frame (valid while the
 * frame's bytes are), with the outcome of nanopb's decoder of LinkFrame:
 * unknown fields skipped, a repeated field's last value kept, the body's
 * submessage merged into an earlier one of the same kind and started over
 * for another kind, a wrong wire type, a zero tag, a truncation, an integer
 * over its field or a bytes field over its capacity (link.options) malformed.
 * For tagged kinds (command, gaps, report) checks the tag. Returns a
 * veer_link_reason. */
int veer__link_decode(const veer_link_def *def, const uint8_t *bytes, size_t size, veer__link_frame *frame);

/* The frames of a cart's gap report and of a player report. */
veer_status veer__link_gaps_frame(const veer_link_def *def, const veer_link_gaps *g, uint8_t *out,
                                  size_t capacity, size_t *size);
veer_status veer__link_report_frame(const veer_link_def *def, const veer_link_report *r, uint8_t *out,
                                    size_t capacity, size_t *size);
/* A report as a PlayerReport message. */
void veer__link_report_to_pb(const veer_link_report *r, veer_v1_PlayerReport *m);

/* ---- link_receiver.c: the cart's receiver -------------------------------- */

struct veer_link_receiver {
    veer_link_def def;
    uint64_t accepted;          /* highest plan counter accepted */
    uint64_t command_seq;       /* highest command sequence accepted */
    /* The plan in reassembly. */
    int active;                 /* 1 while a plan is being received or waits to be settled */
    int ready;                  /* 1: complete, tag verified, waits for veer_link_receiver_settle */
    uint64_t plan_id;
    uint32_t count, sealed, chunk_bytes, have;
    uint8_t bitmap[VEER_LINK_MAX_CHUNKS / 8]; /* bit set: chunk held */
    /* The last plan that came complete, and what became of it. */
    uint64_t last_plan_id;
    uint32_t last_count;
    int last_verdict;
    uint32_t counts[VEER_LINK_REASON_COUNT];
    uint32_t capacity;          /* sealed bytes buf holds: max_plan_bytes + tag */
    uint8_t buf[];              /* [capacity] the plan in reassembly */
};

/* Sets up a receiver in place (def already checked). */
void veer__link_receiver_setup(veer_link_receiver *rx, const veer_link_def *def, uint64_t accepted,
                               uint64_t command_seq);

#endif
