"""Messages of proto/veer/v1 -> the C structs of include/veer/*.h, by the
rules the .proto files state (unset drive fields take veer_default_drive_def,
unset limits are unlimited, one ModuleLimits entry applies to every module,
unspecified heading is HOLD, ...).

Used to rebuild a plan's path with the plain C API (Plan.path_at) and to know
the drive as planned (module positions for the kinematics and the drawing).
Values are copied as they are; the C checks judge them."""

import math

from . import _lib

TURN_TO_DIRECTION = {0: 0, 1: 0, 2: 1, 3: -1}  # Turn enum -> veer_leg.direction
MODULE_LIMIT_FIELDS = ("wheel_rate", "wheel_accel", "steer_rate", "steer_min", "steer_max", "traction_mu",
                       "motor_stall_accel", "motor_free_rate", "wheel_jerk")


class ConvertError(ValueError):
    """The message cannot be expressed in the C structs (status name, text)."""

    def __init__(self, status, text):
        super().__init__(text)
        self.status = status
        self.text = text


def drive_struct(lib, msg):
    d = lib.veer_default_drive_def(int(msg.kind))
    mods = list(msg.modules)
    if mods:
        if len(mods) > _lib.MAX_MODULES:
            raise ConvertError("ERR_CAPACITY", "drive has %d modules, at most %d" % (len(mods), _lib.MAX_MODULES))
        d.module_count = len(mods)
        for i, m in enumerate(mods):
            d.modules[i].x = m.x
            d.modules[i].y = m.y
            d.modules[i].drive_angle = m.drive_angle
    for f in ("wheel_radius", "half_wheelbase", "half_track", "roller_angle", "track_width", "skid_factor"):
        if msg.HasField(f):
            setattr(d, f, getattr(msg, f))
    out = list(getattr(msg, "modules_out", []))
    if len(out) > _lib.MAX_MODULES:
        raise ConvertError("ERR_CAPACITY", "drive lists %d modules out, at most %d" % (len(out), _lib.MAX_MODULES))
    for i in out:
        if i >= _lib.MAX_MODULES:
            raise ConvertError("ERR_VALUE", "modules_out names module %d; the drive has at most %d"
                               % (i, _lib.MAX_MODULES))
        d.modules[i].out = 1
    return d


def module_count(lib, drive):
    return int(lib.veer_drive_module_count(drive))


def limits_struct(lib, msg, n_modules):
    L = lib.veer_default_limits()
    for f in ("body_speed", "body_accel", "yaw_rate", "yaw_accel", "body_jerk"):
        if f in msg.DESCRIPTOR.fields_by_name and msg.HasField(f):
            setattr(L, f, getattr(msg, f))
    mods = list(msg.modules)
    if len(mods) > _lib.MAX_MODULES:
        raise ConvertError("ERR_CAPACITY", "limits have %d module entries, at most %d" % (len(mods), _lib.MAX_MODULES))
    if len(mods) not in (0, 1, n_modules):
        raise ConvertError("ERR_VALUE", "limits have %d module entries; the drive has %d modules (give 0, 1 or %d)"
                           % (len(mods), n_modules, n_modules))
    for i in range(n_modules if mods else 0):
        m = mods[0] if len(mods) == 1 else mods[i]
        for f in MODULE_LIMIT_FIELDS:
            if f in m.DESCRIPTOR.fields_by_name and m.HasField(f):
                setattr(L.modules[i], f, getattr(m, f))
    return L


def options_struct(lib, msg):
    o = lib.veer_default_plan_options()
    if msg.HasField("grid_points"):
        o.grid_points = min(int(msg.grid_points), 2 ** 31 - 1)
    if msg.HasField("accel_polygon_sides"):
        o.accel_polygon_sides = min(int(msg.accel_polygon_sides), 2 ** 31 - 1)
    if "traction_polygon_sides" in msg.DESCRIPTOR.fields_by_name and msg.HasField("traction_polygon_sides"):
        o.traction_polygon_sides = min(int(msg.traction_polygon_sides), 2 ** 31 - 1)
    if "duration_target" in msg.DESCRIPTOR.fields_by_name and msg.HasField("duration_target"):
        o.duration_target = msg.duration_target
    return o


