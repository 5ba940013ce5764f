/* The allocator hook: the library's only global state (status.h).
 * SPDX-License-Identifier: MIT */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include "internal.h"

static void *default_alloc(size_t size, void *ctx) {
    (void)ctx;
    return malloc(size);
}
static void default_free(void *ptr, size_t size, void *ctx) {
    (void)size;
    (void)ctx;
    free(ptr);
}

static veer_alloc_fn hook_alloc = default_alloc;
static veer_free_fn hook_free = default_free;
static void *hook_ctx = NULL;

veer_status veer_set_allocator(veer_alloc_fn alloc, veer_free_fn release, void *ctx) {
    if (!alloc && !release) {
        hook_alloc = default_alloc;
        hook_free = default_free;
        hook_ctx = NULL;
        return VEER_OK;
    }
    if (!alloc || !release) return VEER_ERR_NULL;
    hook_alloc = alloc;
    hook_free = release;
    hook_ctx = ctx;
    return VEER_OK;
}

void *veer__alloc(size_t size) { return size ? hook_alloc(size, hook_ctx) : NULL; }

void *veer__calloc(size_t count, size_t size) {
    if (count == 0 || size == 0 || count > SIZE_MAX / size) return NULL;
    void *p = veer__alloc(count * size);
    if (p) memset(p, 0, count * size);
    return p;
}

void veer__free(void *ptr, size_t size) {
    if (ptr) hook_free(ptr, size, hook_ctx);
}
