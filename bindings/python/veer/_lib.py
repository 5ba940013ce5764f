"""Loads libveer with ctypes and declares the C entry points the package uses.

Search order for the shared library:
  1. the file named by the environment variable VEER_LIBRARY;
  2. libveer.so beside this file (a pip install may copy it there);
  3. the build folders build/ci and build under the repository root, when
     the package runs straight from the source tree;
  4. the system's library search path.

The ctypes Structures below mirror include/veer/*.h field by field;
tests/python/test_abi.py compiles a small C program against the headers and
compares sizes and offsets, so a header change that is not mirrored here fails
a test instead of corrupting memory.
"""

import ctypes
import ctypes.util
import os
import pathlib

from ._version import __version__

MAX_MODULES = 8  # VEER_MAX_MODULES, include/veer/drive.h
MAX_LEGS = 32  # VEER_MAX_LEGS, include/veer/route.h
MAX_WAYPOINTS = 64  # VEER_MAX_WAYPOINTS, include/veer/route.h
DIAG_MESSAGE_SIZE = 200  # VEER_DIAG_MESSAGE_SIZE, include/veer/status.h

_HERE = pathlib.Path(__file__).resolve().parent
# bindings/python/veer -> repository root, when the package runs from a source tree.
_ROOT = _HERE.parents[2] if len(_HERE.parents) > 2 else _HERE
REPO_ROOT = _ROOT if (_ROOT / "include" / "veer" / "veer.h").is_file() else None

_LIB_NAMES = ("libveer.so", "libveer.dylib", "veer.dll")


class LibraryNotFound(OSError):
    """No usable libveer could be found or loaded."""


def candidate_paths():
    """Places the loader looks for the shared library, in order."""
    out = []
    env = os.environ.get("VEER_LIBRARY")
    if env:
        out.append(pathlib.Path(env))
    for name in _LIB_NAMES:
        out.append(_HERE / name)
    for sub in ("build/ci", "build") if REPO_ROOT is not None else ():
        for name in _LIB_NAMES:
            out.append(REPO_ROOT / sub / name)
    return out


# ---- structures mirroring the public headers ----------------------------

class LimitId(ctypes.Structure):
    _fields_ = [("kind", ctypes.c_int), ("module", ctypes.c_int)]


class Diag(ctypes.Structure):
    _fields_ = [
        ("status", ctypes.c_int),
        ("message", ctypes.c_char * DIAG_MESSAGE_SIZE),
        ("leg", ctypes.c_int),
        ("waypoint", ctypes.c_int),
        ("grid_index", ctypes.c_int),
        ("s", ctypes.c_double),
        ("limit", LimitId),
        ("value", ctypes.c_double),
    ]


class ModuleDef(ctypes.Structure):
    _fields_ = [("x", ctypes.c_double), ("y", ctypes.c_double), ("drive_angle", ctypes.c_double),
                ("out", ctypes.c_int)]


class DriveDef(ctypes.Structure):
    _fields_ = [
        ("kind", ctypes.c_int),
        ("module_count", ctypes.c_int),
        ("modules", ModuleDef * MAX_MODULES),
        ("wheel_radius", ctypes.c_double),
        ("half_wheelbase", ctypes.c_double),
        ("half_track", ctypes.c_double),
        ("roller_angle", ctypes.c_double),
        ("track_width", ctypes.c_double),
        ("skid_factor", ctypes.c_double),
    ]


class ModuleLimits(ctypes.Structure):
    _fields_ = [
        ("wheel_rate", ctypes.c_double),
        ("wheel_accel", ctypes.c_double),
        ("steer_rate", ctypes.c_double),
        ("steer_min", ctypes.c_double),
        ("steer_max", ctypes.c_double),
        ("traction_mu", ctypes.c_double),
        ("motor_stall_accel", ctypes.c_double),
        ("motor_free_rate", ctypes.c_double),
        ("wheel_jerk", ctypes.c_double),
    ]


class Limits(ctypes.Structure):
    _fields_ = [
        ("modules", ModuleLimits * MAX_MODULES),
        ("body_speed", ctypes.c_double),
        ("body_accel", ctypes.c_double),
        ("yaw_rate", ctypes.c_double),
        ("yaw_accel", ctypes.c_double),
        ("body_jerk", ctypes.c_double),
    ]


