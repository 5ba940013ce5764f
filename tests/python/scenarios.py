"""Scenarios for the checks, beside the shipped ones in examples/scenarios.
Invented carts on an invented range; numbers chosen so that each case
exercises what its name says (the tests verify that it does)."""

import copy
import math

STEERED_DRIVE = {"kind": "DRIVE_KIND_STEERED", "wheelRadius": 0.08,
                 "modules": [{"x": 0.35, "y": 0.3}, {"x": -0.35, "y": 0.3},
                             {"x": -0.35, "y": -0.3}, {"x": 0.35, "y": -0.3}]}

# A steered cart sidesteps 2.2 m while turning 2.8 rad (heading blend): the
# instantaneous centre of rotation sweeps through the module circle and passes
# within a few millimetres of a module, whose steer angle then swings fast.
ICR_NEAR_MODULE = {
    "cartId": "test/icr-near-module",
    "drive": STEERED_DRIVE,
    "limits": {"modules": [{"wheelRate": 25.0, "wheelAccel": 40.0, "steerRate": 1.5}],
               "bodySpeed": 1.5, "bodyAccel": 1.0},
    "route": {"startX": 0.0, "startY": 0.0, "startYaw": 0.0,
              "legs": [{"kind": "LEG_KIND_TRAVEL", "waypointCount": 1, "heading": "HEADING_BLEND"}],
              "waypoints": [{"x": 2.2, "y": 0.0, "yaw": 2.8, "stop": True}]},
}

# A steered cart pivots about a berm corner 1.2 m to its left by 100 degrees,
# then pivots back the other way about a point ahead of it.
PIVOT = {
    "cartId": "test/pivot",
    "drive": STEERED_DRIVE,
    "limits": {"modules": [{"wheelRate": 20.0, "wheelAccel": 12.0, "steerRate": 3.0}],
               "bodySpeed": 1.5, "bodyAccel": 1.0, "yawRate": 1.2, "yawAccel": 2.0},
    "route": {"startX": 0.0, "startY": 0.0, "startYaw": 0.0,
              "legs": [{"kind": "LEG_KIND_PIVOT", "pivotX": 0.0, "pivotY": 1.2, "angle": math.radians(100)},
                       {"kind": "LEG_KIND_PIVOT", "pivotX": -1.5, "pivotY": 1.0, "angle": -0.8}]},
}

# A mecanum cart strafes along a dog-leg while its target keeps facing a
# point 3 m beside the lane (toward heading): yaw rate peaks as it passes.
TOWARD = {
    "cartId": "test/toward",
    "drive": {"kind": "DRIVE_KIND_MECANUM", "wheelRadius": 0.076, "halfWheelbase": 0.28, "halfTrack": 0.24},
    "limits": {"modules": [{"wheelRate": 20.0, "wheelAccel": 12.0}], "bodySpeed": 1.4, "bodyAccel": 0.9,
               "yawRate": 0.8, "yawAccel": 1.5},
    "route": {"startX": -5.0, "startY": 0.0, "startYaw": math.atan2(3.0, 5.0),
              "legs": [{"kind": "LEG_KIND_TRAVEL", "waypointCount": 2, "heading": "HEADING_TOWARD",
                        "towardX": 0.0, "towardY": 3.0, "cornerTolerance": 0.3}],
              "waypoints": [{"x": 0.5, "y": 0.0}, {"x": 5.0, "y": 1.0, "stop": True}]},
}

# A body-acceleration-bound case on a curve: the polygon's faces are the rows.
BODY_ACCEL_CURVE = {
    "cartId": "test/body-accel-curve",
    "drive": {"kind": "DRIVE_KIND_OMNI", "wheelRadius": 0.06},
    "limits": {"bodySpeed": 2.0, "bodyAccel": 0.6},
    "route": {"startX": 0.0, "startY": 0.0, "startYaw": 0.0,
              "legs": [{"kind": "LEG_KIND_TRAVEL", "waypointCount": 3, "heading": "HEADING_HOLD",
                        "cornerTolerance": 1.2}],
              "waypoints": [{"x": 4.0, "y": 0.0}, {"x": 4.0, "y": 4.0}, {"x": 8.0, "y": 4.0, "stop": True}]},
}

# A traction-bound case (issue 5): wet grass, mu 0.35 (invented), corners and a
# turn while travelling, so the contact points' centripetal parts differ.
TRACTION = {
    "cartId": "test/traction",
    "drive": STEERED_DRIVE,
    "limits": {"modules": [{"wheelRate": 40.0, "tractionMu": 0.35}], "bodySpeed": 3.0},
    "route": {"startX": 0.0, "startY": 0.0, "startYaw": 0.0,
              "legs": [{"kind": "LEG_KIND_TRAVEL", "waypointCount": 3, "heading": "HEADING_BLEND",
                        "cornerTolerance": 1.0}],
              "waypoints": [{"x": 5.0, "y": 0.0}, {"x": 8.0, "y": 4.0, "yaw": 1.0},
                            {"x": 12.0, "y": 4.0, "stop": True}]},
}

EXTRA = {"icr_near_module": ICR_NEAR_MODULE, "pivot": PIVOT, "toward": TOWARD, "body_accel_curve": BODY_ACCEL_CURVE,
         "traction": TRACTION}


def get(name):
    return copy.deepcopy(EXTRA[name])
