/* SHA-256 (NIST FIPS 180-4, section 6.2) for the plan's content hash.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "wire_internal.h"

static const uint32_t K[64] = {
    0x428a2f98u, 0x71374491u, 0xb5c0fbcfu, 0xe9b5dba5u, 0x3956c25bu, 0x59f111f1u, 0x923f82a4u, 0xab1c5ed5u,
    0xd807aa98u, 0x12835b01u, 0x243185beu, 0x550c7dc3u, 0x72be5d74u, 0x80deb1feu, 0x9bdc06a7u, 0xc19bf174u,
    0xe49b69c1u, 0xefbe4786u, 0x0fc19dc6u, 0x240ca1ccu, 0x2de92c6fu, 0x4a7484aau, 0x5cb0a9dcu, 0x76f988dau,
    0x983e5152u, 0xa831c66du, 0xb00327c8u, 0xbf597fc7u, 0xc6e00bf3u, 0xd5a79147u, 0x06ca6351u, 0x14292967u,
    0x27b70a85u, 0x2e1b2138u, 0x4d2c6dfcu, 0x53380d13u, 0x650a7354u, 0x766a0abbu, 0x81c2c92eu, 0x92722c85u,
    0xa2bfe8a1u, 0xa81a664bu, 0xc24b8b70u, 0xc76c51a3u, 0xd192e819u, 0xd6990624u, 0xf40e3585u, 0x106aa070u,
    0x19a4c116u, 0x1e376c08u, 0x2748774cu, 0x34b0bcb5u, 0x391c0cb3u, 0x4ed8aa4au, 0x5b9cca4fu, 0x682e6ff3u,
    0x748f82eeu, 0x78a5636fu, 0x84c87814u, 0x8cc70208u, 0x90befffau, 0xa4506cebu, 0xbef9a3f7u, 0xc67178f2u};

static uint32_t ror(uint32_t x, int n) { return (x >> n) | (x << (32 - n)); }

/* One block. The message schedule W_t (FIPS 180-4, 6.2.2 step 1) is kept
 * as its last 16 words, each computed when round t needs it: W_t depends
 * on W_{t-2}, W_{t-7}, W_{t-15} and W_{t-16} only, so the words are the
 * same as with all 64 stored (a cart's stack holds 64 bytes, not 256). */
static void block(uint32_t h[8], const uint8_t *p) {
    uint32_t w[16];
    for (int i = 0; i < 16; i++)
        w[i] = (uint32_t)p[4 * i] << 24 | (uint32_t)p[4 * i + 1] << 16 | (uint32_t)p[4 * i + 2] << 8 | p[4 * i + 3];
    uint32_t a = h[0], b = h[1], c = h[2], d = h[3], e = h[4], f = h[5], g = h[6], k = h[7];
    for (int i = 0; i < 64; i++) {
        if (i >= 16) {
            uint32_t w15 = w[(i - 15) & 15], w2 = w[(i - 2) & 15];
            uint32_t s0 = ror(w15, 7) ^ ror(w15, 18) ^ (w15 >> 3);
            uint32_t s1 = ror(w2, 17) ^ ror(w2, 19) ^ (w2 >> 10);
            w[i & 15] += s0 + w[(i - 7) & 15] + s1; /* w[i & 15] held W_{t-16} */
        }
        uint32_t t1 = k + (ror(e, 6) ^ ror(e, 11) ^ ror(e, 25)) + ((e & f) ^ (~e & g)) + K[i] + w[i & 15];
        uint32_t t2 = (ror(a, 2) ^ ror(a, 13) ^ ror(a, 22)) + ((a & b) ^ (a & c) ^ (b & c));
        k = g;
        g = f;
        f = e;
        e = d + t1;
        d = c;
        c = b;
        b = a;
        a = t1 + t2;
    }
    h[0] += a, h[1] += b, h[2] += c, h[3] += d, h[4] += e, h[5] += f, h[6] += g, h[7] += k;
}

void veer__sha256_init(veer_sha256 *c) {
    static const uint32_t h0[8] = {0x6a09e667u, 0xbb67ae85u, 0x3c6ef372u, 0xa54ff53au,
                                   0x510e527fu, 0x9b05688cu, 0x1f83d9abu, 0x5be0cd19u};
    memcpy(c->h, h0, sizeof h0);
    c->bytes = 0;
    c->fill = 0;
}

void veer__sha256_update(veer_sha256 *c, const void *data, size_t size) {
    const uint8_t *p = data;
    c->bytes += size;
    while (size > 0) {
        size_t take = 64 - c->fill < size ? 64 - c->fill : size;
        memcpy(c->block + c->fill, p, take);
        c->fill += take;
        p += take;
        size -= take;
        if (c->fill == 64) {
            block(c->h, c->block);
            c->fill = 0;
        }
    }
}

void veer__sha256_final(veer_sha256 *c, uint8_t digest[32]) {
    uint64_t bits = c->bytes * 8u;
    uint8_t pad[72] = {0x80};
    size_t padlen = (c->fill < 56 ? 56 : 120) - c->fill;
    uint8_t len[8];
    for (int i = 0; i < 8; i++) len[i] = (uint8_t)(bits >> (56 - 8 * i));
    veer__sha256_update(c, pad, padlen);
    veer__sha256_update(c, len, 8);
    for (int i = 0; i < 8; i++) {
        digest[4 * i] = (uint8_t)(c->h[i] >> 24);
        digest[4 * i + 1] = (uint8_t)(c->h[i] >> 16);
        digest[4 * i + 2] = (uint8_t)(c->h[i] >> 8);
        digest[4 * i + 3] = (uint8_t)c->h[i];
    }
}
