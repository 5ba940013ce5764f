/* The radio link: CRC-32 and HMAC-SHA-256 against their standards' test
 * vectors, chunking round trips, gap reports, and every way a frame or a
 * plan is refused (with its reason, nothing armed, nothing allocated).
 * SPDX-License-Identifier: MIT */
#include <criterion/criterion.h>
#include <math.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <veer/veer.h>
#include <veer/link.h>
#include <veer/player.h>
#include <veer/wire.h>
#include <sodium.h>
#include "link_internal.h"
#include "wire_internal.h"
#include "diag_text.h"

/* ---- helpers ------------------------------------------------------------ */

/* Fixed-seed generator for test data (xorshift64*, Marsaglia 2003 / Vigna 2016). */
static uint64_t rng_state = 88172645463325252ull;
static uint64_t rng(void) {
    rng_state ^= rng_state >> 12;
    rng_state ^= rng_state << 25;
    rng_state ^= rng_state >> 27;
    return rng_state * 2685821657736338717ull;
}

static veer_link_def link_for(uint32_t cart, uint8_t key_byte, int frame_size) {
    veer_link_def d = veer_default_link_def();
    d.cart = cart;
    for (int i = 0; i < VEER_LINK_KEY_BYTES; i++) d.key[i] = (uint8_t)(key_byte + 7 * i);
    d.frame_size = frame_size;
    return d;
}

static veer_link_receiver *new_receiver(const veer_link_def *d, uint64_t accepted, void **mem) {
    size_t n = veer_link_receiver_size_for(d);
    *mem = aligned_alloc(16, (n + 15) / 16 * 16);
    cr_assert_not_null(*mem);
    veer_link_receiver *rx = NULL;
    cr_assert_eq(veer_link_receiver_init(*mem, n, d, accepted, 0, &rx, NULL), VEER_OK);
    return rx;
}

typedef struct {
    uint8_t bytes[VEER_LINK_FRAME_MAX];
    size_t size;
} frame_buf;

/* All frames of a sealed plan. */
static int make_frames(const veer_link_def *d, uint64_t id, const uint8_t *plan, size_t n, frame_buf **out) {
    veer_link_sender *s = NULL;
    cr_assert_eq(veer_link_sender_create(d, id, plan, n, &s, NULL), VEER_OK);
    int count = veer_link_sender_chunk_count(s);
    frame_buf *f = calloc((size_t)count, sizeof *f);
    for (int i = 0; i < count; i++) {
        cr_assert_eq(veer_link_sender_frame(s, i, f[i].bytes, sizeof f[i].bytes, &f[i].size), VEER_OK);
        cr_assert(f[i].size <= (size_t)d->frame_size, "frame %d: %zu bytes > %d", i, f[i].size, d->frame_size);
    }
    veer_link_sender_destroy(s);
    *out = f;
    return count;
}

static veer_link_event take(veer_link_receiver *rx, const uint8_t *b, size_t n) {
    veer_link_event ev;
    cr_assert_eq(veer_link_receive(rx, b, n, &ev), VEER_OK);
    return ev;
}

/* Counting allocator: the cart side must never call it. */
static size_t alloc_calls;
static void *count_alloc(size_t size, void *ctx) {
    (void)ctx;
    alloc_calls++;
    return malloc(size);
}
static void count_free(void *p, size_t size, void *ctx) {
    (void)size, (void)ctx;
    free(p);
}

/* ---- CRC-32 ------------------------------------------------------------- */

Test(link, crc32_check_value) {
    /* CRC-32 (IEEE 802.3) check value for "123456789": 0xCBF43926 (R. N.
     * Williams, "A Painless Guide to CRC Error Detection Algorithms", 1993,
     * CRC-32 parameter model; the value the issue names). */
    cr_assert_eq(veer_link_crc32(0, "123456789", 9), 0xCBF43926u);
    /* The empty message: initial value and final XOR cancel (same model). */
    cr_assert_eq(veer_link_crc32(0, "", 0), 0u);
    /* Continued in pieces gives the same (the register carries over). */
    uint32_t c = veer_link_crc32(0, "1234", 4);
    cr_assert_eq(veer_link_crc32(c, "56789", 5), 0xCBF43926u);
    /* "The quick brown fox jumps over the lazy dog": 0x414FA339 (from memory;
     * tests/python/test_link_e2e.py checks random buffers against zlib.crc32). */
    cr_assert_eq(veer_link_crc32(0, "The quick brown fox jumps over the lazy dog", 43), 0x414FA339u);
}

/* ---- HMAC-SHA-256 ------------------------------------------------------- */

static void hex(const char *h, uint8_t *out, size_t n) {
    for (size_t i = 0; i < n; i++) {
        unsigned v;
        cr_assert_eq(sscanf(h + 2 * i, "%2x", &v), 1);
        out[i] = (uint8_t)v;
    }
}

