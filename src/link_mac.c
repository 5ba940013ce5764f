/* Message authentication for the link: HMAC-SHA-256 (RFC 2104 over FIPS
 * 180-4 SHA-256) from libsodium, with a domain string in front of every
 * message kind so that a tag made for one kind never verifies as another.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include <sodium.h>
#include "link_internal.h"

int veer__link_crypto_ready(void) { return sodium_init() < 0 ? -1 : 0; }

veer_status veer_link_hmac_sha256(const uint8_t *key, size_t key_size, const void *data, size_t size,
                                  uint8_t out[32]) {
    if (!out || (!key && key_size) || (!data && size)) return VEER_ERR_NULL;
    if (veer__link_crypto_ready() != 0) return VEER_ERR_STATE;
    crypto_auth_hmacsha256_state st;
    static const uint8_t none[1] = {0};
    crypto_auth_hmacsha256_init(&st, key ? key : none, key_size);
    crypto_auth_hmacsha256_update(&st, data ? data : none, size);
    crypto_auth_hmacsha256_final(&st, out);
    sodium_memzero(&st, sizeof st);
    return VEER_OK;
}

static void put_le(uint8_t *p, uint64_t v, int n) {
    for (int i = 0; i < n; i++) p[i] = (uint8_t)(v >> (8 * i));
}

veer_status veer__link_plan_tag(const uint8_t key[VEER_LINK_KEY_BYTES], uint32_t cart, uint64_t plan_id,
                                const uint8_t *plan, size_t size, uint8_t tag[VEER_LINK_PLAN_TAG_BYTES]) {
    if (veer__link_crypto_ready() != 0) return VEER_ERR_STATE;
    static const char domain[] = "veer-link-plan-1";
    uint8_t head[4 + 8 + 4];
    put_le(head, cart, 4);
    put_le(head + 4, plan_id, 8);
    put_le(head + 12, (uint64_t)size, 4);
    crypto_auth_hmacsha256_state st;
    crypto_auth_hmacsha256_init(&st, key, VEER_LINK_KEY_BYTES);
    crypto_auth_hmacsha256_update(&st, (const uint8_t *)domain, sizeof domain - 1);
    crypto_auth_hmacsha256_update(&st, head, sizeof head);
    crypto_auth_hmacsha256_update(&st, plan, size);
    crypto_auth_hmacsha256_final(&st, tag);
    sodium_memzero(&st, sizeof st);
    return VEER_OK;
}

veer_status veer__link_frame_tag(const uint8_t key[VEER_LINK_KEY_BYTES], const uint8_t *body, size_t size,
                                 uint8_t tag[VEER_LINK_FRAME_TAG_BYTES]) {
    if (veer__link_crypto_ready() != 0) return VEER_ERR_STATE;
    static const char domain[] = "veer-link-frame-1";
    uint8_t full[32];
    crypto_auth_hmacsha256_state st;
    crypto_auth_hmacsha256_init(&st, key, VEER_LINK_KEY_BYTES);
    crypto_auth_hmacsha256_update(&st, (const uint8_t *)domain, sizeof domain - 1);
    crypto_auth_hmacsha256_update(&st, body, size);
    crypto_auth_hmacsha256_final(&st, full);
    sodium_memzero(&st, sizeof st);
    memcpy(tag, full, VEER_LINK_FRAME_TAG_BYTES); /* the leftmost bytes, RFC 2104 section 5 */
    return VEER_OK;
}

int veer__link_equal32(const uint8_t a[32], const uint8_t b[32]) { return crypto_verify_32(a, b) == 0; }
int veer__link_equal16(const uint8_t a[16], const uint8_t b[16]) { return crypto_verify_16(a, b) == 0; }
