/* veer internals of the message interface (wire_*.c): conversions between
 * the generated nanopb structs and veer's structs, the compact profile, the
 * content hash. Not installed; nanopb types stay behind this header.
 * SPDX-License-Identifier: MIT */
#ifndef VEER_WIRE_INTERNAL_H
#define VEER_WIRE_INTERNAL_H

#include <stdint.h>
#include <pb.h>
#include <pb_decode.h>
#include <pb_encode.h>
#include "plan_internal.h"
#include "veer/wire.h"
#include "veer/v1/plan.pb.h"
#include "veer/v1/setpoints.pb.h"

/* Version of the path construction (path.c) a Plan's route is rebuilt
 * with. Bump it whenever the same route would give a different path; a
 * decoder refuses plans made with another. */
#define VEER_WIRE_PATH_MODEL 1

/* ---- wire_request.c: messages <-> structs ------------------------------ */

/* Decodes size bytes as the message fields into msg (which it zeroes first).
 * what names the message in the diagnostic. Truncated or malformed bytes give
 * VEER_ERR_DECODE, a list or string over its capacity VEER_ERR_CAPACITY. */
veer_status veer__wire_decode(const pb_msgdesc_t *fields, void *msg, const uint8_t *buf, size_t size,
                              const char *what, veer_diag *diag);

/* Proto Status value <-> veer_status (proto = veer_status + 1). */
int veer__wire_status_to_pb(veer_status st);

/* Each *_from_pb checks every value (enum values known, counts consistent,
 * numbers finite where they must be) and fills out only on success (but
 * veer__wire_route_from_pb, which writes out as it goes: on failure out is
 * unspecified); the diagnostic names the field, e.g. "route.legs[2].kind". Semantic checks
 * (geometry, limits > 0) are left to veer_drive_check, the planner and the
 * path builder. */
veer_status veer__wire_drive_from_pb(const veer_v1_DriveDef *m, veer_drive_def *out, veer_diag *diag);
veer_status veer__wire_limits_from_pb(const veer_v1_Limits *m, int module_count, veer_limits *out, veer_diag *diag);
veer_status veer__wire_route_from_pb(const veer_v1_Route *m, int module_count, veer_route *out, veer_diag *diag);

/* A Route message as the rebuild reads it, from either source: the head
 * (the scalars, start steer and twist, the counts) and its legs and
 * waypoints, taken one at a time (veer__route_next) from a decoded
 * veer_v1_Route (msg) or where they lie in the bytes of the Route fields
 * (the cart's reader, wire_cart.c: a veer_v1_Route is 7.5 KB, sized for 64
 * waypoints). A Route field given again continues the first (nanopb's
 * merge): up to VEER__ROUTE_PIECES of them. */
#define VEER__ROUTE_PIECES 4
struct veer__route_cursor;
typedef struct {
    double start_x, start_y, start_yaw;
    pb_size_t start_steer_count;
    double start_steer[VEER_MAX_MODULES];
    bool has_start_twist;
    veer_v1_Twist start_twist;
    pb_size_t legs_count, waypoints_count;
    const veer_v1_Route *msg; /* the elements' source, read by msg_next (NULL: the bytes below) */
    int (*msg_next)(struct veer__route_cursor *c, void *out);
    int pieces;
    const uint8_t *piece[VEER__ROUTE_PIECES]; /* the Route fields' contents, in the order they came */
    size_t piece_size[VEER__ROUTE_PIECES];
} veer__route_in;

/* The head of m, its elements taken from m. */
void veer__route_in_from_msg(const veer_v1_Route *m, veer__route_in *out);

/* Walks a route's legs (veer_v1_Route_legs_tag) or waypoints in order. */
typedef struct veer__route_cursor {
    const veer__route_in *route;
    uint32_t tag;
    int index, piece;
    pb_istream_t s;
} veer__route_cursor;
void veer__route_cursor_init(veer__route_cursor *c, const veer__route_in *route, uint32_t tag);
/* The next element into out (a veer_v1_Leg or veer_v1_Waypoint): 1, or 0
 * after the last (elements that decoded once decode again). */
int veer__route_next(veer__route_cursor *c, void *out);

/* Where veer__wire_route_from_in writes a route: the head into view (its
 * legs and waypoints pointers set to the arrays), the legs and waypoints
 * into the caller's arrays with room for leg_cap and waypoint_cap. */
typedef struct {
    veer__route_view view;
    veer_leg *legs;           /* [leg_cap] */
    veer_waypoint *waypoints; /* [waypoint_cap] */
    int leg_cap, waypoint_cap;
} veer__route_buf;

