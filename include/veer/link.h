/* veer: the radio link that carries plans to a cart.
 *
 * A long-range sub-GHz radio carries at most a few hundred bytes a frame at
 * a few kbit/s and loses, repeats, reorders and corrupts frames. The link
 * makes sure a cart takes only a whole, authentic, current plan:
 *
 *   - the ground station seals the Plan bytes (wire.h) with a plan tag,
 *     HMAC-SHA-256 under the cart's pre-shared key (RFC 2104 over FIPS 180-4
 *     SHA-256, veer's own), over the cart number, the plan counter and the bytes;
 *   - cuts the sealed plan into chunks, one per frame, each frame at most
 *     the link's frame size (default 255 bytes: one radio payload) with a
 *     CRC-32 (IEEE 802.3) at its end;
 *   - the cart collects chunks in any order, ignores duplicates and frames
 *     of older plans, answers with gap reports (a bitmap of the chunks it
 *     still lacks) so that only those are sent again, and hands the plan on
 *     only when every chunk is in, the tag verifies and the plan counter is
 *     newer than the last it accepted (replay protection);
 *   - commands (heartbeat, start, stop) and the cart's reports carry a
 *     16-byte frame tag (HMAC-SHA-256 truncated, RFC 2104 section 5) and
 *     commands a sequence number that must increase.
 *
 * The frames' layout is proto/veer/v1/link.proto. Every frame a receiver
 * refuses gets a reason (veer_link_reason); nothing a frame holds is trusted
 * before its checks pass. The cart side (the receiver, and the player in
 * player.h) allocates nothing and does bounded work per frame: checksum,
 * decode and copy of one frame; the frame that completes a plan adds one
 * HMAC over at most VEER_LINK_MAX_PLAN_BYTES bytes. The ground side
 * (sender, command frames, parsing the cart's frames) may allocate.
 *
 * The threat model is in SECURITY.md. Keys are pre-shared per cart; they
 * are never part of a plan or a frame and the library never prints them.
 * SPDX-License-Identifier: MIT */
#ifndef VEER_LINK_H
#define VEER_LINK_H

#include <stddef.h>
#include <stdint.h>
#include "veer/status.h"

