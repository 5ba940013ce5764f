/* What a test may expect of a diagnostic's message text. A library built
 * with VEER_TERSE_DIAG (the CMake option a cart's firmware may use; the
 * tests are then compiled with the same definition) writes the status's own
 * text as every message and keeps the rest of the diagnostic (status,
 * indices, path position, limit): there the message must be exactly that
 * text, elsewhere it must contain the words the test names.
 * SPDX-License-Identifier: MIT */
#ifndef VEER_TEST_DIAG_TEXT_H
#define VEER_TEST_DIAG_TEXT_H

#include <string.h>
#include <veer/status.h>

#ifdef VEER_TERSE_DIAG
#define DIAG_TERSE 1
#else
#define DIAG_TERSE 0
#endif

/* 1 when message (of a failure with status) contains text; terse builds:
 * when it is the status text. */
static inline int diag_text_has(const char *message, veer_status status, const char *text) {
    if (DIAG_TERSE) return strcmp(message, veer_status_str(status)) == 0;
    return strstr(message, text) != NULL;
}
/* The same for exactly text. */
static inline int diag_text_is(const char *message, veer_status status, const char *text) {
    return strcmp(message, DIAG_TERSE ? veer_status_str(status) : text) == 0;
}
/* diag_text_has for a veer_diag. */
static inline int diag_says(const veer_diag *d, const char *text) { return diag_text_has(d->message, d->status, text); }
/* diag_text_is for a veer_diag. */
static inline int diag_is(const veer_diag *d, const char *text) { return diag_text_is(d->message, d->status, text); }

#endif