class PlanOptions(ctypes.Structure):
    _fields_ = [("grid_points", ctypes.c_int), ("accel_polygon_sides", ctypes.c_int),
                ("traction_polygon_sides", ctypes.c_int), ("duration_target", ctypes.c_double)]


class Waypoint(ctypes.Structure):
    _fields_ = [
        ("x", ctypes.c_double),
        ("y", ctypes.c_double),
        ("yaw", ctypes.c_double),
        ("has_yaw", ctypes.c_int),
        ("stop", ctypes.c_int),
        ("dwell", ctypes.c_double),
        ("timed", ctypes.c_int),
        ("arrival", ctypes.c_double),
    ]


class Leg(ctypes.Structure):
    _fields_ = [
        ("kind", ctypes.c_int),
        ("waypoint_count", ctypes.c_int),
        ("heading", ctypes.c_int),
        ("reversed", ctypes.c_int),
        ("toward_x", ctypes.c_double),
        ("toward_y", ctypes.c_double),
        ("corner_tolerance", ctypes.c_double),
        ("yaw", ctypes.c_double),
        ("direction", ctypes.c_int),
        ("pivot_x", ctypes.c_double),
        ("pivot_y", ctypes.c_double),
        ("angle", ctypes.c_double),
        ("hold_yaw", ctypes.c_int),
        ("dwell", ctypes.c_double),
    ]


class Route(ctypes.Structure):
    _fields_ = [
        ("start_x", ctypes.c_double),
        ("start_y", ctypes.c_double),
        ("start_yaw", ctypes.c_double),
        ("has_start_steer", ctypes.c_int),
        ("start_steer", ctypes.c_double * MAX_MODULES),
        ("has_start_twist", ctypes.c_int),
        ("start_twist", ctypes.c_double * 3),
        ("leg_count", ctypes.c_int),
        ("legs", Leg * MAX_LEGS),
        ("waypoint_count", ctypes.c_int),
        ("waypoints", Waypoint * MAX_WAYPOINTS),
    ]


class LegSummary(ctypes.Structure):
    _fields_ = [
        ("start", ctypes.c_double),
        ("duration", ctypes.c_double),
        ("resteer_time", ctypes.c_double),
        ("dwell_time", ctypes.c_double),
        ("s_begin", ctypes.c_double),
        ("s_end", ctypes.c_double),
    ]


class ModuleSetpoint(ctypes.Structure):
    _fields_ = [
        ("steer", ctypes.c_double),
        ("steer_rate", ctypes.c_double),
        ("wheel_rate", ctypes.c_double),
        ("wheel_accel", ctypes.c_double),
    ]


class Sample(ctypes.Structure):
    _fields_ = [
        ("t", ctypes.c_double),
        ("phase", ctypes.c_int),
        ("leg", ctypes.c_int),
        ("s", ctypes.c_double),
        ("sdot", ctypes.c_double),
        ("sddot", ctypes.c_double),
        ("pose", ctypes.c_double * 3),
        ("twist_world", ctypes.c_double * 3),
        ("twist_body", ctypes.c_double * 3),
        ("accel_world", ctypes.c_double * 3),
        ("accel_body", ctypes.c_double * 3),
        ("module_count", ctypes.c_int),
        ("modules", ModuleSetpoint * MAX_MODULES),
    ]


class PlanNeeds(ctypes.Structure):
    """Mirrors veer_plan_needs (include/veer/wire.h)."""
    _fields_ = [("plan_bytes", ctypes.c_uint32), ("knots", ctypes.c_uint32), ("waypoints", ctypes.c_uint32),
                ("legs", ctypes.c_uint32), ("modules", ctypes.c_uint32)]


def out_struct(cls, slack=512):
    """An instance of cls for the C side to write into, with spare room after
    it, so that a library built from newer headers (a field appended to
    veer_diag, say) cannot write past Python's memory. The ABI test checks
    the layouts themselves."""
    buf = (ctypes.c_char * (ctypes.sizeof(cls) + slack))()
    return cls.from_buffer(buf)


STRUCTS = {
    "veer_limit_id": LimitId,
    "veer_diag": Diag,
    "veer_module_def": ModuleDef,
    "veer_drive_def": DriveDef,
    "veer_module_limits": ModuleLimits,
    "veer_limits": Limits,
    "veer_plan_options": PlanOptions,
    "veer_waypoint": Waypoint,
    "veer_leg": Leg,
    "veer_route": Route,
    "veer_leg_summary": LegSummary,
    "veer_module_setpoint": ModuleSetpoint,
    "veer_sample": Sample,
    "veer_plan_needs": PlanNeeds,
}