/* veer__wire_route_from_pb from either source, into out: more legs or
 * waypoints than out has room for give VEER_ERR_CAPACITY (diag says how
 * many of each); on failure out's view and arrays are unspecified. */
veer_status veer__wire_route_from_in(const veer__route_in *m, int module_count, veer__route_buf *out,
                                     veer_diag *diag);
/* One module's limits as veer__wire_limits_to_pb writes them (a limit present when finite). */
void veer__wire_module_limits_to_pb(const veer_module_limits *l, veer_v1_ModuleLimits *m);
veer_status veer__wire_options_from_pb(const veer_v1_PlanOptions *m, veer_plan_options *out, veer_diag *diag);
/* What the planner takes from a PlanRequest (wire_api.c). */
typedef struct {
    veer_drive_def drive;
    veer_limits limits;
    veer_route route;
    veer_plan_options options;
} veer_wire_inputs;
/* Checks the request's schema version, that drive and route are there and
 * cart_id is UTF-8, and converts drive (checked), limits, route and options;
 * messages start with what ("request", ...). */
veer_status veer__wire_request_inputs(const veer_v1_PlanRequest *r, const char *what, veer_wire_inputs *out,
                                      veer_diag *diag);

/* Each *_to_pb writes the canonical message of a checked struct: fields that
 * apply to its kind, unset limits left out, identical module limits once. */
void veer__wire_drive_to_pb(const veer_drive_def *d, veer_v1_DriveDef *m);
void veer__wire_limits_to_pb(const veer_limits *l, int module_count, veer_v1_Limits *m);
void veer__wire_route_to_pb(const veer_route *r, int module_count, veer_v1_Route *m);
void veer__wire_options_to_pb(const veer_plan_options *o, veer_v1_PlanOptions *m);
void veer__wire_diag_to_pb(const veer_diag *d, veer_v1_Diagnostic *m);

/* 1 if s (NUL-terminated) is valid UTF-8, as proto3 strings must be. */
int veer__wire_utf8_ok(const char *s);

/* Encodes msg into out (capacity bytes): sizes it first, then writes only if
 * it fits. *size gets the encoded size. VEER_ERR_BUFFER (out untouched) when
 * out is NULL or too small; VEER_ERR_CAPACITY if the encoder refuses. */
veer_status veer__wire_encode(const pb_msgdesc_t *fields, const void *msg, uint8_t *out, size_t capacity,
                              size_t *size, veer_diag *diag);

/* ---- wire_sha256.c: SHA-256 (FIPS 180-4) ---------------------------------- */

typedef struct {
    uint32_t h[8];
    uint64_t bytes;
    uint8_t block[64];
    size_t fill;
} veer_sha256;

void veer__sha256_init(veer_sha256 *c);
void veer__sha256_update(veer_sha256 *c, const void *data, size_t size);
void veer__sha256_final(veer_sha256 *c, uint8_t digest[32]);
/* An output stream that writes what is encoded into it into the SHA-256
 * state c (pb_encode straight into a hash), without a size limit. */
pb_ostream_t veer__wire_hash_stream(veer_sha256 *c);

/* ---- wire_plan.c: plans <-> Plan messages -------------------------------- */

/* Fills m with the plan's Plan message: drive, limits, route, options, the
 * compressed profile (checked against the plan by sampling), duration,
 * length, cart_id and the content hash. With request (the checked request
 * the plan was made from) its drive, limits and route messages are carried
 * as they were phrased; otherwise the canonical ones are written. Options
 * are always written in full. */
veer_status veer__wire_plan_to_pb(const veer_plan *plan, const veer_v1_PlanRequest *request, veer_v1_Plan *m,
                                  veer_diag *diag);

/* SHA-256 of m's encoding with content_hash left empty (m is restored). */
veer_status veer__wire_plan_hash(veer_v1_Plan *m, uint8_t digest[32]);

/* The largest plan a decoded-plan workspace takes (a cart's capacity,
 * veer_player_def; the library's maxima for veer_plan_load_pb). */
typedef struct {
    int knots, waypoints, legs, modules;
    int route;   /* 1: the plan keeps its route (veer_plan_encode_pb needs it); 0: a cart's player, which does not */
    int steered; /* 1: room for steer angles at the knots; 0: a cart with fixed wheels takes no steered plan */
} veer__plan_cap;
/* The library's maxima. */
veer__plan_cap veer__plan_cap_max(void);

