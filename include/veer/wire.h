/* veer: the message interface. Bytes in, bytes out: protobuf messages of the
 * schema in proto/veer/v1/ (package veer.v1); no protobuf types cross this
 * header.
 *
 * Untrusted input: every function here treats its input bytes as untrusted.
 * Truncated or garbage bytes, unknown enum values, out-of-range or NaN
 * values and lists longer than their fixed capacities get a named status and
 * a message; output buffers are written only on success (or, for
 * veer_plan_request_pb, with a complete reply that names the error), never
 * partly.
 *
 * Capacities (the .options files in proto/veer/v1): VEER_MAX_MODULES modules,
 * VEER_MAX_LEGS legs, VEER_MAX_WAYPOINTS waypoints, VEER_WIRE_MAX_KNOTS grid
 * points in a decoded plan, VEER_WIRE_MAX_PROFILE_BYTES bytes of compressed
 * profile.
 *
 * Python classes for these messages: the CMake target veer_python_proto
 * (built by default) runs protoc --python_out and writes
 * <build>/python/veer/v1/{drive,limits,route,plan,setpoints}_pb2.py
 * (-DVEER_PYTHON_PROTO_OUT=<dir> writes them elsewhere).
 * SPDX-License-Identifier: MIT */
#ifndef VEER_WIRE_H
#define VEER_WIRE_H

#include <stddef.h>
#include <stdint.h>
#include "veer/status.h"
#include "veer/plan.h"

#ifdef __cplusplus
extern "C" {
#endif

/* The schema version this library reads and writes; it is in every Plan,
 * PlanReply and SetpointTable it writes. */
#define VEER_WIRE_SCHEMA_VERSION 1
VEER_API unsigned veer_wire_schema_version(void);

/* Grid points a plan decoded from bytes holds at most (its knots, the pieces
 * knot intervals are split into, and the rests), and the compressed
 * profile's byte capacity. The encoder refuses (VEER_ERR_CAPACITY) a plan
 * whose profile does not fit; the demo scenario needs about 160 points and
 * 600 bytes. */
#define VEER_WIRE_MAX_KNOTS 2048
#define VEER_WIRE_MAX_PROFILE_BYTES 16384

/* Plans a request. request: PlanRequest bytes (size may be 0: an empty
 * message). Writes a PlanReply into reply: on success it holds the plan, the
 * per-leg summaries and per grid point s, sdot and the binding limit; on a
 * planning or input error it names the status and carries the diagnostic.
 * The return value is the reply's status (VEER_OK when planned).
 * *reply_size gets the reply's size. If reply is NULL or reply_capacity is
 * smaller than that, returns VEER_ERR_BUFFER and leaves reply untouched
 * (*reply_size still says what is needed; the call plans again when repeated,
 * so a capacity of veer_plan_reply_size_bound() avoids the second call).
 * Only a NULL reply_size gets VEER_ERR_NULL with nothing written.
 * Allocates (the planner does); not for the cart side. */
VEER_API VEER_NODISCARD veer_status veer_plan_request_pb(const uint8_t *request, size_t request_size, uint8_t *reply,
                                                         size_t reply_capacity, size_t *reply_size);

/* A capacity that holds any PlanReply for a plan of grid_points grid points
 * (an upper bound, not the exact size). */
VEER_API size_t veer_plan_reply_size_bound(int grid_points);

/* Samples received Plan bytes at time t (as veer_plan_sample). Allocates
 * nothing: the decoded plan lives in a workspace on the stack of
 * veer_plan_workspace_size() bytes (about 320 KiB on x86-64). Callers with small stacks,
 * and callers that sample one plan many times, use veer_plan_load_pb with a
 * workspace of their own instead. */
VEER_API VEER_NODISCARD veer_status veer_plan_sample_pb(const uint8_t *plan, size_t plan_size, double t,
                                                        veer_sample *out);

/* Bytes of workspace veer_plan_load_pb needs: fixed, sized for the schema's
 * capacities. */
VEER_API size_t veer_plan_workspace_size(void);

/* Decodes Plan bytes into a plan that lives in work (work_size >=
 * veer_plan_workspace_size(), aligned for double). Allocates nothing.
 * Checks the schema version, the path model, the content hash and every
 * value; rebuilds the path from the route and the timeline from the profile.
 * On success *out points into work and can be used with every veer_plan_*
 * reader (sample, table, leg, grid, path_at) for as long as work is kept;
 * never pass it to veer_plan_destroy. On failure *out is NULL, diag (may be
 * NULL) says why, and work holds nothing usable. */
VEER_API VEER_NODISCARD veer_status veer_plan_load_pb(const uint8_t *plan, size_t plan_size, void *work,
                                                      size_t work_size, const veer_plan **out, veer_diag *diag);

/* Decodes Plan bytes into a new plan on the heap (through the allocator
 * hook), owned by the caller until veer_plan_destroy. Its grid is the
 * profile's knots. Same checks as veer_plan_load_pb. */
VEER_API VEER_NODISCARD veer_status veer_plan_decode_pb(const uint8_t *plan, size_t plan_size, veer_plan **out,
                                                        veer_diag *diag);

/* Encodes a plan (made by veer_plan_create or decoded) as Plan bytes: the
 * drive, limits, route and a compressed profile checked against the plan by
 * sampling (pose within 1 mm and 0.1 degree, setpoints within 0.5 % of the
 * limits). Buffer rules as veer_plan_request_pb: *size gets the size needed;
 * too small or NULL out gives VEER_ERR_BUFFER with out untouched. diag may be
 * NULL. A player's plan (veer_player_plan) keeps no route: VEER_ERR_STATE. */
VEER_API VEER_NODISCARD veer_status veer_plan_encode_pb(const veer_plan *plan, uint8_t *out, size_t capacity,
                                                        size_t *size, veer_diag *diag);

/* Samples received Plan bytes at rate_hz (rows as veer_plan_table) and
 * writes a SetpointTable. Buffer rules as veer_plan_request_pb. Allocates
 * the decoded plan's workspace (veer_plan_workspace_size()) on the heap. */
VEER_API VEER_NODISCARD veer_status veer_plan_table_pb(const uint8_t *plan, size_t plan_size, double rate_hz,
                                                       uint8_t *out, size_t capacity, size_t *size);

/* What a cart needs to take a plan: the capacities of veer_player_def
 * (player.h) it must have at least. */
typedef struct {
    uint32_t plan_bytes; /* link.max_plan_bytes: the Plan message's size, at least VEER_LINK_MIN_PLAN_BYTES (link.h) */
    uint32_t knots;      /* the profile's grid points (max_knots) */
    uint32_t waypoints;  /* the route's waypoints (max_waypoints) */
    uint32_t legs;       /* the route's legs (max_legs) */
    uint32_t modules;    /* the drive's modules (the cart's drive must be the plan's) */
} veer_plan_needs;

/* Reads a plan's needs off its Plan bytes, checked as veer_plan_decode_pb
 * checks them (ground side: allocates). A cart set up with the largest
 * needs of the plans it will run takes every one of them in the least
 * memory (veer_player_size_for). out untouched on failure. */
VEER_API VEER_NODISCARD veer_status veer_plan_needs_pb(const uint8_t *plan, size_t plan_size, veer_plan_needs *out,
                                                       veer_diag *diag);

#ifdef __cplusplus
}
#endif
#endif