Test(link, hmac_sha256_rfc4231) {
    uint8_t mac[32], want[32];
    /* RFC 4231, 4.2, test case 1: key 20 x 0x0b, data "Hi There". */
    uint8_t key1[20];
    memset(key1, 0x0b, sizeof key1);
    cr_assert_eq(veer_link_hmac_sha256(key1, sizeof key1, "Hi There", 8, mac), VEER_OK);
    hex("b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7", want, 32);
    cr_assert_arr_eq(mac, want, 32, "RFC 4231 test case 1");
    /* RFC 4231, 4.3, test case 2: key "Jefe", data "what do ya want for nothing?". */
    cr_assert_eq(veer_link_hmac_sha256((const uint8_t *)"Jefe", 4, "what do ya want for nothing?", 28, mac), VEER_OK);
    hex("5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843", want, 32);
    cr_assert_arr_eq(mac, want, 32, "RFC 4231 test case 2");
    /* RFC 4231, 4.7, test case 6: a 131-byte key (longer than a block, hashed first). */
    uint8_t key6[131];
    memset(key6, 0xaa, sizeof key6);
    const char *d6 = "Test Using Larger Than Block-Size Key - Hash Key First";
    cr_assert_eq(veer_link_hmac_sha256(key6, sizeof key6, d6, strlen(d6), mac), VEER_OK);
    hex("60e431591ee0b67f0d8a26aacbf5b77f8e0bc6213728c5140546040f0ee37f54", want, 32);
    cr_assert_arr_eq(mac, want, 32, "RFC 4231 test case 6");
    cr_assert_eq(veer_link_hmac_sha256(key1, 20, NULL, 3, mac), VEER_ERR_NULL);
}

Test(link, hmac_sha256_rfc4231_remaining_cases) {
    uint8_t mac[32], want[32], key[131], data[152];
    /* RFC 4231, 4.4, test case 3: key 20 x 0xaa, data 50 x 0xdd. */
    memset(key, 0xaa, 20);
    memset(data, 0xdd, 50);
    cr_assert_eq(veer_link_hmac_sha256(key, 20, data, 50, mac), VEER_OK);
    hex("773ea91e36800e46854db8ebd09181a72959098b3ef8c122d9635514ced565fe", want, 32);
    cr_assert_arr_eq(mac, want, 32, "RFC 4231 test case 3");
    /* RFC 4231, 4.5, test case 4: key 0x01..0x19 (25 bytes), data 50 x 0xcd. */
    for (int i = 0; i < 25; i++) key[i] = (uint8_t)(i + 1);
    memset(data, 0xcd, 50);
    cr_assert_eq(veer_link_hmac_sha256(key, 25, data, 50, mac), VEER_OK);
    hex("82558a389a443c0ea4cc819899f2083a85f0faa3e578f8077a2e3ff46729665b", want, 32);
    cr_assert_arr_eq(mac, want, 32, "RFC 4231 test case 4");
    /* RFC 4231, 4.6, test case 5: key 20 x 0x0c, "Test With Truncation";
     * the RFC gives the leftmost 128 bits only (the frame tag's truncation). */
    memset(key, 0x0c, 20);
    cr_assert_eq(veer_link_hmac_sha256(key, 20, "Test With Truncation", 20, mac), VEER_OK);
    hex("a3b6167473100ee06e0c796c2955552b", want, 16);
    cr_assert_arr_eq(mac, want, 16, "RFC 4231 test case 5");
    /* RFC 4231, 4.8, test case 7: a 131-byte key (hashed first) and 152 bytes of data. */
    memset(key, 0xaa, 131);
    const char *d7 = "This is a test using a larger than block-size key and a larger than block-size data. "
                     "The key needs to be hashed before being used by the HMAC algorithm.";
    cr_assert_eq(strlen(d7), 152);
    cr_assert_eq(veer_link_hmac_sha256(key, 131, d7, strlen(d7), mac), VEER_OK);
    hex("9b09ffa71b942fcb27635fbcd5b0e944bfdc63644f0713938a7f51535c3a35e2", want, 32);
    cr_assert_arr_eq(mac, want, 32, "RFC 4231 test case 7");
    /* An empty key and an empty message are valid HMAC input (RFC 2104 allows
     * any key length); NULL with length 0 is accepted for both. */
    cr_assert_eq(veer_link_hmac_sha256(NULL, 0, NULL, 0, mac), VEER_OK);
    /* HMAC-SHA-256 of "" under "": Python's hmac module (Debian python3),
     * hmac.new(b"", b"", "sha256"). */
    hex("b613679a0814d9ec772f95d778c35fc5ff1697c493715653c6c712144292c5ad", want, 32);
    cr_assert_arr_eq(mac, want, 32, "empty key, empty message");
}

/* libsodium (Debian libsodium-dev) as the reference: its
 * crypto_auth_hmacsha256_* over random keys of 0..200 bytes (around the
 * 64-byte block where key hashing starts) and messages of 0..700 bytes
 * (every padding case of SHA-256's last block). */
Test(link, hmac_sha256_against_libsodium) {
    cr_assert_geq(sodium_init(), 0);
    static uint8_t key[200], msg[700];
    uint8_t ours[32], ref[32];
    int cases = 0;
    for (size_t kn = 0; kn <= sizeof key; kn += (kn < 70 ? 1 : 13)) {
        for (size_t mn = 0; mn <= sizeof msg; mn += (mn < 140 ? 1 : 37)) {
            for (size_t i = 0; i < kn; i++) key[i] = (uint8_t)rng();
            for (size_t i = 0; i < mn; i++) msg[i] = (uint8_t)rng();
            crypto_auth_hmacsha256_state st;
            crypto_auth_hmacsha256_init(&st, key, kn);
            crypto_auth_hmacsha256_update(&st, msg, mn);
            crypto_auth_hmacsha256_final(&st, ref);
            cr_assert_eq(veer_link_hmac_sha256(kn ? key : NULL, kn, mn ? msg : NULL, mn, ours), VEER_OK);
            cr_assert_arr_eq(ours, ref, 32, "key %zu bytes, message %zu bytes", kn, mn);
            cases++;
        }
    }
    cr_assert_gt(cases, 5000);
}

/* SHA-256 (the HMAC's hash, src/wire_sha256.c) against libsodium's
 * crypto_hash_sha256 at every length 0..300 (padding into one or two final
 * blocks) and fed in uneven pieces. The FIPS 180-4 examples are in
 * test_wire.c. */