_c_double_p = ctypes.POINTER(ctypes.c_double)
_c_size_p = ctypes.POINTER(ctypes.c_size_t)
_c_ubyte_p = ctypes.c_char_p  # bytes in; buffers out are passed as ctypes arrays

# name -> (restype, argtypes). Declared when present; missing ones are
# reported by has() so the package can say which C entry point it lacks.
_PROTOTYPES = {
    "veer_version": (ctypes.c_uint, []),
    "veer_version_string": (ctypes.c_char_p, []),
    "veer_status_name": (ctypes.c_char_p, [ctypes.c_int]),
    "veer_status_str": (ctypes.c_char_p, [ctypes.c_int]),
    "veer_limit_name": (ctypes.c_size_t, [LimitId, ctypes.c_char_p, ctypes.c_size_t]),
    # plain C API (include/veer/plan.h, drive.h, route.h)
    "veer_default_drive_def": (DriveDef, [ctypes.c_int]),
    "veer_default_limits": (Limits, []),
    "veer_default_plan_options": (PlanOptions, []),
    "veer_default_route": (Route, [ctypes.c_double, ctypes.c_double, ctypes.c_double]),
    "veer_default_leg": (Leg, [ctypes.c_int]),
    "veer_default_waypoint": (Waypoint, [ctypes.c_double, ctypes.c_double]),
    "veer_drive_module_count": (ctypes.c_int, [ctypes.POINTER(DriveDef)]),
    "veer_plan_create": (ctypes.c_int, [ctypes.POINTER(DriveDef), ctypes.POINTER(Limits), ctypes.POINTER(Route),
                                        ctypes.POINTER(PlanOptions), ctypes.POINTER(ctypes.c_void_p),
                                        ctypes.POINTER(Diag)]),
    "veer_plan_destroy": (None, [ctypes.c_void_p]),
    "veer_plan_duration": (ctypes.c_double, [ctypes.c_void_p]),
    "veer_plan_length": (ctypes.c_double, [ctypes.c_void_p]),
    "veer_plan_module_count": (ctypes.c_int, [ctypes.c_void_p]),
    "veer_plan_leg_count": (ctypes.c_int, [ctypes.c_void_p]),
    "veer_plan_leg": (ctypes.c_int, [ctypes.c_void_p, ctypes.c_int, ctypes.POINTER(LegSummary)]),
    "veer_plan_sample": (ctypes.c_int, [ctypes.c_void_p, ctypes.c_double, ctypes.POINTER(Sample)]),
    "veer_plan_table": (ctypes.c_int, [ctypes.c_void_p, ctypes.c_double, ctypes.POINTER(Sample), ctypes.c_size_t,
                                       _c_size_p]),
    "veer_plan_path_at": (ctypes.c_int, [ctypes.c_void_p, ctypes.c_double, _c_double_p, _c_double_p, _c_double_p]),
    "veer_plan_grid_count": (ctypes.c_int, [ctypes.c_void_p]),
    "veer_plan_grid": (ctypes.c_int, [ctypes.c_void_p, ctypes.c_int, _c_double_p, _c_double_p,
                                      ctypes.POINTER(LimitId)]),
    # bytes API (include/veer/wire.h)
    "veer_sizeof": (ctypes.c_size_t, [ctypes.c_char_p]),
    "veer_wire_schema_version": (ctypes.c_uint, []),
    "veer_plan_request_pb": (ctypes.c_int, [_c_ubyte_p, ctypes.c_size_t, ctypes.c_void_p, ctypes.c_size_t,
                                            _c_size_p]),
    "veer_plan_sample_pb": (ctypes.c_int, [_c_ubyte_p, ctypes.c_size_t, ctypes.c_double, ctypes.POINTER(Sample)]),
    "veer_plan_table_pb": (ctypes.c_int, [_c_ubyte_p, ctypes.c_size_t, ctypes.c_double, ctypes.c_void_p,
                                          ctypes.c_size_t, _c_size_p]),
    "veer_plan_reply_size_bound": (ctypes.c_size_t, [ctypes.c_int]),
    "veer_plan_workspace_size": (ctypes.c_size_t, []),
    "veer_plan_decode_pb": (ctypes.c_int, [_c_ubyte_p, ctypes.c_size_t, ctypes.POINTER(ctypes.c_void_p),
                                           ctypes.POINTER(Diag)]),
    "veer_plan_load_pb": (ctypes.c_int, [_c_ubyte_p, ctypes.c_size_t, ctypes.c_void_p, ctypes.c_size_t,
                                         ctypes.POINTER(ctypes.c_void_p), ctypes.POINTER(Diag)]),
    "veer_plan_encode_pb": (ctypes.c_int, [ctypes.c_void_p, ctypes.c_void_p, ctypes.c_size_t, _c_size_p,
                                           ctypes.POINTER(Diag)]),
    "veer_plan_needs_pb": (ctypes.c_int, [_c_ubyte_p, ctypes.c_size_t, ctypes.POINTER(PlanNeeds),
                                          ctypes.POINTER(Diag)]),
}