/* Workspace of a plan rebuilt from a Plan message: the plan's block (the
 * struct and its arrays, VEER__PLAN_BLOCK_BYTES), then its grid arrays (s,
 * x, t, steer: a decoded plan has no binding array) for knot_cap knots of
 * `modules` modules; veer_plan_load_pb puts the decoded message behind
 * them. The macros give the totals at the maxima as constants. */
#define VEER__WIRE_PLAN_BYTES(piece_cap, segment_cap, leg_cap, knot_cap, modules)                                \
    (VEER__PLAN_BLOCK_BYTES(piece_cap, segment_cap, leg_cap, 1) +                                                \
     VEER__ALIGN16(VEER__GRID_BYTES(knot_cap, modules, 0)))
#define VEER__WIRE_PLAN_WORK_BYTES                                                                              \
    VEER__WIRE_PLAN_BYTES(VEER_PATH_MAX_PIECES, VEER_PATH_MAX_SEGMENTS, VEER_MAX_LEGS, VEER_WIRE_MAX_KNOTS,       \
                          VEER_MAX_MODULES)
#define VEER__WIRE_WORK_BYTES (VEER__WIRE_PLAN_WORK_BYTES + VEER__ALIGN16(sizeof(veer_v1_Plan)))

/* Bytes of the plan part of a workspace for plans within cap:
 * VEER__WIRE_PLAN_BYTES of its path caps, knots and modules, with a grid
 * area of at least VEER__PLAN_SCRATCH_BYTES (of cap's legs and waypoints
 * when the plan does not keep its route, of none when it does): the load
 * rebuilds the route's head there, and the legs and waypoints of a route
 * it does not keep, before it lays the grid. (At the maxima the grid is
 * the larger: VEER__WIRE_PLAN_WORK_BYTES holds.) */
size_t veer__wire_plan_bytes_for(const veer__plan_cap *cap);
/* ... rounded up to 16 bytes, with room for the submessages
 * veer__wire_load_pb_cap decodes (veer__plan_msgs, at the start of the
 * grid area, counted by veer__wire_plan_bytes_for). */
size_t veer__wire_work_bytes_for(const veer__plan_cap *cap);
/* veer_plan_load_pb for plans within cap (NULL: the maxima), in work of
 * veer__wire_work_bytes_for(cap) bytes: a plan beyond the cap gives
 * VEER_ERR_CAPACITY (diag says which) and changes nothing but work. Reads
 * the bytes with veer__wire_plan_read (no veer_v1_Plan); the plan keeps
 * no pointer into them. */
veer_status veer__wire_load_pb_cap(const uint8_t *bytes, size_t size, void *work, size_t work_size,
                                   const veer__plan_cap *cap, const veer_plan **out, veer_diag *diag);

/* A Plan message's contents as the rebuild (wire_plan.c) reads them, from
 * either source: a decoded veer_v1_Plan (veer__wire_plan_in_from_msg) or
 * the Plan bytes read field by field (veer__wire_plan_read, wire_cart.c).
 * The pointers are borrowed: into the decoded message, or into the bytes
 * and the submessages decoded beside them; they must stay valid while the
 * rebuild runs (the cart's submessages only until the head is loaded: see
 * veer__wire_plan_read). Absent submessages are NULL. */
typedef struct {
    double s_step, sdot_step, sddot_step, sddot_split, start_sdot; /* Profile fields 1, 2, 6, 7, 8 */
    uint32_t knot_count, grid_points;
    const uint8_t *knots; /* the knots' bytes (Profile.knots) */
    size_t knots_size;
    size_t jerk_count;              /* jerk windows, s */
    const double *jerk;             /* ... as doubles (decoded message), or */
    const uint8_t *jerk_packed;     /* ... as 8-byte little-endian doubles (the wire's form) */
} veer__profile_in;

typedef struct {
    uint32_t schema_version, library_version, path_model;
    const veer_v1_DriveDef *drive;
    const veer_v1_Limits *limits;
    const veer_v1_PlanOptions *options;
    int has_route;
    veer__route_in route; /* when has_route */
    int has_profile;
    veer__profile_in profile;
    double duration, length;
    const uint8_t *content_hash; /* as received; its size must be 32 */
    size_t content_hash_size;
    /* The hash of the contents the check compares content_hash with: the
     * decoded message's (veer__wire_plan_hash re-encodes it, so the message
     * is not const) when msg is set, else digest (digest_ok 0: the contents
     * could not be encoded). */
    veer_v1_Plan *msg;
    uint8_t digest[32];
    int digest_ok;
} veer__plan_in;

