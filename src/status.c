/* Status and limit names, diagnostics, version. One table each (status.h);
 * struct sizes for bindings are in abi.c.
 * SPDX-License-Identifier: MIT */
#include <stdio.h>
#include <string.h>
#include "internal.h"

const char *veer_status_str(veer_status status) {
    switch (status) {
#define VEER_STATUS_STR_(name, value, text) \
    case VEER_##name:                       \
        return text;
        VEER_STATUS_TABLE(VEER_STATUS_STR_)
#undef VEER_STATUS_STR_
    }
    return "unknown status";
}

const char *veer_status_name(veer_status status) {
    switch (status) {
#define VEER_STATUS_NAME_(name, value, text) \
    case VEER_##name:                        \
        return #name;
        VEER_STATUS_TABLE(VEER_STATUS_NAME_)
#undef VEER_STATUS_NAME_
    }
    return "UNKNOWN";
}

static const char *limit_text(int kind) {
    switch (kind) {
#define VEER_LIMIT_STR_(name, value, text) \
    case VEER_LIMIT_##name:                \
        return text;
        VEER_LIMIT_TABLE(VEER_LIMIT_STR_)
#undef VEER_LIMIT_STR_
    }
    return "unknown";
}

size_t veer_limit_name(veer_limit_id id, char *buf, size_t size) {
    /* "text" or "text[module]", written by hand: no printf family for a name */
    char tmp[64];
    const char *text = limit_text(id.kind);
    size_t n = strlen(text);
    if (n > sizeof tmp - 16) n = sizeof tmp - 16;
    memcpy(tmp, text, n);
    if (id.module >= 0) {
        char digits[12];
        int d = 0;
        unsigned m = (unsigned)id.module;
        do digits[d++] = (char)('0' + m % 10u), m /= 10u;
        while (m && d < (int)sizeof digits);
        tmp[n++] = '[';
        while (d) tmp[n++] = digits[--d];
        tmp[n++] = ']';
    }
    if (buf && size > 0) {
        size_t len = n < size - 1 ? n : size - 1;
        memcpy(buf, tmp, len);
        buf[len] = '\0';
    }
    return n;
}

void veer__diag_ok(veer_diag *diag) {
    if (!diag) return;
    memset(diag, 0, sizeof *diag);
    diag->status = VEER_OK;
    diag->leg = diag->waypoint = diag->grid_index = -1;
    diag->s = -1.0;
    diag->limit = veer__limit(VEER_LIMIT_NONE, -1);
}

/* Resets diag to a failure with status at a place (-1: does not apply). */
static void fail_at(veer_diag *diag, veer_status status, int leg, int waypoint, int grid_index, double s,
                    veer_limit_id limit) {
    veer__diag_ok(diag);
    diag->status = status;
    diag->leg = leg;
    diag->waypoint = waypoint;
    diag->grid_index = grid_index;
    diag->s = isfinite(s) ? s : -1.0;
    diag->limit = limit;
}

#ifdef VEER_TERSE_DIAG
#undef veer__fail
#undef veer__fail_plain
int veer__fail_format(const char *fmt, ...) {
    (void)fmt;
    return 0;
}
/* The status text as the message, copied: no printf-family function is
 * linked into a terse build for diagnostics. */
veer_status veer__fail_terse(veer_diag *diag, veer_status status, int leg, int waypoint, int grid_index, double s,
                             veer_limit_id limit) {
    if (!diag) return status;
    fail_at(diag, status, leg, waypoint, grid_index, s, limit);
    const char *text = veer_status_str(status);
    size_t n = strlen(text);
    if (n >= sizeof diag->message) n = sizeof diag->message - 1;
    memcpy(diag->message, text, n);
    diag->message[n] = '\0';
    return status;
}
veer_status veer__fail_plain_terse(veer_diag *diag, veer_status status) {
    return veer__fail_terse(diag, status, -1, -1, -1, -1.0, veer__limit(VEER_LIMIT_NONE, -1));
}
#endif

veer_status veer__fail(veer_diag *diag, veer_status status, int leg, int waypoint, int grid_index, double s,
                       veer_limit_id limit, const char *fmt, ...) {
    if (!diag) return status;
    fail_at(diag, status, leg, waypoint, grid_index, s, limit);
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(diag->message, sizeof diag->message, fmt, ap);
    va_end(ap);
    return status;
}

veer_status veer__fail_plain(veer_diag *diag, veer_status status, const char *fmt, ...) {
    if (!diag) return status;
    fail_at(diag, status, -1, -1, -1, -1.0, veer__limit(VEER_LIMIT_NONE, -1));
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(diag->message, sizeof diag->message, fmt, ap);
    va_end(ap);
    return status;
}

double veer__wrap(double a) {
    if (!isfinite(a)) return 0.0;
    a = fmod(a, 2.0 * VEER_PI);
    if (a <= -VEER_PI) a += 2.0 * VEER_PI;
    if (a > VEER_PI) a -= 2.0 * VEER_PI;
    return a;
}

unsigned veer_version(void) { return (unsigned)VEER_VERSION_HEX; }
const char *veer_version_string(void) { return VEER_VERSION_STRING; }
