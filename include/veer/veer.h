/* veer: time-optimal trajectories for wheeled carts, per-module setpoints.
 * The one header to include.
 * SPDX-License-Identifier: MIT */
#ifndef VEER_H
#define VEER_H

#include "veer/version.h"
#include "veer/status.h"
#include "veer/drive.h"
#include "veer/route.h"
#include "veer/plan.h"
#include "veer/range.h"
#include "veer/wire.h"

#endif
