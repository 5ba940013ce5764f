/* veer: the player, the cart-side part that takes plans off the radio link,
 * arms them and steps them at the control rate.
 *
 * A plan is armed only when the link hands it over whole and authentic
 * (link.h), it decodes (veer_plan_load_pb, into the player's workspace; a
 * plan that fails leaves the armed one as it was: the player decodes the
 * armed plan again from the copy of its bytes it keeps), it
 * names this cart (when the plan carries a cart name) and it was planned for
 * exactly this cart's drive and limits. "Exactly" means: the canonical
 * DriveDef and Limits messages of the plan and of the cart's configuration
 * (fields that apply to the drive kind, unset limits left out, identical
 * module limits once; steering limits do not count for fixed-wheel drives)
 * have the same SHA-256. Arming switches atomically; a plan is armed only
 * while the cart stands (idle, armed or stopped): one refused as BUSY, like
 * any refused plan, has to be sent again under a new plan counter.
 *
 * An armed plan starts on an authenticated START command and then runs once.
 * A controlled stop (brake along the planned path as hard as the plan's
 * limits allow, in the manner of IEC 60204-1 stop categories 1 and 2; the
 * braking of veer_plan_stop_sample, which the range checks use too) happens
 * on a STOP command, on veer_player_stop, and when no authenticated frame (a
 * command, or a plan whose tag verified) has come for link_timeout seconds.
 * After a stop, or the plan's end, the player stands in STOPPED with the
 * reason; it never moves again by itself: only a new plan (with a newer
 * counter) and a new START do.
 *
 * Time: `now` is the cart's monotonic clock in seconds; every call takes
 * it and it must not go backwards. The player allocates nothing; its memory
 * (veer_player_size_for(): the receiver, a copy of the armed plan's bytes and
 * one workspace for a decoded plan, each sized by the cart's capacity: its
 * module count and the largest plan it takes) is the caller's. Calls on one
 * player must not run concurrently.
 * SPDX-License-Identifier: MIT */
#ifndef VEER_PLAYER_H
#define VEER_PLAYER_H

#include <stddef.h>
#include <stdint.h>
#include "veer/status.h"
#include "veer/drive.h"
#include "veer/plan.h"
#include "veer/link.h"