Test(link, sha256_against_libsodium) {
    cr_assert_geq(sodium_init(), 0);
    static uint8_t msg[300];
    for (size_t i = 0; i < sizeof msg; i++) msg[i] = (uint8_t)rng();
    for (size_t n = 0; n <= sizeof msg; n++) {
        uint8_t ours[32], ref[32];
        crypto_hash_sha256(ref, msg, n);
        veer_sha256 c;
        veer__sha256_init(&c);
        for (size_t at = 0, step = 1; at < n; at += step, step = step * 3 % 71 + 1)
            veer__sha256_update(&c, msg + at, at + step <= n ? step : n - at);
        veer__sha256_final(&c, ours);
        cr_assert_arr_eq(ours, ref, 32, "%zu bytes", n);
    }
}

/* The tag comparison finds a difference at every position and in every bit;
 * the wipe leaves zeros. */
Test(link, tag_compare_and_wipe) {
    uint8_t a[32], b[32];
    for (int i = 0; i < 32; i++) a[i] = b[i] = (uint8_t)rng();
    cr_assert_eq(veer__link_equal(a, b, 32), 1);
    cr_assert_eq(veer__link_equal(a, b, 0), 1);
    for (int i = 0; i < 32; i++) {
        for (int bit = 0; bit < 8; bit++) {
            b[i] ^= (uint8_t)(1u << bit);
            cr_assert_eq(veer__link_equal(a, b, 32), 0, "byte %d bit %d", i, bit);
            cr_assert_eq(veer__link_equal(a, b, (size_t)i + 1), 0);
            cr_assert_eq(veer__link_equal(a, b, (size_t)i), 1);
            b[i] ^= (uint8_t)(1u << bit);
        }
    }
    veer__link_wipe(a, sizeof a);
    for (int i = 0; i < 32; i++) cr_assert_eq(a[i], 0);
}

/* ---- chunking ----------------------------------------------------------- */

/* Sealed plans of many sizes and frame sizes come through whole, in any
 * order and with duplicates; every frame fits; the receiver asks only for
 * what is missing. The bytes here are arbitrary: the receiver does not
 * decode plans, the player does (test_player.c). */
Test(link, chunking_round_trip_many_sizes) {
    static const int frame_sizes[] = {VEER_LINK_FRAME_MIN, 200, VEER_LINK_FRAME_DEFAULT, VEER_LINK_FRAME_MAX};
    static uint8_t plan[VEER_LINK_MAX_PLAN_BYTES];
    for (size_t i = 0; i < sizeof plan; i++) plan[i] = (uint8_t)rng();
    size_t sizes[64];
    int ns = 0;
    for (size_t n = 1; n <= 40; n++) sizes[ns++] = n;
    sizes[ns++] = 200, sizes[ns++] = 255, sizes[ns++] = 1000, sizes[ns++] = 4096;
    sizes[ns++] = VEER_LINK_MAX_PLAN_BYTES - 1, sizes[ns++] = VEER_LINK_MAX_PLAN_BYTES;
    while (ns < 60) sizes[ns++] = 1 + rng() % VEER_LINK_MAX_PLAN_BYTES;
    uint64_t id = 1;
    for (int fi = 0; fi < 4; fi++) {
        veer_link_def d = link_for(3, 0x11, frame_sizes[fi]);
        void *mem;
        veer_link_receiver *rx = new_receiver(&d, 0, &mem);
        for (int si = 0; si < ns; si++, id++) {
            size_t n = sizes[si];
            frame_buf *f;
            int count = make_frames(&d, id, plan, n, &f);
            /* count = ceil(sealed / bytes per chunk), within the capacity */
            cr_assert(count >= 1 && count <= VEER_LINK_MAX_CHUNKS);
            /* a random order, every frame twice */
            int *order = malloc(sizeof(int) * 2 * (size_t)count);
            for (int i = 0; i < 2 * count; i++) order[i] = i % count;
            for (int i = 2 * count - 1; i > 0; i--) {
                int j = (int)(rng() % (uint64_t)(i + 1)), t = order[i];
                order[i] = order[j], order[j] = t;
            }
            int ready = 0, dups = 0;
            for (int i = 0; i < 2 * count && !ready; i++) {
                veer_link_event ev = take(rx, f[order[i]].bytes, f[order[i]].size);
                cr_assert(ev.reason == VEER_LINK_NONE || ev.reason == VEER_LINK_DUPLICATE, "size %zu frame %d: %s",
                          n, d.frame_size, veer_link_reason_name(ev.reason));
                dups += ev.reason == VEER_LINK_DUPLICATE;
                if (ev.plan_ready) {
                    ready = 1;
                    const uint8_t *got;
                    size_t got_n;
                    uint64_t got_id;
                    cr_assert_eq(veer_link_receiver_plan(rx, &got, &got_n, &got_id), VEER_OK);
                    cr_assert_eq(got_n, n);
                    cr_assert_eq(got_id, id);
                    cr_assert(memcmp(got, plan, n) == 0, "size %zu: bytes differ", n);
                    cr_assert_eq(veer_link_receiver_settle(rx, VEER_LINK_NONE), VEER_OK);
                }
            }
            cr_assert(ready, "size %zu frame %d: never complete", n, d.frame_size);
            cr_assert(dups <= count, "more duplicates than chunks");
            cr_assert_eq(veer_link_receiver_accepted(rx), id);
            free(order);
            free(f);
        }
        free(mem);
    }
}

/* Frames of non-last chunks use the room: one byte more would not fit
 * (the chunking is tight, so no air time is wasted). */
