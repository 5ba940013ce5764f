/* veer: the one version source, for compile time and run time.
 * SPDX-License-Identifier: MIT */
#ifndef VEER_VERSION_H
#define VEER_VERSION_H

#include "veer/status.h"

#define VEER_VERSION_MAJOR 0
#define VEER_VERSION_MINOR 1
#define VEER_VERSION_PATCH 0
#define VEER_VERSION_STRING "0.1.0"
/* (major << 16) | (minor << 8) | patch */
#define VEER_VERSION_HEX ((VEER_VERSION_MAJOR << 16) | (VEER_VERSION_MINOR << 8) | VEER_VERSION_PATCH)

#ifdef __cplusplus
extern "C" {
#endif

/* The library's version as VEER_VERSION_HEX of the build that made it. */
VEER_API unsigned veer_version(void);
/* The same as a static string, "0.1.0". */
VEER_API const char *veer_version_string(void);

/* sizeof a public struct by its C name ("veer_route", "veer_limits",
 * "veer_sample", ...), 0 for an unknown name: lets foreign callers that
 * mirror the structs (ctypes) check their layout against the library. */
VEER_API size_t veer_sizeof(const char *type_name);

#ifdef __cplusplus
}
#endif
#endif