#ifdef __cplusplus
extern "C" {
#endif

#define VEER_LINK_KEY_BYTES 32       /* pre-shared key of a cart */
#define VEER_LINK_PLAN_TAG_BYTES 32  /* plan tag: full HMAC-SHA-256 */
#define VEER_LINK_FRAME_TAG_BYTES 16 /* command and report tag: HMAC-SHA-256 truncated */
#define VEER_LINK_FRAME_DEFAULT 255  /* bytes a frame holds by default, checksum included */
#define VEER_LINK_FRAME_MIN 160      /* smallest frame size a link may be set to (a player report fits) */
#define VEER_LINK_FRAME_MAX 1024     /* largest (link.options: PlanChunk.data) */
#define VEER_LINK_MAX_PLAN_BYTES 32768 /* Plan bytes a cart receives at most (any Plan message fits) */
#define VEER_LINK_MIN_PLAN_BYTES 256   /* smallest plan capacity a cart may be given (veer_link_def.max_plan_bytes) */
#define VEER_LINK_MAX_CHUNKS 2048    /* chunks a sealed plan may have (link.options: GapReport.missing * 8) */

/* Why a frame or a plan was refused: one table builds the enum,
 * veer_link_reason_name() and veer_link_reason_str(). NONE: taken. The
 * numbers are those of veer.v1.LinkReason. */
#define VEER_LINK_REASON_TABLE(X)                                                                   \
    X(NONE, 0, "taken")                                                                             \
    X(FRAME_SIZE, 1, "the frame is larger than the link's frame size")                               \
    X(TRUNCATED, 2, "the frame is too short to hold its fields and checksum")                        \
    X(CRC, 3, "the frame's CRC-32 does not match its bytes")                                         \
    X(MALFORMED, 4, "the frame's fields do not decode as a link frame")                              \
    X(OTHER_CART, 5, "the frame is for (or from) another cart")                                      \
    X(WRONG_DIRECTION, 6, "this side never receives frames of that kind")                            \
    X(CHUNK_RANGE, 7, "chunk index, chunk count, plan size or chunk length out of range")            \
    X(INCONSISTENT, 8, "the chunk's count or size differs from the plan being received")             \
    X(STALE, 9, "the chunk belongs to an older plan than the one being received")                    \
    X(REPLAY, 10, "the plan counter is not newer than the last plan accepted")                       \
    X(DUPLICATE, 11, "the chunk is already held (harmless)")                                         \
    X(PLAN_TAG, 12, "the plan tag does not verify: corrupted or forged, or another key")             \
    X(FRAME_TAG, 13, "the frame tag does not verify: corrupted or forged, or another key")           \
    X(COMMAND_REPLAY, 14, "the command's sequence number is not newer than the last accepted")       \
    X(COMMAND, 15, "unknown command kind")                                                           \
    X(DECODE, 16, "the plan does not decode (wire.h)")                                               \
    X(CART_NAME, 17, "the plan names another cart")                                                  \
    X(DRIVE, 18, "the plan was made for another drive than this cart's")                             \
    X(LIMITS, 19, "the plan was made for other limits than this cart's")                             \
    X(BUSY, 20, "no plan is armed while the cart moves")                                             \
    X(STATE, 21, "the command does not fit the player's state")                                      \
    X(NOT_ARMED, 22, "START names a plan that is not the armed one")                                \
    X(CAPACITY, 23, "the plan is larger than this cart takes (plan bytes, knots, waypoints or legs)")

typedef enum {
#define VEER_LINK_REASON_ENUM_(name, value, text) VEER_LINK_##name = value,
    VEER_LINK_REASON_TABLE(VEER_LINK_REASON_ENUM_)
#undef VEER_LINK_REASON_ENUM_
    VEER_LINK_REASON_COUNT
} veer_link_reason;

/* "CRC", "PLAN_TAG", ...; "UNKNOWN" outside the table. */
VEER_API const char *veer_link_reason_name(int reason);
/* Its meaning in words; "unknown reason" outside the table. */
VEER_API const char *veer_link_reason_str(int reason);

typedef enum {
    VEER_LINK_COMMAND_HEARTBEAT = 1, /* keeps the cart's link watchdog fed */
    VEER_LINK_COMMAND_START = 2,     /* starts the armed plan */
    VEER_LINK_COMMAND_STOP = 3       /* controlled stop */
} veer_link_command;

typedef enum {
    VEER_LINK_KIND_CHUNK = 1,   /* ground to cart */
    VEER_LINK_KIND_COMMAND = 2, /* ground to cart */
    VEER_LINK_KIND_GAPS = 3,    /* cart to ground */
    VEER_LINK_KIND_REPORT = 4   /* cart to ground */
} veer_link_kind;

/* One cart's link. Both ends use the same. */
typedef struct {
    uint32_t cart;                    /* the cart's number on the range */
    uint8_t key[VEER_LINK_KEY_BYTES]; /* its pre-shared key; all zero is refused */
    int frame_size;                   /* bytes per frame, checksum included, VEER_LINK_FRAME_MIN..MAX */
    /* Plan bytes the cart takes at most (the receiver's buffer, the
     * player's copy of the armed plan): VEER_LINK_MIN_PLAN_BYTES..
     * VEER_LINK_MAX_PLAN_BYTES, 0 for VEER_LINK_MAX_PLAN_BYTES. The sender
     * refuses a larger plan; the receiver refuses its chunks (CAPACITY). */
    uint32_t max_plan_bytes;
} veer_link_def;

/* Cart 0, a zero key (which must be replaced), VEER_LINK_FRAME_DEFAULT,
 * max_plan_bytes 0 (VEER_LINK_MAX_PLAN_BYTES). */
VEER_API veer_link_def veer_default_link_def(void);

/* Checks a link definition: ERR_NULL, ERR_VALUE (frame size or plan
 * capacity out of range, all-zero key). */
VEER_API VEER_NODISCARD veer_status veer_link_def_check(const veer_link_def *def, veer_diag *diag);

/* CRC-32 of IEEE 802.3 (reflected, polynomial 0x04C11DB7, initial value and
 * final XOR 0xFFFFFFFF), continued from crc (0 to begin). */
VEER_API uint32_t veer_link_crc32(uint32_t crc, const void *data, size_t size);

/* HMAC-SHA-256 (RFC 2104 over FIPS 180-4 SHA-256, veer's own code) of data
 * under a key of any length. Key and data may be NULL when their size is 0. */
VEER_API VEER_NODISCARD veer_status veer_link_hmac_sha256(const uint8_t *key, size_t key_size, const void *data,
                                                          size_t size, uint8_t out[32]);

/* ---- ground side: sending ----------------------------------------------- */

/* A sealed plan cut into frames. Allocates (ground side). */
typedef struct veer_link_sender veer_link_sender;

/* Seals plan (Plan bytes, 1..VEER_LINK_MAX_PLAN_BYTES; copied) as plan
 * plan_id (>= 1: every plan a cart is sent needs a counter above the last it
 * accepted, e.g. microseconds since an epoch) for def's cart. */
VEER_API VEER_NODISCARD veer_status veer_link_sender_create(const veer_link_def *def, uint64_t plan_id,
                                                            const uint8_t *plan, size_t plan_size,
                                                            veer_link_sender **out, veer_diag *diag);
VEER_API void veer_link_sender_destroy(veer_link_sender *sender);
/* Chunks (frames) the sealed plan takes; 0 for NULL. */
VEER_API int veer_link_sender_chunk_count(const veer_link_sender *sender);
/* The plan tag (32 bytes). */
VEER_API VEER_NODISCARD veer_status veer_link_sender_tag(const veer_link_sender *sender, uint8_t tag[32]);
/* The frame of chunk index. Buffer rules as wire.h: *size gets the frame's
 * size; out NULL or too small gives VEER_ERR_BUFFER, out untouched. */
VEER_API VEER_NODISCARD veer_status veer_link_sender_frame(const veer_link_sender *sender, int index, uint8_t *out,
                                                           size_t capacity, size_t *size);

/* A command frame (veer_link_command kind) with sequence number seq (>= 1,
 * greater than any the cart accepted); plan_id names the plan to START
 * (0 for the others). Buffer rules as above. */
VEER_API VEER_NODISCARD veer_status veer_link_command_frame(const veer_link_def *def, uint64_t seq, int kind,
                                                            uint64_t plan_id, uint8_t *out, size_t capacity,
                                                            size_t *size);

/* ---- what a cart sends back --------------------------------------------- */

/* Gap report: what the cart lacks of the plan it receives. */
typedef struct {
    uint64_t plan_id;       /* the plan (0: none yet) */
    uint32_t count;         /* its chunks */
    uint32_t base;          /* first chunk the bitmap describes */
    uint32_t bits;          /* chunks the bitmap describes: base .. base + bits - 1 */
    uint8_t missing[VEER_LINK_MAX_CHUNKS / 8]; /* bit i (LSB first) of byte i / 8: chunk base + i missing */
    uint32_t missing_count; /* all chunks missing, including any beyond the bitmap */
    int complete;           /* 1: every chunk came; verdict says what became of the plan */
    int verdict;            /* veer_link_reason: NONE when accepted */
} veer_link_gaps;

/* The player's state (player.h) as a cart reports it. */
typedef struct {
    int state;                 /* veer_player_state */
    uint64_t plan_id;          /* plan armed, running or last run; 0 none */
    double t;                  /* s of plan time */
    double s, sdot;            /* path position and speed (s units, s units per second) */
    int leg;                   /* leg index, -1 without a plan */
    int stop_reason;           /* veer_stop_reason of the last stop */
    int last_rejection;        /* veer_link_reason of the last frame or plan refused */
    uint64_t accepted_plan_id; /* highest plan counter accepted */
    uint64_t command_seq;      /* highest command sequence accepted */
    double pose[3];            /* planned pose now: x, y (m), yaw (rad), world */
    uint32_t report_seq;       /* reports sent since the cart started */
} veer_link_report;

/* A frame as the other side decoded it. Only the part of kind is filled. */
typedef struct {
    int kind;      /* veer_link_kind */
    uint32_t cart;
    /* chunk */
    uint64_t plan_id;
    uint32_t chunk_index, chunk_count, sealed_size, data_size;
    /* command */
    uint64_t seq;
    int command;   /* veer_link_command */
    veer_link_gaps gaps;
    veer_link_report report;
} veer_link_message;

/* Ground side: checks and decodes a frame from def's cart: size, checksum,
 * fields, cart number, and for gap reports and player reports the frame tag.
 * VEER_OK with out filled, or VEER_ERR_DECODE with *reason (may be NULL)
 * saying why and out untouched. Chunk and command frames decode too (their
 * tag checked), so the ground station can read its own frames back. */
VEER_API VEER_NODISCARD veer_status veer_link_parse(const veer_link_def *def, const uint8_t *frame, size_t size,
                                                    veer_link_message *out, int *reason);

/* ---- cart side: receiving ----------------------------------------------- */

/* The cart's receiver: one plan in reassembly (a buffer of the link's
 * max_plan_bytes + tag), the highest plan counter and command sequence
 * accepted, and a count of frames per reason. Lives in memory the caller
 * provides; allocates nothing. */
typedef struct veer_link_receiver veer_link_receiver;

/* Bytes of memory a receiver for def needs (aligned for double): about
 * 520 + def->max_plan_bytes; 0 for a NULL def. */
VEER_API size_t veer_link_receiver_size_for(const veer_link_def *def);
/* The same for the largest capacity (VEER_LINK_MAX_PLAN_BYTES): enough for any def. */
VEER_API size_t veer_link_receiver_size(void);

/* Sets up a receiver in memory (size >= veer_link_receiver_size_for(def),
 * aligned for double). accepted_plan_id and command_seq are the highest plan
 * counter and command sequence this cart accepted before (kept in
 * non-volatile memory across restarts, so that old plans and commands
 * cannot be replayed after a reboot; 0 for a new cart). */
VEER_API VEER_NODISCARD veer_status veer_link_receiver_init(void *memory, size_t size, const veer_link_def *def,
                                                            uint64_t accepted_plan_id, uint64_t command_seq,
                                                            veer_link_receiver **out, veer_diag *diag);

/* What one received frame did. */
typedef struct {
    int kind;           /* veer_link_kind, 0 if the frame did not decode */
    int reason;         /* veer_link_reason: NONE when the frame was taken */
    uint64_t plan_id;   /* chunk: its plan; command: its plan_id field */
    int plan_ready;     /* 1: the frame completed a plan whose tag verifies and whose counter is newer;
                           read it with veer_link_receiver_plan, then veer_link_receiver_settle */
    int command;        /* veer_link_command of an authenticated, newer command; 0 otherwise */
    uint64_t seq;       /* that command's sequence number */
    int gaps_due;       /* 1: send the ground station a gap report now (veer_link_gap_frame) */
} veer_link_event;

/* Takes one frame (untrusted bytes, any size). VEER_OK with ev filled
 * whether the frame was taken or refused (ev->reason says which);
 * VEER_ERR_NULL for NULL rx or ev; VEER_ERR_STATE when a ready plan has not
 * been settled yet (nothing changes). */
VEER_API VEER_NODISCARD veer_status veer_link_receive(veer_link_receiver *rx, const uint8_t *frame, size_t size,
                                                      veer_link_event *ev);

/* The ready plan's Plan bytes (inside rx, valid until it is settled) and counter. */
VEER_API VEER_NODISCARD veer_status veer_link_receiver_plan(const veer_link_receiver *rx, const uint8_t **plan,
                                                            size_t *plan_size, uint64_t *plan_id);

/* Settles the ready plan: verdict NONE accepts it (its counter becomes the
 * highest accepted), any other veer_link_reason refuses it. The verdict goes
 * into the gap reports. VEER_ERR_STATE if no plan is ready. */
VEER_API VEER_NODISCARD veer_status veer_link_receiver_settle(veer_link_receiver *rx, int verdict);

/* Highest plan counter and command sequence accepted so far. */
VEER_API uint64_t veer_link_receiver_accepted(const veer_link_receiver *rx);
VEER_API uint64_t veer_link_receiver_command_seq(const veer_link_receiver *rx);
/* Frames taken (NONE) or refused for reason so far. */
VEER_API uint32_t veer_link_receiver_count(const veer_link_receiver *rx, int reason);
/* The gap report the receiver would send now. */
VEER_API VEER_NODISCARD veer_status veer_link_receiver_gaps(const veer_link_receiver *rx, veer_link_gaps *out);

/* A tagged gap-report frame of the receiver's state (fits the frame size:
 * the bitmap starts at the first missing chunk and holds what fits).
 * Buffer rules as above. */
VEER_API VEER_NODISCARD veer_status veer_link_gap_frame(const veer_link_receiver *rx, uint8_t *out,
                                                        size_t capacity, size_t *size);
/* A tagged player-report frame from the receiver's cart. */
VEER_API VEER_NODISCARD veer_status veer_link_report_frame(const veer_link_receiver *rx,
                                                           const veer_link_report *report, uint8_t *out,
                                                           size_t capacity, size_t *size);

#ifdef __cplusplus
}
#endif
#endif