Test(link, chunks_fill_their_frames) {
    static uint8_t plan[5000];
    veer_link_def d = link_for(3, 0x11, VEER_LINK_FRAME_DEFAULT);
    frame_buf *f;
    int count = make_frames(&d, 77, plan, sizeof plan, &f);
    /* 5032 sealed bytes in <= 255-byte frames holding >= 230 data bytes: at
     * most 22 chunks (ceil(5032 / 230)). */
    cr_assert(count <= 22, "%d chunks", count);
    for (int i = 0; i + 1 < count; i++) cr_assert(f[i].size >= (size_t)VEER_LINK_FRAME_DEFAULT - 8, "%zu", f[i].size);
    free(f);
}

/* A gap report names exactly the chunks still missing, and the ground side
 * reads it back; after completion it carries the verdict. */
Test(link, gap_report_lists_missing_chunks) {
    static uint8_t plan[20000];
    for (size_t i = 0; i < sizeof plan; i++) plan[i] = (uint8_t)(i * 31);
    veer_link_def d = link_for(9, 0x42, VEER_LINK_FRAME_MIN);
    void *mem;
    veer_link_receiver *rx = new_receiver(&d, 0, &mem);
    frame_buf *f;
    int count = make_frames(&d, 5, plan, sizeof plan, &f);
    cr_assert(count > 100);
    char *have = calloc((size_t)count, 1);
    for (int i = 0; i < count; i++)
        if (rng() % 3 != 0 && i != 3) { /* about two thirds, never chunk 3 */
            have[i] = 1;
            take(rx, f[i].bytes, f[i].size);
        }
    uint8_t gb[VEER_LINK_FRAME_MAX];
    size_t gn;
    cr_assert_eq(veer_link_gap_frame(rx, gb, sizeof gb, &gn), VEER_OK);
    cr_assert(gn <= (size_t)d.frame_size);
    veer_link_message m;
    int why;
    cr_assert_eq(veer_link_parse(&d, gb, gn, &m, &why), VEER_OK);
    cr_assert_eq(m.kind, VEER_LINK_KIND_GAPS);
    cr_assert_eq(m.gaps.plan_id, 5u);
    cr_assert_eq(m.gaps.count, (uint32_t)count);
    int first = 0;
    while (have[first]) first++;
    cr_assert_eq(m.gaps.base, (uint32_t)first);
    int missing = 0;
    for (int i = 0; i < count; i++) missing += !have[i];
    cr_assert_eq(m.gaps.missing_count, (uint32_t)missing);
    /* the bitmap agrees with what was held, as far as it reaches */
    cr_assert(m.gaps.bits > 0);
    for (uint32_t b = 0; b < m.gaps.bits && m.gaps.base + b < (uint32_t)count; b++) {
        int bit = (m.gaps.missing[b >> 3] >> (b & 7)) & 1;
        cr_assert_eq(bit, !have[m.gaps.base + b], "chunk %u", m.gaps.base + b);
    }
    /* selective repeat: send what the reports name until complete */
    int rounds = 0, ready = 0;
    while (!ready && rounds++ < 100) {
        cr_assert_eq(veer_link_gap_frame(rx, gb, sizeof gb, &gn), VEER_OK);
        cr_assert_eq(veer_link_parse(&d, gb, gn, &m, &why), VEER_OK);
        for (uint32_t b = 0; b < m.gaps.bits && !ready; b++)
            if ((m.gaps.missing[b >> 3] >> (b & 7)) & 1) {
                veer_link_event ev = take(rx, f[m.gaps.base + b].bytes, f[m.gaps.base + b].size);
                cr_assert_eq(ev.reason, VEER_LINK_NONE, "resent chunk was not missing");
                ready = ev.plan_ready;
            }
    }
    cr_assert(ready);
    cr_assert_eq(veer_link_receiver_settle(rx, VEER_LINK_DRIVE), VEER_OK);
    cr_assert_eq(veer_link_gap_frame(rx, gb, sizeof gb, &gn), VEER_OK);
    cr_assert_eq(veer_link_parse(&d, gb, gn, &m, &why), VEER_OK);
    cr_assert(m.gaps.complete);
    cr_assert_eq(m.gaps.verdict, VEER_LINK_DRIVE);
    cr_assert_eq(veer_link_receiver_accepted(rx), 0u, "a refused plan is not accepted");
    /* its chunks again: harmless, and the verdict is said again */
    veer_link_event ev = take(rx, f[0].bytes, f[0].size);
    cr_assert_eq(ev.reason, VEER_LINK_DUPLICATE);
    cr_assert(ev.gaps_due);
    free(have);
    free(f);
    free(mem);
}

/* The largest chunk count's gap report still fits the smallest frame. */
Test(link, gap_report_fits_small_frames) {
    static uint8_t plan[VEER_LINK_MAX_PLAN_BYTES];
    veer_link_def d = link_for(1, 0x99, VEER_LINK_FRAME_MIN);
    void *mem;
    veer_link_receiver *rx = new_receiver(&d, 0, &mem);
    frame_buf *f;
    int count = make_frames(&d, 1, plan, sizeof plan, &f);
    take(rx, f[1].bytes, f[1].size);
    uint8_t gb[VEER_LINK_FRAME_MAX];
    size_t gn;
    cr_assert_eq(veer_link_gap_frame(rx, gb, sizeof gb, &gn), VEER_OK);
    cr_assert(gn <= (size_t)VEER_LINK_FRAME_MIN, "%zu bytes", gn);
    veer_link_message m;
    cr_assert_eq(veer_link_parse(&d, gb, gn, &m, NULL), VEER_OK);
    cr_assert_eq(m.gaps.missing_count, (uint32_t)count - 1);
    cr_assert(m.gaps.bits >= 8);
    free(f);
    free(mem);
}