#ifdef __cplusplus
extern "C" {
#endif

/* The numbers are those of veer.v1.PlayerState. */
#define VEER_PLAYER_STATE_TABLE(X)                                                \
    X(IDLE, 1, "idle: no plan armed")                                             \
    X(ARMED, 2, "armed: a plan waits for START")                                  \
    X(RUNNING, 3, "running the plan")                                             \
    X(STOPPING, 4, "controlled stop along the path")                              \
    X(STOPPED, 5, "stopped: at rest, waits for a new plan")                       \
    X(FAULT, 6, "fault: no setpoint could be computed, wheels commanded to zero")

typedef enum {
#define VEER_PLAYER_STATE_ENUM_(name, value, text) VEER_PLAYER_##name = value,
    VEER_PLAYER_STATE_TABLE(VEER_PLAYER_STATE_ENUM_)
#undef VEER_PLAYER_STATE_ENUM_
} veer_player_state;

/* The numbers are those of veer.v1.StopReason. */
#define VEER_STOP_REASON_TABLE(X)                                              \
    X(NONE, 0, "no stop yet")                                                  \
    X(END_OF_PLAN, 1, "the plan ran to its end")                               \
    X(COMMAND, 2, "STOP command from the ground station")                      \
    X(LINK_LOST, 3, "no authenticated frame within the link timeout")          \
    X(LOCAL, 4, "the cart's own controller asked for a stop")                  \
    X(FAULT, 5, "no setpoint could be computed")

typedef enum {
#define VEER_STOP_REASON_ENUM_(name, value, text) VEER_STOP_##name = value,
    VEER_STOP_REASON_TABLE(VEER_STOP_REASON_ENUM_)
#undef VEER_STOP_REASON_ENUM_
} veer_stop_reason;

/* "RUNNING", ...; "UNKNOWN" outside the table. */
VEER_API const char *veer_player_state_name(int state);
VEER_API const char *veer_player_state_str(int state);
/* "LINK_LOST", ...; "UNKNOWN" outside the table. */
VEER_API const char *veer_stop_reason_name(int reason);
VEER_API const char *veer_stop_reason_str(int reason);

/* The cart: what its plans must have been made for, and its link. */
typedef struct {
    veer_link_def link;          /* cart number, key, frame size */
    veer_drive_def drive;        /* the cart's drive */
    veer_limits limits;          /* the limits its plans must have been made with */
    char cart_name[64];          /* UTF-8; a plan that carries a cart name must carry this one; "" checks none */
    double link_timeout;         /* s without an authenticated frame before a running cart stops; default 1.0, 0.05..60 */
    uint64_t accepted_plan_id;   /* highest plan counter accepted before (non-volatile memory), 0 for none */
    uint64_t command_seq;        /* highest command sequence accepted before, 0 for none */
    /* The largest plan the cart takes, which sizes its memory
     * (veer_player_size_for) with link.max_plan_bytes and the drive's module
     * count: the profile's knots (Profile.knot_count, plan.proto), the
     * route's waypoints and legs; a drive with fixed wheels keeps no steer
     * angles at the knots (4 bytes, a float, a knot and module less). 0: the library's
     * maxima (VEER_WIRE_MAX_KNOTS, VEER_MAX_WAYPOINTS, VEER_MAX_LEGS). A
     * larger plan (or one for more modules than the drive has, or for
     * steered modules on fixed wheels) is refused with reason CAPACITY and
     * changes nothing. veer_plan_needs_pb (wire.h) reads a plan's needs. */
    uint32_t max_knots, max_waypoints, max_legs;
} veer_player_def;

/* veer_default_link_def(), a steered default drive, unset limits, no
 * name, 1 s timeout, counters 0, capacities 0 (the maxima). */
VEER_API veer_player_def veer_default_player_def(void);

/* A player definition from CartConfig message bytes (link.proto): cart
 * number, name, drive, limits, link timeout, frame size; every other field
 * as veer_default_player_def(). The key is not in the message: set
 * out->link.key afterwards. Untrusted bytes: a named status and diag on
 * failure (ERR_DECODE, ERR_VALUE, ...), out untouched. Does not check the
 * drive and limits (veer_player_init does). */
VEER_API VEER_NODISCARD veer_status veer_player_def_from_pb(const uint8_t *config, size_t size,
                                                            veer_player_def *out, veer_diag *diag);

typedef struct veer_player veer_player;

/* Bytes of memory a player for def needs (aligned for double); 0 for a
 * NULL def or capacities out of range (veer_player_init says which). */
VEER_API size_t veer_player_size_for(const veer_player_def *def);
/* The same for 8 modules and every capacity at its maximum: enough for any def. */
VEER_API size_t veer_player_size(void);

/* Sets up a player in memory (size >= veer_player_size_for(def), aligned
 * for double): checks the definition (link, drive, limits, name, timeout,
 * capacities) and starts IDLE. On failure *out is NULL and diag says why. */
VEER_API VEER_NODISCARD veer_status veer_player_init(void *memory, size_t size, const veer_player_def *def,
                                                     veer_player **out, veer_diag *diag);

/* What one frame did to the player. */
typedef struct {
    veer_link_event link;  /* the receiver's view (link.h) */
    int reason;            /* veer_link_reason: NONE when taken; the arming verdict for a ready plan */
    int armed;             /* 1: the frame armed a plan */
    int started;           /* 1: the frame started the armed plan */
    int stopped;           /* 1: the frame began a controlled stop */
    int report_due;        /* 1: send the ground station a report now (veer_player_report_frame) */
} veer_player_event;

/* Takes one received frame at time now: reassembly, arming, commands, the
 * link watchdog. VEER_OK with ev filled (refusals are in ev->reason);
 * VEER_ERR_NULL; VEER_ERR_VALUE for a now that is not finite or goes
 * backwards (nothing changes). */
VEER_API VEER_NODISCARD veer_status veer_player_frame(veer_player *player, const uint8_t *frame, size_t size,
                                                      double now, veer_player_event *ev);

/* Steps the player to time now and writes the setpoints for now: while
 * running, the plan's sample at plan time now - start; while stopping, the
 * controlled stop's; otherwise the body at rest (wheel rates, wheel and
 * steer accelerations zero) with the steer angles held where they were.
 * out->phase is the plan phase while running (DONE otherwise). Work per
 * call is bounded: a stop advances at most 0.1 s of braking per call (a
 * controller that calls less often than 10 Hz sees a slower stop).
 * VEER_ERR_NULL; VEER_ERR_VALUE for a bad now (nothing changes). */
VEER_API VEER_NODISCARD veer_status veer_player_step(veer_player *player, double now, veer_sample *out);

/* A controlled stop asked for by the cart itself (bumper, local switch):
 * reason VEER_STOP_LOCAL, from RUNNING; an armed plan is dropped. */
VEER_API VEER_NODISCARD veer_status veer_player_stop(veer_player *player, double now);

/* The player's state now (without stepping it). */
VEER_API VEER_NODISCARD veer_status veer_player_status(const veer_player *player, veer_link_report *out);

/* A tagged report frame of the player's state; counts the report.
 * Buffer rules as wire.h. */
VEER_API VEER_NODISCARD veer_status veer_player_report_frame(veer_player *player, uint8_t *out, size_t capacity,
                                                             size_t *size);
/* The player's state as PlayerReport message bytes (link.proto), untagged. */
VEER_API VEER_NODISCARD veer_status veer_player_report_pb(const veer_player *player, uint8_t *out,
                                                          size_t capacity, size_t *size);
/* A tagged gap-report frame of the player's receiver. */
VEER_API VEER_NODISCARD veer_status veer_player_gap_frame(const veer_player *player, uint8_t *out,
                                                          size_t capacity, size_t *size);

/* The armed, running or last plan (NULL before the first): a decoded plan
 * for the veer_plan_* readers, valid until the next complete plan arrives.
 * It keeps no route (the cart rebuilds the path from the route in the
 * plan's bytes and drops it), so veer_plan_encode_pb refuses it. */
VEER_API const veer_plan *veer_player_plan(const veer_player *player);
/* The player's receiver (counts per reason, counters). */
VEER_API const veer_link_receiver *veer_player_receiver(const veer_player *player);

#ifdef __cplusplus
}
#endif
#endif
