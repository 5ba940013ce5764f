/* Shared by the libFuzzer targets: a trap for findings, finite checks on
 * samples, and an allocator hook that traps when the cart-side code
 * (decoder, link receiver, player) allocates. Test-only.
 * SPDX-License-Identifier: MIT */
#ifndef VEER_FUZZ_COMMON_H
#define VEER_FUZZ_COMMON_H

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <veer/veer.h>
#include <veer/wire.h>

/* A finding: print what broke and abort, so libFuzzer keeps the input. */
#define FUZZ_FAIL(...)                                   \
    do {                                                 \
        fprintf(stderr, "fuzz finding: " __VA_ARGS__);   \
        fputc('\n', stderr);                             \
        abort();                                         \
    } while (0)

#define FUZZ_CHECK(cond, ...)                    \
    do {                                         \
        if (!(cond)) FUZZ_FAIL(__VA_ARGS__);     \
    } while (0)

/* 1 while cart-side code runs: any allocation then is a finding. */
static int fuzz_cart_side;
static size_t fuzz_heap_bytes;

static void *fuzz_alloc(size_t size, void *ctx) {
    (void)ctx;
    FUZZ_CHECK(!fuzz_cart_side, "the cart-side code allocated %zu bytes", size);
    fuzz_heap_bytes += size;
    return malloc(size);
}

static void fuzz_free(void *ptr, size_t size, void *ctx) {
    (void)ctx;
    if (ptr) fuzz_heap_bytes -= size;
    free(ptr);
}

static inline void fuzz_install_allocator(void) {
    if (veer_set_allocator(fuzz_alloc, fuzz_free, NULL) != VEER_OK) FUZZ_FAIL("veer_set_allocator refused the hook");
}

/* Little-endian reader over the fuzzer's bytes; reads past the end give 0. */
typedef struct {
    const uint8_t *p;
    size_t n, i;
} fuzz_reader;

static inline unsigned fuzz_u8(fuzz_reader *r) { return r->i < r->n ? r->p[r->i++] : 0u; }
static inline unsigned fuzz_u16(fuzz_reader *r) { return fuzz_u8(r) | fuzz_u8(r) << 8; }
static inline uint64_t fuzz_u64(fuzz_reader *r) {
    uint64_t v = 0;
    for (int k = 0; k < 8; k++) v |= (uint64_t)fuzz_u8(r) << (8 * k);
    return v;
}
/* Up to want bytes from the reader (fewer at its end); *len gets how many. */
static inline const uint8_t *fuzz_bytes(fuzz_reader *r, size_t want, size_t *len) {
    size_t left = r->n - r->i;
    *len = want < left ? want : left;
    const uint8_t *p = r->p + r->i;
    r->i += *len;
    return p;
}

static inline int fuzz_finite3(const double *v) { return isfinite(v[0]) && isfinite(v[1]) && isfinite(v[2]); }

/* Every number of a sample is finite (design.md: never a NaN in an output). */
static inline int fuzz_sample_finite(const veer_sample *s) {
    if (!isfinite(s->t) || !isfinite(s->s) || !isfinite(s->sdot) || !isfinite(s->sddot)) return 0;
    if (!fuzz_finite3(s->pose) || !fuzz_finite3(s->twist_world) || !fuzz_finite3(s->twist_body) ||
        !fuzz_finite3(s->accel_world) || !fuzz_finite3(s->accel_body))
        return 0;
    if (s->module_count < 0 || s->module_count > VEER_MAX_MODULES) return 0;
    for (int i = 0; i < s->module_count; i++) {
        const veer_module_setpoint *m = &s->modules[i];
        if (!isfinite(m->steer) || !isfinite(m->steer_rate) || !isfinite(m->wheel_rate) || !isfinite(m->wheel_accel))
            return 0;
    }
    return 1;
}

#endif