/* ---- refusals ----------------------------------------------------------- */

/* One flipped bit anywhere in a frame is refused: a CRC with more than one
 * term detects every single-bit error (W. W. Peterson and D. T. Brown,
 * "Cyclic Codes for Error Detection", Proc. IRE 49, 1961); a flip in the
 * length prefix shows as truncated or malformed. The chunk is not taken. */
Test(link, flipped_bit_refused) {
    static uint8_t plan[600];
    veer_link_def d = link_for(2, 0x20, VEER_LINK_FRAME_DEFAULT);
    void *mem;
    veer_link_receiver *rx = new_receiver(&d, 0, &mem);
    frame_buf *f;
    int count = make_frames(&d, 3, plan, sizeof plan, &f);
    cr_assert(count >= 3);
    uint8_t b[VEER_LINK_FRAME_MAX];
    for (int k = 0; k < count; k++)
        for (size_t bit = 0; bit < f[k].size * 8; bit++) {
            memcpy(b, f[k].bytes, f[k].size);
            b[bit / 8] ^= (uint8_t)(1u << (bit % 8));
            veer_link_event ev = take(rx, b, f[k].size);
            cr_assert(ev.reason == VEER_LINK_CRC || ev.reason == VEER_LINK_TRUNCATED ||
                          ev.reason == VEER_LINK_MALFORMED,
                      "frame %d bit %zu: %s", k, bit, veer_link_reason_name(ev.reason));
            cr_assert(!ev.plan_ready);
        }
    veer_link_gaps g;
    cr_assert_eq(veer_link_receiver_gaps(rx, &g), VEER_OK);
    cr_assert_eq(g.plan_id, 0u, "no chunk was taken");
    cr_assert(veer_link_receiver_count(rx, VEER_LINK_CRC) > 0);
    free(f);
    free(mem);
}

/* A flipped payload bit with a recomputed CRC passes the frame check but
 * not the plan tag; the reassembly starts over, so a good resend arms. */
Test(link, payload_bit_with_recomputed_crc_fails_the_plan_tag) {
    static uint8_t plan[700];
    for (size_t i = 0; i < sizeof plan; i++) plan[i] = (uint8_t)i;
    veer_link_def d = link_for(2, 0x20, VEER_LINK_FRAME_DEFAULT);
    void *mem;
    veer_link_receiver *rx = new_receiver(&d, 0, &mem);
    frame_buf *f;
    int count = make_frames(&d, 3, plan, sizeof plan, &f);
    /* The last data byte of chunk 0 sits just before the CRC (data is the
     * last field of an untagged chunk frame). */
    uint8_t *b = f[0].bytes;
    size_t n = f[0].size;
    b[n - 5] ^= 0x10;
    uint32_t crc = veer_link_crc32(0, b, n - 4);
    for (int i = 0; i < 4; i++) b[n - 4 + i] = (uint8_t)(crc >> (8 * i));
    veer_link_event ev;
    for (int i = 0; i < count; i++) {
        ev = take(rx, f[i].bytes, f[i].size);
        if (i + 1 < count) cr_assert_eq(ev.reason, VEER_LINK_NONE, "the frame checks pass");
    }
    cr_assert_eq(ev.reason, VEER_LINK_PLAN_TAG);
    cr_assert(!ev.plan_ready);
    cr_assert_eq(veer_link_receiver_accepted(rx), 0u);
    veer_link_gaps g;
    cr_assert_eq(veer_link_receiver_gaps(rx, &g), VEER_OK);
    cr_assert(g.complete && g.verdict == VEER_LINK_PLAN_TAG);
    /* a clean resend of every chunk comes through */
    frame_buf *good;
    make_frames(&d, 3, plan, sizeof plan, &good);
    int ready = 0;
    for (int i = 0; i < count; i++) ready |= take(rx, good[i].bytes, good[i].size).plan_ready;
    cr_assert(ready);
    free(good);
    free(f);
    free(mem);
}

/* A plan for another cart is refused: frames addressed to it (OTHER_CART),
 * and frames addressed to this cart but sealed under another cart's key
 * (PLAN_TAG). */
Test(link, another_carts_plan_refused) {
    static uint8_t plan[900];
    veer_link_def mine = link_for(4, 0x44, VEER_LINK_FRAME_DEFAULT);
    veer_link_def other = link_for(5, 0x55, VEER_LINK_FRAME_DEFAULT);
    void *mem;
    veer_link_receiver *rx = new_receiver(&mine, 0, &mem);
    frame_buf *f;
    int count = make_frames(&other, 8, plan, sizeof plan, &f);
    for (int i = 0; i < count; i++) {
        veer_link_event ev = take(rx, f[i].bytes, f[i].size);
        cr_assert_eq(ev.reason, VEER_LINK_OTHER_CART);
    }
    free(f);
    veer_link_def forged = other;
    forged.cart = 4; /* right number, wrong key */
    count = make_frames(&forged, 8, plan, sizeof plan, &f);
    veer_link_event ev;
    for (int i = 0; i < count; i++) ev = take(rx, f[i].bytes, f[i].size);
    cr_assert_eq(ev.reason, VEER_LINK_PLAN_TAG);
    cr_assert(!ev.plan_ready);
    cr_assert_eq(veer_link_receiver_accepted(rx), 0u);
    free(f);
    free(mem);
}

/* An older plan (or the same one again) is a replay once a newer counter
 * was accepted; chunks of an older plan while a newer one comes in are
 * stale and do not disturb it. */