class Library:
    """The loaded shared library with its prototypes declared."""

    def __init__(self, path):
        self.path = str(path)
        self.dll = ctypes.CDLL(self.path)
        self.missing = []
        for name, (restype, argtypes) in _PROTOTYPES.items():
            try:
                fn = getattr(self.dll, name)
            except AttributeError:
                self.missing.append(name)
                continue
            fn.restype = restype
            fn.argtypes = argtypes

    def has(self, name):
        return name not in self.missing and hasattr(self.dll, name)

    def __getattr__(self, name):
        if name.startswith("veer_"):
            if name in self.missing:
                raise LibraryNotFound("%s does not export %s (library too old or built without it)"
                                      % (self.path, name))
            return getattr(self.dll, name)
        raise AttributeError(name)

    # ---- small helpers ----
    def version(self):
        v = int(self.dll.veer_version())
        return (v >> 16) & 0xFF, (v >> 8) & 0xFF, v & 0xFF

    def status_name(self, code):
        return self.dll.veer_status_name(int(code)).decode("ascii", "replace")

    def status_text(self, code):
        return self.dll.veer_status_str(int(code)).decode("ascii", "replace")

    def limit_name(self, kind, module):
        buf = ctypes.create_string_buffer(64)
        self.dll.veer_limit_name(LimitId(int(kind), int(module)), buf, ctypes.sizeof(buf))
        return buf.value.decode("ascii", "replace")


_loaded = None


def load():
    """The library, loaded once; raises LibraryNotFound with every place tried."""
    global _loaded
    if _loaded is not None:
        return _loaded
    tried = []
    for path in candidate_paths():
        if not path.is_file():
            tried.append("%s (not there)" % path)
            continue
        try:
            lib = Library(path)
        except OSError as exc:
            tried.append("%s (%s)" % (path, exc))
            continue
        _check_version(lib)
        _check_layout(lib)
        _loaded = lib
        return lib
    found = ctypes.util.find_library("veer")
    if found:
        try:
            lib = Library(found)
            _check_version(lib)
            _check_layout(lib)
            _loaded = lib
            return lib
        except OSError as exc:
            tried.append("%s (%s)" % (found, exc))
    raise LibraryNotFound("libveer not found; set VEER_LIBRARY to the shared library (e.g. build/libveer.so). Tried:\n  "
                          + "\n  ".join(tried))


def _check_version(lib):
    """The library must be the release this package was written for (same major.minor)."""
    if not lib.has("veer_version"):
        raise LibraryNotFound("%s is not libveer (no veer_version)" % lib.path)
    want = tuple(int(p) for p in __version__.split(".")[:3])
    have = lib.version()
    if have[:2] != want[:2]:
        raise LibraryNotFound("%s is libveer %d.%d.%d; this package needs %d.%d.x"
                              % ((lib.path,) + have + want[:2]))


def _check_layout(lib):
    """Where the library reports its struct sizes (veer_sizeof), each mirrored
    Structure must have the library's size: a library built from other
    headers is refused instead of being handed structs of the wrong shape."""
    if not lib.has("veer_sizeof"):
        return
    bad = []
    for name, cls in STRUCTS.items():
        have = int(lib.veer_sizeof(name.encode()))
        if have and have != ctypes.sizeof(cls):
            bad.append("%s: %d bytes in the library, %d here" % (name, have, ctypes.sizeof(cls)))
    if bad:
        raise LibraryNotFound("%s was built from headers this package does not mirror (%s); use the package from "
                              "the same source tree" % (lib.path, "; ".join(bad)))