/* Points in at m's contents (in->msg = m). */
void veer__wire_plan_in_from_msg(veer_v1_Plan *m, veer__plan_in *in);

/* ---- wire_cart.c: Plan bytes -> veer__plan_in, no veer_v1_Plan ------------ */

/* The submessages the cart decodes with nanopb (drive, limits, options),
 * the veer__plan_in pointing at them and the head of the route rebuilt
 * from the bytes; the profile, the largest part, and the route's legs and
 * waypoints stay in the bytes. The load reads in until it lays the grid
 * over them, having kept what it reads of in after that (its profile,
 * duration and hash verdict). */
typedef struct {
    veer_v1_DriveDef drive;
    veer_v1_Limits limits;
    veer_v1_PlanOptions options;
    veer__plan_in in;      /* veer__wire_load_pb_cap reads the bytes into it */
    veer__route_buf route; /* the route rebuilt from the bytes, read by the path builder only */
} veer__plan_msgs;
/* Scratch of a plan load that does not keep its route: veer__plan_msgs,
 * then the route's legs and waypoints (room for legs and waypoints). */
#define VEER__PLAN_SCRATCH_BYTES(legs, waypoints)                                                             \
    (VEER__ALIGN16(sizeof(veer__plan_msgs)) + VEER__ALIGN16((size_t)(legs) * sizeof(veer_leg)) +             \
     (size_t)(waypoints) * sizeof(veer_waypoint))

/* Reads Plan bytes as veer_v1_Plan's decoder would (the same statuses for
 * malformed bytes, a field over its capacity VEER_ERR_CAPACITY), decoding
 * the submessages into msgs and pointing in at them and into bytes, and
 * hashes the contents as veer__wire_plan_hash does (in->digest), so that
 * msgs is needed only until the plan's head is loaded. The differences:
 * jerk_window must come in one field (packed, as every encoder writes it,
 * or a single unpacked value), the route in at most VEER__ROUTE_PIECES
 * fields; otherwise VEER_ERR_DECODE. */
veer_status veer__wire_plan_read(const uint8_t *bytes, size_t size, veer__plan_msgs *msgs, veer__plan_in *in,
                                 veer_diag *diag);

/* Offset of the grid arrays in a workspace for cap: veer__wire_load_pb_cap
 * decodes the submessages there, which the grid overwrites only after the
 * plan's head has been loaded from them. */
size_t veer__wire_plan_grid_at(const veer__plan_cap *cap);

/* veer__wire_plan_load from in, which must stay valid until the load lays
 * the grid (it may lie in work's scratch, in veer__plan_msgs). */
veer_status veer__wire_plan_load_in(const veer__plan_in *in, void *work, size_t work_size, const veer__plan_cap *cap,
                                    veer_plan **out, veer_diag *diag);

/* Rebuilds a plan from a decoded Plan message (checks everything: version,
 * path model, hash, values, profile) inside work (veer__wire_plan_bytes_for
 * cap, NULL: the maxima; aligned for double); *out points into work. No heap. */
veer_status veer__wire_plan_load(veer_v1_Plan *m, void *work, size_t work_size, const veer__plan_cap *cap,
                                 veer_plan **out, veer_diag *diag);
/* The same into a new heap plan for veer_plan_destroy. */
veer_status veer__wire_plan_decode_heap(veer_v1_Plan *m, veer_plan **out, veer_diag *diag);

/* What the encoder guarantees between a plan and its Plan message (issue 3):
 * pose within 1 mm and 0.1 degree, steer within 0.1 degree, and setpoints no
 * more than 0.5 % of a limit beyond the plan's own worst (or the limit). */
#define VEER_WIRE_TOL_POSITION 1e-3
#define VEER_WIRE_TOL_ANGLE (0.1 * VEER_PI / 180.0)
#define VEER_WIRE_TOL_LIMIT 0.005

/* How far plan b is from plan a, sampled at `samples` evenly spaced times. */
typedef struct {
    double position;     /* m, largest distance between the body origins */
    double angle;        /* rad, largest yaw or steer difference */
    double ratio_a;      /* largest setpoint / limit of a */
    double ratio_b;      /* ... of b */
    double limit_excess; /* largest (b's ratio - max(1, a's ratio)) over the limit kinds */
    double duration;     /* s, |duration a - duration b| */
    int worst_kind;      /* the veer_limit_kind of limit_excess */
} veer_wire_figures;
void veer__wire_compare(const veer_plan *a, const veer_plan *b, int samples, veer_wire_figures *f);

#endif