Test(link, replayed_and_stale_plans_refused) {
    static uint8_t plan[900];
    veer_link_def d = link_for(4, 0x44, VEER_LINK_FRAME_DEFAULT);
    void *mem;
    veer_link_receiver *rx = new_receiver(&d, 10, &mem); /* accepted up to 10 before a restart */
    frame_buf *old, *newer, *newest;
    int count = make_frames(&d, 7, plan, sizeof plan, &old);
    for (int i = 0; i < count; i++) cr_assert_eq(take(rx, old[i].bytes, old[i].size).reason, VEER_LINK_REPLAY);
    free(old);
    make_frames(&d, 10, plan, sizeof plan, &old);
    cr_assert_eq(take(rx, old[0].bytes, old[0].size).reason, VEER_LINK_REPLAY);
    make_frames(&d, 11, plan, sizeof plan, &newer);
    make_frames(&d, 12, plan, sizeof plan, &newest);
    cr_assert_eq(take(rx, newer[0].bytes, newer[0].size).reason, VEER_LINK_NONE);
    cr_assert_eq(take(rx, newest[0].bytes, newest[0].size).reason, VEER_LINK_NONE); /* newer: starts over */
    cr_assert_eq(take(rx, newer[1].bytes, newer[1].size).reason, VEER_LINK_STALE);
    int ready = 0;
    for (int i = 1; i < count; i++) ready |= take(rx, newest[i].bytes, newest[i].size).plan_ready;
    cr_assert(ready);
    cr_assert_eq(veer_link_receiver_settle(rx, VEER_LINK_NONE), VEER_OK);
    cr_assert_eq(veer_link_receiver_accepted(rx), 12u);
    cr_assert_eq(take(rx, newer[2].bytes, newer[2].size).reason, VEER_LINK_REPLAY);
    free(old);
    free(newer);
    free(newest);
    free(mem);
}

/* Every truncation of a frame is refused as truncated. */
Test(link, truncated_frame_refused) {
    static uint8_t plan[400];
    veer_link_def d = link_for(4, 0x44, VEER_LINK_FRAME_DEFAULT);
    void *mem;
    veer_link_receiver *rx = new_receiver(&d, 0, &mem);
    frame_buf *f;
    make_frames(&d, 1, plan, sizeof plan, &f);
    for (size_t n = 0; n < f[0].size; n++) {
        veer_link_event ev = take(rx, f[0].bytes, n);
        cr_assert_eq(ev.reason, VEER_LINK_TRUNCATED, "%zu of %zu bytes: %s", n, f[0].size,
                     veer_link_reason_name(ev.reason));
    }
    cr_assert_eq(take(rx, NULL, 0).reason, VEER_LINK_TRUNCATED);
    /* one byte too many is not a frame either, nor one over the frame size */
    uint8_t b[VEER_LINK_FRAME_MAX + 1];
    memcpy(b, f[0].bytes, f[0].size);
    b[f[0].size] = 0;
    cr_assert_eq(take(rx, b, f[0].size + 1).reason, VEER_LINK_MALFORMED);
    cr_assert_eq(take(rx, b, (size_t)d.frame_size + 1).reason, VEER_LINK_FRAME_SIZE);
    cr_assert_eq(veer_link_receiver_count(rx, VEER_LINK_NONE), 0u);
    free(f);
    free(mem);
}

/* Commands: the tag binds them to the key, the sequence number to their time. */
Test(link, commands_tag_and_sequence) {
    veer_link_def d = link_for(4, 0x44, VEER_LINK_FRAME_DEFAULT);
    veer_link_def other = link_for(4, 0x45, VEER_LINK_FRAME_DEFAULT);
    void *mem;
    veer_link_receiver *rx = new_receiver(&d, 0, &mem);
    uint8_t b[VEER_LINK_FRAME_MAX];
    size_t n;
    cr_assert_eq(veer_link_command_frame(&d, 100, VEER_LINK_COMMAND_HEARTBEAT, 0, b, sizeof b, &n), VEER_OK);
    veer_link_event ev = take(rx, b, n);
    cr_assert_eq(ev.reason, VEER_LINK_NONE);
    cr_assert_eq(ev.command, VEER_LINK_COMMAND_HEARTBEAT);
    ev = take(rx, b, n); /* the same frame again */
    cr_assert_eq(ev.reason, VEER_LINK_COMMAND_REPLAY);
    cr_assert_eq(ev.command, 0);
    cr_assert_eq(veer_link_command_frame(&d, 50, VEER_LINK_COMMAND_STOP, 0, b, sizeof b, &n), VEER_OK);
    cr_assert_eq(take(rx, b, n).reason, VEER_LINK_COMMAND_REPLAY);
    cr_assert_eq(veer_link_command_frame(&other, 200, VEER_LINK_COMMAND_START, 1, b, sizeof b, &n), VEER_OK);
    ev = take(rx, b, n);
    cr_assert_eq(ev.reason, VEER_LINK_FRAME_TAG);
    cr_assert_eq(ev.command, 0);
    /* a flipped bit in the sequence number with the CRC recomputed */
    cr_assert_eq(veer_link_command_frame(&d, 300, VEER_LINK_COMMAND_STOP, 0, b, sizeof b, &n), VEER_OK);
    b[5] ^= 0x01;
    uint32_t crc = veer_link_crc32(0, b, n - 4);
    for (int i = 0; i < 4; i++) b[n - 4 + i] = (uint8_t)(crc >> (8 * i));
    ev = take(rx, b, n);
    cr_assert(ev.reason == VEER_LINK_FRAME_TAG || ev.reason == VEER_LINK_MALFORMED, "%s",
              veer_link_reason_name(ev.reason));
    cr_assert_eq(veer_link_receiver_command_seq(rx), 100u);
    /* bad arguments to the ground side */
    cr_assert_eq(veer_link_command_frame(&d, 0, VEER_LINK_COMMAND_STOP, 0, b, sizeof b, &n), VEER_ERR_VALUE);
    cr_assert_eq(veer_link_command_frame(&d, 1, 9, 0, b, sizeof b, &n), VEER_ERR_VALUE);
    cr_assert_eq(veer_link_command_frame(&d, 1, VEER_LINK_COMMAND_STOP, 0, b, 3, &n), VEER_ERR_BUFFER);
    free(mem);
}

