/* Message authentication for the link: HMAC-SHA-256 (RFC 2104 over FIPS
 * 180-4 SHA-256, src/wire_sha256.c), with a domain string in front of every
 * message kind so that a tag made for one kind never verifies as another.
 * Tags are compared in constant time and key material on the stack is wiped.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "link_internal.h"
#include "wire_internal.h"

#define BLOCK 64 /* SHA-256 block size B (RFC 2104 section 2) */

typedef struct {
    veer_sha256 inner, outer;
} hmac_state;

/* Writes zeros through a volatile pointer: the compiler must keep every
 * store, even to memory that is dead afterwards (C11 5.1.2.3). */
void veer__link_wipe(void *p, size_t n) {
    volatile uint8_t *v = p;
    while (n--) *v++ = 0;
}

/* RFC 2104 section 2: K0 = key (hashed first when longer than a block),
 * zero-padded to B bytes; inner hash over K0 ^ ipad, outer over K0 ^ opad. */
static void hmac_init(hmac_state *st, const uint8_t *key, size_t key_size) {
    uint8_t k0[BLOCK], pad[BLOCK];
    memset(k0, 0, sizeof k0);
    if (key_size > BLOCK) {
        veer__sha256_init(&st->inner);
        veer__sha256_update(&st->inner, key, key_size);
        veer__sha256_final(&st->inner, k0);
    } else if (key_size > 0) {
        memcpy(k0, key, key_size);
    }
    for (int i = 0; i < BLOCK; i++) pad[i] = (uint8_t)(k0[i] ^ 0x36u);
    veer__sha256_init(&st->inner);
    veer__sha256_update(&st->inner, pad, BLOCK);
    for (int i = 0; i < BLOCK; i++) pad[i] = (uint8_t)(k0[i] ^ 0x5cu);
    veer__sha256_init(&st->outer);
    veer__sha256_update(&st->outer, pad, BLOCK);
    veer__link_wipe(k0, sizeof k0);
    veer__link_wipe(pad, sizeof pad);
}

static void hmac_update(hmac_state *st, const void *data, size_t size) {
    veer__sha256_update(&st->inner, data, size);
}

/* H(K0 ^ opad || H(K0 ^ ipad || text)); wipes the state. */
static void hmac_final(hmac_state *st, uint8_t out[32]) {
    uint8_t inner[32];
    veer__sha256_final(&st->inner, inner);
    veer__sha256_update(&st->outer, inner, sizeof inner);
    veer__sha256_final(&st->outer, out);
    veer__link_wipe(inner, sizeof inner);
    veer__link_wipe(st, sizeof *st);
}

veer_status veer_link_hmac_sha256(const uint8_t *key, size_t key_size, const void *data, size_t size,
                                  uint8_t out[32]) {
    if (!out || (!key && key_size) || (!data && size)) return VEER_ERR_NULL;
    hmac_state st;
    hmac_init(&st, key, key_size);
    if (size) hmac_update(&st, data, size);
    hmac_final(&st, out);
    return VEER_OK;
}

static void put_le(uint8_t *p, uint64_t v, int n) {
    for (int i = 0; i < n; i++) p[i] = (uint8_t)(v >> (8 * i));
}

void veer__link_plan_tag(const uint8_t key[VEER_LINK_KEY_BYTES], uint32_t cart, uint64_t plan_id,
                         const uint8_t *plan, size_t size, uint8_t tag[VEER_LINK_PLAN_TAG_BYTES]) {
    static const char domain[] = "veer-link-plan-1";
    uint8_t head[4 + 8 + 4];
    put_le(head, cart, 4);
    put_le(head + 4, plan_id, 8);
    put_le(head + 12, (uint64_t)size, 4);
    hmac_state st;
    hmac_init(&st, key, VEER_LINK_KEY_BYTES);
    hmac_update(&st, domain, sizeof domain - 1);
    hmac_update(&st, head, sizeof head);
    hmac_update(&st, plan, size);
    hmac_final(&st, tag);
}

void veer__link_frame_tag(const uint8_t key[VEER_LINK_KEY_BYTES], const uint8_t *body, size_t size,
                          uint8_t tag[VEER_LINK_FRAME_TAG_BYTES]) {
    static const char domain[] = "veer-link-frame-1";
    uint8_t full[32];
    hmac_state st;
    hmac_init(&st, key, VEER_LINK_KEY_BYTES);
    hmac_update(&st, domain, sizeof domain - 1);
    hmac_update(&st, body, size);
    hmac_final(&st, full);
    memcpy(tag, full, VEER_LINK_FRAME_TAG_BYTES); /* the leftmost bytes, RFC 2104 section 5 */
    veer__link_wipe(full, sizeof full);
}

/* Constant time in the contents: every byte is read and the differences are
 * gathered in a volatile accumulator, so no early exit can be compiled in. */
int veer__link_equal(const uint8_t *a, const uint8_t *b, size_t n) {
    volatile uint8_t d = 0;
    for (size_t i = 0; i < n; i++) d = (uint8_t)(d | (a[i] ^ b[i]));
    return (int)(1u & (((unsigned)d - 1u) >> 8));
}
