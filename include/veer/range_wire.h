/* veer: the range checks through the message interface: bytes in, bytes out,
 * messages of proto/veer/v1/range.proto (package veer.v1; Python classes in
 * <build>/python/veer/v1/range_pb2.py). No protobuf types cross this header.
 *
 * The rules of wire.h hold: input bytes are untrusted (garbage, truncation,
 * unknown enum values, NaN, lists over capacity get a named status and a
 * message); a reply is written whole or not at all. Each function writes its
 * reply message into reply (reply_capacity bytes) and *reply_size gets the
 * reply's size; if reply is NULL or too small it returns VEER_ERR_BUFFER and
 * leaves reply untouched (call again with a buffer of *reply_size bytes; the
 * work is done again). Otherwise the return value is the reply's status:
 * VEER_OK, or the error the reply's diagnostic explains. Only a NULL
 * reply_size gets VEER_ERR_NULL with nothing written. These run on the
 * ground station and allocate (plans are decoded onto the heap).
 * SPDX-License-Identifier: MIT */
#ifndef VEER_RANGE_WIRE_H
#define VEER_RANGE_WIRE_H

#include <stddef.h>
#include <stdint.h>
#include "veer/status.h"
#include "veer/range.h"
#include "veer/wire.h"

#ifdef __cplusplus
extern "C" {
#endif

/* Bytes that always hold a RangeCheckReply or a SeparationReply. */
#define VEER_RANGE_REPLY_CAPACITY 2048

/* RangeCheckRequest -> RangeCheckReply: veer_plan_check_range on the
 * request's plan (Plan bytes), range and footprint, and with braking also
 * veer_plan_check_braking. */
VEER_API VEER_NODISCARD veer_status veer_range_check_pb(const uint8_t *request, size_t request_size, uint8_t *reply,
                                                        size_t reply_capacity, size_t *reply_size);

/* RangePlanRequest -> RangePlanReply: veer_plan_create_in_range on the
 * PlanRequest with the range's speed zones; the reply holds the Plan bytes
 * (as veer_plan_encode_pb writes them). */
VEER_API VEER_NODISCARD veer_status veer_range_plan_pb(const uint8_t *request, size_t request_size, uint8_t *reply,
                                                       size_t reply_capacity, size_t *reply_size);

/* SeparationRequest -> SeparationReply: veer_carts_check_separation on the
 * request's carts (Plan bytes each, start time, footprint). */
VEER_API VEER_NODISCARD veer_status veer_carts_separation_pb(const uint8_t *request, size_t request_size,
                                                             uint8_t *reply, size_t reply_capacity,
                                                             size_t *reply_size);

#ifdef __cplusplus
}
#endif
#endif