/* Definitions and arguments: clear statuses, nothing written. */
Test(link, bad_definitions_and_arguments) {
    veer_link_def d = veer_default_link_def();
    veer_diag diag;
    cr_assert_eq(veer_link_def_check(&d, &diag), VEER_ERR_VALUE, "a zero key is refused");
    cr_assert(diag_says(&diag, "key"));
    d = link_for(1, 1, VEER_LINK_FRAME_MIN - 1);
    cr_assert_eq(veer_link_def_check(&d, &diag), VEER_ERR_VALUE);
    d = link_for(1, 1, VEER_LINK_FRAME_MAX + 1);
    cr_assert_eq(veer_link_def_check(&d, &diag), VEER_ERR_VALUE);
    d = link_for(1, 1, 255);
    veer_link_sender *s = (veer_link_sender *)&d;
    uint8_t one = 0;
    cr_assert_eq(veer_link_sender_create(&d, 0, &one, 1, &s, &diag), VEER_ERR_VALUE);
    cr_assert_null(s);
    static uint8_t big[VEER_LINK_MAX_PLAN_BYTES + 1];
    cr_assert_eq(veer_link_sender_create(&d, 1, big, sizeof big, &s, &diag), VEER_ERR_CAPACITY);
    cr_assert_eq(veer_link_sender_create(&d, 1, NULL, 1, &s, &diag), VEER_ERR_NULL);
    void *mem = aligned_alloc(16, (veer_link_receiver_size() + 15) / 16 * 16);
    veer_link_receiver *rx = NULL;
    cr_assert_eq(veer_link_receiver_init(mem, 16, &d, 0, 0, &rx, &diag), VEER_ERR_VALUE);
    cr_assert_eq(veer_link_receiver_init((char *)mem + 1, veer_link_receiver_size(), &d, 0, 0, &rx, &diag),
                 VEER_ERR_VALUE);
    cr_assert_null(rx);
    cr_assert_eq(veer_link_receiver_init(mem, veer_link_receiver_size(), &d, 0, 0, &rx, &diag), VEER_OK);
    cr_assert_eq(veer_link_receive(rx, NULL, 0, NULL), VEER_ERR_NULL);
    cr_assert_eq(veer_link_receiver_settle(rx, VEER_LINK_NONE), VEER_ERR_STATE);
    const uint8_t *p;
    size_t n;
    cr_assert_eq(veer_link_receiver_plan(rx, &p, &n, NULL), VEER_ERR_STATE);
    cr_assert_str_eq(veer_link_reason_name(VEER_LINK_PLAN_TAG), "PLAN_TAG");
    cr_assert_str_eq(veer_link_reason_name(-1), "UNKNOWN");
    cr_assert_str_eq(veer_link_reason_str(999), "unknown reason");
    /* every reason has a name and a text */
    for (int r = 0; r < VEER_LINK_REASON_COUNT; r++) {
        cr_assert_str_neq(veer_link_reason_name(r), "UNKNOWN");
        cr_assert(strlen(veer_link_reason_str(r)) > 3);
    }
    free(mem);
}

/* Random frames and mutated good frames never crash the receiver, never
 * make it ready, never allocate (fixed seed). */
Test(link, random_frames_never_crash) {
    static uint8_t plan[3000];
    veer_link_def d = link_for(4, 0x44, VEER_LINK_FRAME_DEFAULT);
    void *mem;
    veer_link_receiver *rx = new_receiver(&d, 0, &mem);
    frame_buf *f;
    int count = make_frames(&d, 9, plan, sizeof plan, &f);
    uint8_t cmd[VEER_LINK_FRAME_MAX];
    size_t cmd_n;
    cr_assert_eq(veer_link_command_frame(&d, 5, VEER_LINK_COMMAND_START, 9, cmd, sizeof cmd, &cmd_n), VEER_OK);
    alloc_calls = 0;
    cr_assert_eq(veer_set_allocator(count_alloc, count_free, NULL), VEER_OK);
    rng_state = 0x2545F4914F6CDD1Dull;
    uint8_t b[VEER_LINK_FRAME_MAX + 8];
    for (int it = 0; it < 200000; it++) {
        size_t n;
        int mode = (int)(rng() % 4);
        if (mode == 0) { /* noise */
            n = rng() % (sizeof b);
            for (size_t i = 0; i < n; i++) b[i] = (uint8_t)rng();
        } else { /* a good frame with a few bytes changed, the CRC made right half the time */
            int k0 = (int)(rng() % (uint64_t)count);
            const uint8_t *src = mode == 3 ? cmd : f[k0].bytes;
            size_t src_n = mode == 3 ? cmd_n : f[k0].size;
            n = src_n;
            memcpy(b, src, n);
            int flips = 1 + (int)(rng() % 4);
            for (int k = 0; k < flips; k++) b[rng() % n] ^= (uint8_t)(1u << (rng() % 8));
            if (rng() % 2 && n > 4) {
                uint32_t crc = veer_link_crc32(0, b, n - 4);
                for (int i = 0; i < 4; i++) b[n - 4 + i] = (uint8_t)(crc >> (8 * i));
            }
            if (rng() % 8 == 0) n = rng() % (n + 1);
            if (n == src_n && memcmp(b, src, n) == 0) continue; /* the flips undid themselves */
        }
        veer_link_event ev;
        cr_assert_eq(veer_link_receive(rx, b, n, &ev), VEER_OK);
        cr_assert(ev.reason >= 0 && ev.reason < VEER_LINK_REASON_COUNT);
        cr_assert(!ev.plan_ready, "iteration %d: a mangled plan came out whole", it);
        cr_assert(ev.command == 0, "iteration %d: a mangled command was taken", it);
    }
    cr_assert_eq(veer_set_allocator(NULL, NULL, NULL), VEER_OK);
    cr_assert_eq(alloc_calls, 0u, "the receiver allocated");
    cr_assert_eq(veer_link_receiver_accepted(rx), 0u);
    free(f);
    free(mem);
}