def route_struct(lib, msg):
    r = lib.veer_default_route(msg.start_x, msg.start_y, msg.start_yaw)
    if len(msg.start_steer) > _lib.MAX_MODULES:
        raise ConvertError("ERR_CAPACITY", "route has %d start steer angles, at most %d"
                           % (len(msg.start_steer), _lib.MAX_MODULES))
    if len(msg.legs) > _lib.MAX_LEGS:
        raise ConvertError("ERR_CAPACITY", "route has %d legs, at most %d" % (len(msg.legs), _lib.MAX_LEGS))
    if len(msg.waypoints) > _lib.MAX_WAYPOINTS:
        raise ConvertError("ERR_CAPACITY", "route has %d waypoints, at most %d"
                           % (len(msg.waypoints), _lib.MAX_WAYPOINTS))
    if len(msg.start_steer):
        r.has_start_steer = 1
        for i, a in enumerate(msg.start_steer):
            r.start_steer[i] = a
    if "start_twist" in msg.DESCRIPTOR.fields_by_name and msg.HasField("start_twist"):
        r.has_start_twist = 1
        r.start_twist[0], r.start_twist[1], r.start_twist[2] = (msg.start_twist.vx, msg.start_twist.vy,
                                                                 msg.start_twist.wz)
    r.leg_count = len(msg.legs)
    for i, g in enumerate(msg.legs):
        leg = lib.veer_default_leg(int(g.kind))
        leg.waypoint_count = min(int(g.waypoint_count), 2 ** 31 - 1)
        leg.heading = int(g.heading) if g.heading else 1
        leg.reversed = 1 if g.reversed else 0
        leg.toward_x, leg.toward_y = g.toward_x, g.toward_y
        if g.HasField("corner_tolerance"):
            leg.corner_tolerance = g.corner_tolerance
        leg.yaw = g.yaw
        leg.direction = TURN_TO_DIRECTION.get(int(g.turn), 0)
        leg.pivot_x, leg.pivot_y, leg.angle = g.pivot_x, g.pivot_y, g.angle
        leg.dwell = g.dwell
        leg.hold_yaw = 1 if getattr(g, "hold_yaw", False) else 0
        r.legs[i] = leg
    r.waypoint_count = len(msg.waypoints)
    for i, w in enumerate(msg.waypoints):
        wp = lib.veer_default_waypoint(w.x, w.y)
        if w.HasField("yaw"):
            wp.yaw, wp.has_yaw = w.yaw, 1
        wp.stop = 1 if w.stop else 0
        wp.dwell = w.dwell
        if "arrival" in w.DESCRIPTOR.fields_by_name and w.HasField("arrival"):
            wp.timed, wp.arrival = 1, w.arrival
        r.waypoints[i] = wp
    return r


KIND_NAMES = {1: "steered", 2: "mecanum", 3: "omni", 4: "differential"}


def drive_dict(drive):
    """A resolved DriveDef struct as a plain dict (field names of drive.h)."""
    n = drive.module_count
    if drive.kind == 2:
        n = 4
    elif drive.kind == 4:
        n = 2
    return {
        "kind": KIND_NAMES.get(drive.kind, "unspecified"),
        "module_count": n,
        "modules": [{"x": drive.modules[i].x, "y": drive.modules[i].y, "drive_angle": drive.modules[i].drive_angle,
                     "out": bool(drive.modules[i].out)}
                    for i in range(min(max(n, 0), _lib.MAX_MODULES))],
        "wheel_radius": drive.wheel_radius,
        "half_wheelbase": drive.half_wheelbase,
        "half_track": drive.half_track,
        "roller_angle": drive.roller_angle,
        "track_width": drive.track_width,
        "skid_factor": drive.skid_factor,
    }


def limits_dict(limits, n_modules):
    """A Limits struct as a plain dict; unset limits are math.inf."""
    out = {f: getattr(limits, f) for f in ("body_speed", "body_accel", "yaw_rate", "yaw_accel", "body_jerk")}
    out["modules"] = [{f: getattr(limits.modules[i], f) for f in MODULE_LIMIT_FIELDS}
                      for i in range(min(max(n_modules, 0), _lib.MAX_MODULES))]
    return out


def finite_or_none(v):
    return v if math.isfinite(v) else None
