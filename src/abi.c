/* Sizes of the public structs by name, for bindings that lay them out
 * themselves (the Python binding checks its ctypes mirrors against them).
 * A file of its own: a cart's firmware, which links status.c, does not
 * carry these names (an object's string literals share one section).
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "veer/veer.h"

size_t veer_sizeof(const char *type_name) {
    static const struct {
        const char *name;
        size_t size;
    } sizes[] = {
        {"veer_diag", sizeof(veer_diag)},         {"veer_drive_def", sizeof(veer_drive_def)},
        {"veer_limits", sizeof(veer_limits)},     {"veer_plan_options", sizeof(veer_plan_options)},
        {"veer_route", sizeof(veer_route)},       {"veer_leg", sizeof(veer_leg)},
        {"veer_waypoint", sizeof(veer_waypoint)}, {"veer_sample", sizeof(veer_sample)},
        {"veer_leg_summary", sizeof(veer_leg_summary)}, {"veer_stop_info", sizeof(veer_stop_info)},
        {"veer_plan_needs", sizeof(veer_plan_needs)},
    };
    if (!type_name) return 0;
    for (size_t i = 0; i < sizeof sizes / sizeof sizes[0]; i++)
        if (strcmp(sizes[i].name, type_name) == 0) return sizes[i].size;
    return 0;
}