/* The layout bindings/python/veer/link.py mirrors (LinkDef). */
Test(link, link_def_layout) {
    cr_assert_eq(offsetof(veer_link_def, cart), 0u);
    cr_assert_eq(offsetof(veer_link_def, key), 4u);
    cr_assert_eq(offsetof(veer_link_def, frame_size), 36u);
    cr_assert_eq(offsetof(veer_link_def, max_plan_bytes), 40u);
    cr_assert_eq(sizeof(veer_link_def), 44u);
}

/* A cart given a plan capacity (max_plan_bytes): its receiver needs that
 * much buffer and no more; the sender with the same definition refuses a
 * larger plan before it goes on the air; a larger plan's chunks (from a
 * ground station that does not know) are refused with CAPACITY, leave a
 * plan in reassembly alone, and the gap report says so as a settled
 * verdict; a plan that fits still comes through. */
Test(link, plan_capacity) {
    veer_link_def big = link_for(9, 0x21, VEER_LINK_FRAME_DEFAULT), small = big;
    small.max_plan_bytes = 1000;
    size_t nb = veer_link_receiver_size_for(&big), ns = veer_link_receiver_size_for(&small);
    cr_log_info("receiver memory: %zu B for any plan, %zu B for plans up to 1000 B", nb, ns);
    cr_assert_eq(nb, veer_link_receiver_size());
    cr_assert(ns >= 1000 + VEER_LINK_PLAN_TAG_BYTES && ns < 2000, "%zu", ns);
    cr_assert_eq(veer_link_receiver_size_for(NULL), 0u);
    veer_diag diag;
    veer_link_def bad = small;
    bad.max_plan_bytes = VEER_LINK_MIN_PLAN_BYTES - 1;
    cr_assert_eq(veer_link_def_check(&bad, &diag), VEER_ERR_VALUE);
    bad.max_plan_bytes = VEER_LINK_MAX_PLAN_BYTES + 1;
    cr_assert_eq(veer_link_def_check(&bad, &diag), VEER_ERR_VALUE);
    void *mem = aligned_alloc(16, (nb + 15) / 16 * 16);
    veer_link_receiver *rx = NULL;
    cr_assert_eq(veer_link_receiver_init(mem, ns - 1, &small, 0, 0, &rx, &diag), VEER_ERR_VALUE);
    cr_assert_null(rx);
    cr_assert_eq(veer_link_receiver_init(mem, ns, &small, 0, 0, &rx, &diag), VEER_OK);
    static uint8_t plan[1001];
    for (size_t i = 0; i < sizeof plan; i++) plan[i] = (uint8_t)(i * 7 + 3);
    veer_link_sender *s = NULL;
    cr_assert_eq(veer_link_sender_create(&small, 1, plan, 1001, &s, &diag), VEER_ERR_CAPACITY);
    cr_assert_null(s);
    /* a fitting plan half in, then a larger plan's chunks (sent under the
     * big definition): refused, the first plan still completes */
    frame_buf *fit = NULL, *over = NULL;
    int nf = make_frames(&small, 2, plan, 1000, &fit), no = make_frames(&big, 3, plan, 1001, &over);
    for (int i = 0; i < nf / 2; i++) cr_assert_eq(take(rx, fit[i].bytes, fit[i].size).reason, VEER_LINK_NONE);
    for (int i = 0; i < no; i++) cr_assert_eq(take(rx, over[i].bytes, over[i].size).reason, VEER_LINK_CAPACITY);
    veer_link_event ev;
    memset(&ev, 0, sizeof ev);
    for (int i = nf / 2; i < nf; i++) ev = take(rx, fit[i].bytes, fit[i].size);
    cr_assert(ev.plan_ready && ev.reason == VEER_LINK_NONE);
    const uint8_t *got;
    size_t n;
    cr_assert_eq(veer_link_receiver_plan(rx, &got, &n, NULL), VEER_OK);
    cr_assert(n == 1000 && memcmp(got, plan, n) == 0);
    cr_assert_eq(veer_link_receiver_settle(rx, VEER_LINK_NONE), VEER_OK);
    /* with nothing in reassembly the gap report names the refused plan */
    ev = take(rx, over[0].bytes, over[0].size);
    cr_assert(ev.reason == VEER_LINK_CAPACITY && ev.gaps_due);
    veer_link_gaps g;
    cr_assert_eq(veer_link_receiver_gaps(rx, &g), VEER_OK);
    cr_assert(g.complete && g.plan_id == 3 && g.verdict == VEER_LINK_CAPACITY);
    cr_assert_eq(veer_link_receiver_accepted(rx), 2u);
    cr_assert_eq(veer_link_receiver_count(rx, VEER_LINK_CAPACITY), (uint32_t)no + 1);
    free(fit);
    free(over);
    free(mem);
}
