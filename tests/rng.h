/* Random numbers for the tests (fixed seeds): splitmix64 (S. Vigna,
 * public-domain reference code, constants from Steele, Lea & Flood, "Fast
 * splittable pseudorandom number generators", OOPSLA 2014).
 * SPDX-License-Identifier: MIT */
#ifndef VEER_TEST_RNG_H
#define VEER_TEST_RNG_H

#include <stdint.h>

typedef struct {
    uint64_t s;
} rng;

static inline uint64_t next_u64(rng *r) {
    uint64_t z = (r->s += 0x9E3779B97F4A7C15ull);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    return z ^ (z >> 31);
}
/* uniform in [a, b) */
static inline double uni(rng *r, double a, double b) { return a + (b - a) * (double)(next_u64(r) >> 11) * 0x1.0p-53; }
static inline int pick(rng *r, int n) { return (int)(next_u64(r) % (uint64_t)n); }
static inline int chance(rng *r, double p) { return uni(r, 0.0, 1.0) < p; }

#endif
