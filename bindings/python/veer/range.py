"""Range safety checks (include/veer/range.h): keep-in and keep-out areas,
speed zones, the footprint swept along a plan, the braking envelope and the
separation of several carts.

    import veer, veer.range as vr
    rng, fp = vr.load("examples/scenarios/range_kestrel_flats.json")
    p = vr.plan_in_range("examples/scenarios/kestrel_flats_lane4_demo.json", rng, fp)
    chk = vr.check(p, rng, fp)           # sweep and braking envelope
    print(chk.report["worst"]["margin"], chk.braking["stop_distance"])

Areas are simple polygons in the world frame (metres); a footprint is an
outline in the body frame (x forward, y left) plus a margin. Clearances are
signed metres: positive, the distance to the area; negative, the depth of a
violation (see range.h). A range file is the proto3 JSON mapping of a
veer.v1.RangeCheckRequest without its plan: {"range": {...}, "footprint":
{...}} (proto/veer/v1/range.proto); a bare Range is accepted too.

CAUTION: these checks are not a safety-rated function. A hardware emergency
stop, the range's safety rules and its range safety officer always come
first.
SPDX-License-Identifier: MIT"""

import ctypes
import importlib
import json
import math
import numbers

from . import _convert, _lib, _pb
from .plan import Plan, PlanError, _request_bytes, library

MAX_OUTLINE_VERTICES = 64  # VEER_MAX_OUTLINE_VERTICES, include/veer/range.h
MAX_KEEP_OUT = 32  # VEER_MAX_KEEP_OUT
MAX_SPEED_ZONES = 16  # VEER_MAX_SPEED_ZONES
MAX_CARTS = 16  # VEER_MAX_CARTS
AREA_KINDS = {0: "none", 1: "keep_in", 2: "keep_out", 3: "speed_zone", 4: "cart"}


# ---- structures mirroring include/veer/range.h --------------------------------

class COutline(ctypes.Structure):
    _fields_ = [("count", ctypes.c_int), ("points", (ctypes.c_double * 2) * MAX_OUTLINE_VERTICES)]


class CFootprint(ctypes.Structure):
    _fields_ = [("shape", COutline), ("margin", ctypes.c_double)]


class CSpeedZone(ctypes.Structure):
    _fields_ = [("area", COutline), ("speed", ctypes.c_double)]


class CRange(ctypes.Structure):
    _fields_ = [("keep_in", COutline), ("keep_out_count", ctypes.c_int), ("keep_out", COutline * MAX_KEEP_OUT),
                ("zone_count", ctypes.c_int), ("zones", CSpeedZone * MAX_SPEED_ZONES)]


class CAreaId(ctypes.Structure):
    _fields_ = [("kind", ctypes.c_int), ("index", ctypes.c_int)]


class CRangeEvent(ctypes.Structure):
    _fields_ = [("t", ctypes.c_double), ("s", ctypes.c_double), ("pose", ctypes.c_double * 3), ("area", CAreaId),
                ("margin", ctypes.c_double)]


class CRangeReport(ctypes.Structure):
    _fields_ = [("clear", ctypes.c_int), ("worst", CRangeEvent), ("violated", ctypes.c_int),
                ("first_violation", CRangeEvent), ("first_violation_end", CRangeEvent), ("poses", ctypes.c_long)]


class CBrakingReport(ctypes.Structure):
    _fields_ = [("clear", ctypes.c_int), ("worst_margin", ctypes.c_double), ("worst_s", ctypes.c_double),
                ("worst_area", CAreaId), ("worst_t", ctypes.c_double), ("stop_distance", ctypes.c_double),
                ("stop_distance_t", ctypes.c_double), ("stop_duration", ctypes.c_double),
                ("stop_speed", ctypes.c_double), ("last_safe_stop_t", ctypes.c_double),
                ("last_safe_stop_s", ctypes.c_double), ("stops", ctypes.c_int)]


class CCart(ctypes.Structure):
    _fields_ = [("plan", ctypes.c_void_p), ("start_time", ctypes.c_double), ("footprint", CFootprint)]


class CSeparationReport(ctypes.Structure):
    _fields_ = [("min_separation", ctypes.c_double), ("min_t", ctypes.c_double), ("min_a", ctypes.c_int),
                ("min_b", ctypes.c_int), ("conflict", ctypes.c_int), ("conflict_t", ctypes.c_double),
                ("conflict_a", ctypes.c_int), ("conflict_b", ctypes.c_int), ("t_begin", ctypes.c_double),
                ("t_end", ctypes.c_double), ("poses", ctypes.c_long)]


_P = ctypes.POINTER
_D = ctypes.c_double
_PROTOTYPES = {
    "veer_outline_check": [_P(COutline), _P(_lib.Diag)],
    "veer_outline_contains": [_P(COutline), _D, _D, _P(ctypes.c_int)],
    "veer_outline_point_distance": [_P(COutline), _D, _D, _P(_D)],
    "veer_outline_distance": [_P(COutline), _P(COutline), _P(_D)],
    "veer_outline_clearance": [_P(COutline), _P(COutline), ctypes.c_int, _P(_D)],
    "veer_footprint_check": [_P(CFootprint), _P(_lib.Diag)],
    "veer_footprint_place": [_P(CFootprint), _P(_D), _P(COutline)],
    "veer_range_check": [_P(CRange), _P(_lib.Diag)],
    "veer_plan_create_in_range": [_P(_lib.DriveDef), _P(_lib.Limits), _P(_lib.Route), _P(_lib.PlanOptions),
                                  _P(CRange), _P(CFootprint), _P(ctypes.c_void_p), _P(_lib.Diag)],
    "veer_plan_check_range": [ctypes.c_void_p, _P(CRange), _P(CFootprint), _P(CRangeReport), _P(_lib.Diag)],
    "veer_plan_check_braking": [ctypes.c_void_p, _P(CRange), _P(CFootprint), _P(CBrakingReport), _P(_lib.Diag)],
    "veer_carts_check_separation": [_P(CCart), ctypes.c_int, _D, _P(CSeparationReport), _P(_lib.Diag)],
    "veer_plan_encode_pb": [ctypes.c_void_p, ctypes.c_void_p, ctypes.c_size_t, _P(ctypes.c_size_t), _P(_lib.Diag)],
    "veer_range_check_pb": [ctypes.c_char_p, ctypes.c_size_t, ctypes.c_void_p, ctypes.c_size_t, _P(ctypes.c_size_t)],
}
_declared = {}


def _fn(name):
    """A range function of libveer with its prototype declared."""
    lib = library()
    key = (id(lib), name)
    if key not in _declared:
        if not lib.has(name) and not hasattr(lib.dll, name):
            raise PlanError("ERR_STATE", "%s does not export %s (a library without the range checks)"
                            % (lib.path, name))
        f = getattr(lib.dll, name)
        f.argtypes = _PROTOTYPES[name]
        f.restype = ctypes.c_int
        _declared[key] = f
    return _declared[key]


def _fail(st, diag, what):
    lib = library()
    if diag is not None:
        return PlanError._from_diag(lib, st, diag)
    return PlanError(lib.status_name(st), "%s: %s" % (what, lib.status_text(st)))


# ---- shapes ---------------------------------------------------------------------

def _points(pts, what):
    try:
        out = [(float(p[0]), float(p[1])) for p in pts]
    except (TypeError, ValueError, IndexError, KeyError):
        raise PlanError("ERR_VALUE", "%s: points must be (x, y) pairs" % what) from None
    if len(out) > MAX_OUTLINE_VERTICES:
        raise PlanError("ERR_CAPACITY", "%s: %d vertices, at most %d" % (what, len(out), MAX_OUTLINE_VERTICES))
    return out


def _c_outline(pts):
    o = COutline()
    o.count = len(pts)
    for i, (x, y) in enumerate(pts):
        o.points[i][0] = x
        o.points[i][1] = y
    return o


def _outline_of_json(d, what):
    """An outline from the JSON mapping of veer.v1.Outline ({"points": [{"x":..,"y":..}]})
    or a plain list of [x, y] pairs."""
    if isinstance(d, dict):
        pts = d.get("points", [])
        try:
            return _points([(p.get("x", 0.0), p.get("y", 0.0)) if isinstance(p, dict) else p for p in pts], what)
        except AttributeError:
            raise PlanError("ERR_VALUE", "%s: points must be objects with x and y" % what) from None
    return _points(d, what)


def _outline_json(pts):
    return {"points": [{"x": x, "y": y} for x, y in pts]}


def _get(d, camel, snake, default=None):
    return d.get(camel, d.get(snake, default))


class Footprint:
    """A cart's footprint: its outline in the body frame (x forward, y left,
    m) and a margin added all round (m)."""

    def __init__(self, points, margin=0.0):
        self.points = _points(points, "footprint")
        self.margin = float(margin)

    @classmethod
    def rectangle(cls, front, rear, left, right, margin=0.0):
        """Reaching front m ahead of the body origin, rear behind, left and right."""
        return cls([(front, left), (-rear, left), (-rear, -right), (front, -right)], margin)

    @classmethod
    def from_json(cls, d):
        if not isinstance(d, dict):
            raise PlanError("ERR_VALUE", "footprint must be an object with shape and margin")
        return cls(_outline_of_json(d.get("shape", {}), "footprint"), d.get("margin", 0.0))

    def to_json(self):
        return {"shape": _outline_json(self.points), "margin": self.margin}

    def _struct(self):
        f = CFootprint()
        f.shape = _c_outline(self.points)
        f.margin = self.margin
        diag = _lib.out_struct(_lib.Diag)
        st = _fn("veer_footprint_check")(ctypes.byref(f), ctypes.byref(diag))
        if st != 0:
            raise _fail(st, diag, "footprint")
        return f

    def world(self, pose):
        """The outline (without the margin) in the world frame at pose (x, y, yaw)."""
        f = self._struct()
        out = COutline()
        st = _fn("veer_footprint_place")(ctypes.byref(f), (ctypes.c_double * 3)(*[float(v) for v in pose[:3]]),
                                         ctypes.byref(out))
        if st != 0:
            raise _fail(st, None, "footprint placement")
        return [(out.points[i][0], out.points[i][1]) for i in range(out.count)]


class Range:
    """The range: one keep-in area (None: none), keep-out areas, and speed
    zones as (outline, speed in m/s) pairs. Outlines are lists of (x, y)."""

    def __init__(self, keep_in=None, keep_out=(), zones=()):
        self.keep_in = _points(keep_in, "keep_in") if keep_in else None
        self.keep_out = [_points(o, "keep_out[%d]" % i) for i, o in enumerate(keep_out)]
        self.zones = [(_points(z[0], "speed_zone[%d]" % i), float(z[1])) for i, z in enumerate(zones)]
        if len(self.keep_out) > MAX_KEEP_OUT:
            raise PlanError("ERR_CAPACITY", "%d keep-out areas, at most %d" % (len(self.keep_out), MAX_KEEP_OUT))
        if len(self.zones) > MAX_SPEED_ZONES:
            raise PlanError("ERR_CAPACITY", "%d speed zones, at most %d" % (len(self.zones), MAX_SPEED_ZONES))

    @classmethod
    def from_json(cls, d):
        """From the proto3 JSON mapping of veer.v1.Range (camelCase or snake_case names)."""
        if not isinstance(d, dict):
            raise PlanError("ERR_VALUE", "range must be an object")
        ki = _get(d, "keepIn", "keep_in")
        keep_in = _outline_of_json(ki, "keep_in") if ki else None
        keep_out = [_outline_of_json(o, "keep_out[%d]" % i) for i, o in enumerate(_get(d, "keepOut", "keep_out", []))]
        zones = []
        for i, z in enumerate(d.get("zones", [])):
            if not isinstance(z, dict):
                raise PlanError("ERR_VALUE", "speed_zone[%d] must be an object with area and speed" % i)
            zones.append((_outline_of_json(z.get("area", {}), "speed_zone[%d]" % i), z.get("speed", 0.0)))
        return cls(keep_in, keep_out, zones)

    def to_json(self):
        d = {}
        if self.keep_in:
            d["keepIn"] = _outline_json(self.keep_in)
        if self.keep_out:
            d["keepOut"] = [_outline_json(o) for o in self.keep_out]
        if self.zones:
            d["zones"] = [{"area": _outline_json(a), "speed": v} for a, v in self.zones]
        return d

    def _struct(self):
        r = CRange()
        if self.keep_in:
            r.keep_in = _c_outline(self.keep_in)
        r.keep_out_count = len(self.keep_out)
        for i, o in enumerate(self.keep_out):
            r.keep_out[i] = _c_outline(o)
        r.zone_count = len(self.zones)
        for i, (a, v) in enumerate(self.zones):
            r.zones[i].area = _c_outline(a)
            r.zones[i].speed = v
        diag = _lib.out_struct(_lib.Diag)
        st = _fn("veer_range_check")(ctypes.byref(r), ctypes.byref(diag))
        if st != 0:
            raise _fail(st, diag, "range")
        return r


def load(source):
    """(Range, Footprint or None) from a range file (path), a JSON string or
    a dict: {"range": Range, "footprint": Footprint} or a bare Range."""
    d = source
    if isinstance(source, str) and not source.lstrip().startswith("{"):
        try:
            with open(source) as f:
                d = json.load(f)
        except OSError as exc:
            raise PlanError("ERR_VALUE", "cannot read %s: %s" % (source, exc.strerror or exc)) from None
        except ValueError as exc:
            raise PlanError("ERR_DECODE", "%s is not JSON: %s" % (source, exc)) from None
    elif isinstance(source, str):
        try:
            d = json.loads(source)
        except ValueError as exc:
            raise PlanError("ERR_DECODE", "the range is not JSON: %s" % exc) from None
    if not isinstance(d, dict):
        raise PlanError("ERR_VALUE", "a range file holds an object")
    if "range" in d or "footprint" in d:
        rng = Range.from_json(d.get("range", {}))
        fp = Footprint.from_json(d["footprint"]) if "footprint" in d else None
        return rng, fp
    return Range.from_json(d), None


# ---- geometry ----------------------------------------------------------------------

def _outline_arg(pts):
    o = _c_outline(_points(pts, "outline"))
    diag = _lib.out_struct(_lib.Diag)
    st = _fn("veer_outline_check")(ctypes.byref(o), ctypes.byref(diag))
    if st != 0:
        raise _fail(st, diag, "outline")
    return o


def contains(outline, x, y):
    """True when (x, y) is inside the outline or on its boundary."""
    o, v = _outline_arg(outline), ctypes.c_int()
    st = _fn("veer_outline_contains")(ctypes.byref(o), float(x), float(y), ctypes.byref(v))
    if st != 0:
        raise _fail(st, None, "contains")
    return bool(v.value)


def distance(a, b):
    """Distance between two areas, m (0 when they touch or overlap)."""
    oa, ob, v = _outline_arg(a), _outline_arg(b), ctypes.c_double()
    st = _fn("veer_outline_distance")(ctypes.byref(oa), ctypes.byref(ob), ctypes.byref(v))
    if st != 0:
        raise _fail(st, None, "distance")
    return v.value


def clearance(shape, area, keep_in):
    """Signed clearance of shape against area, m (range.h): keep_in True,
    shape must stay inside; False, outside."""
    oa, ob, v = _outline_arg(shape), _outline_arg(area), ctypes.c_double()
    st = _fn("veer_outline_clearance")(ctypes.byref(oa), ctypes.byref(ob), 1 if keep_in else 0, ctypes.byref(v))
    if st != 0:
        raise _fail(st, None, "clearance")
    return v.value


# ---- planning and checks --------------------------------------------------------------

def _area_name(a):
    kind = AREA_KINDS.get(int(a.kind), "none")
    return kind if kind in ("none", "keep_in") or a.index < 0 else "%s[%d]" % (kind, a.index)


def _event(e):
    return {"t": e.t, "s": e.s, "pose": [e.pose[0], e.pose[1], e.pose[2]], "area": _area_name(e.area),
            "margin": e.margin}


def plan_in_range(request, rng, footprint):
    """Plans a request (as veer.plan takes it) with the range's speed zones as
    body-speed limits (veer_plan_create_in_range). Returns a Plan."""
    lib = library()
    req = _pb.message("PlanRequest").FromString(_request_bytes(request))
    try:
        drive = _convert.drive_struct(lib, req.drive)
        n = _convert.module_count(lib, drive)
        limits = _convert.limits_struct(lib, req.limits, n)
        route = _convert.route_struct(lib, req.route)
        opts = _convert.options_struct(lib, req.options)
    except _convert.ConvertError as exc:
        raise PlanError(exc.status, exc.text) from None
    r, f = rng._struct(), footprint._struct()
    handle = ctypes.c_void_p()
    diag = _lib.out_struct(_lib.Diag)
    st = _fn("veer_plan_create_in_range")(ctypes.byref(drive), ctypes.byref(limits), ctypes.byref(route),
                                          ctypes.byref(opts), ctypes.byref(r), ctypes.byref(f), ctypes.byref(handle),
                                          ctypes.byref(diag))
    if st != 0 or not handle.value:
        raise _fail(st, diag, "veer_plan_create_in_range")
    p = Plan(None, _handle=handle, _request=req)
    # The Plan message too, so that the plan can be sent (to_bytes) like any other.
    size = ctypes.c_size_t(0)
    enc = _fn("veer_plan_encode_pb")
    enc(handle, None, 0, ctypes.byref(size), None)
    if size.value:
        buf = (ctypes.c_ubyte * size.value)()
        if enc(handle, buf, size.value, ctypes.byref(size), None) == 0:
            p._bytes = bytes(buf[:size.value])
            try:
                p._msg = _pb.message("Plan").FromString(p._bytes)
            except Exception:
                p._msg = None
    return p


class RangeCheck:
    """A plan checked against a range: report (the sweep, veer_plan_check_range)
    and braking (the braking envelope, veer_plan_check_braking) as dicts;
    draw_top(ax) adds the areas, zones, footprint sweep and worst margin to
    a matplotlib axes."""

    def __init__(self, plan, rng, footprint, report, braking):
        self.plan, self.range, self.footprint = plan, rng, footprint
        self.report, self.braking = report, braking

    @property
    def clear(self):
        return self.report["clear"] and (self.braking is None or self.braking["clear"])

    def to_json(self):
        return {"clear": self.clear, "report": self.report, "braking": self.braking}

    def lines(self):
        """A few lines of text for a summary."""
        r, b = self.report, self.braking
        w = r["worst"]
        out = ["range check: %s; worst margin %+.4f m (%s) at t = %.3f s, s = %.4f"
               % ("CLEAR" if self.clear else "VIOLATED", w["margin"], w["area"], w["t"], w["s"])]
        if r["violated"]:
            v, e = r["first_violation"], r["first_violation_end"]
            out.append("  first violation: %s at t = %.3f s, s = %.4f, %.4f m deep, until t = %.3f s"
                       % (v["area"], v["t"], v["s"], -v["margin"], e["t"]))
        if b is not None:
            out.append("  braking: longest controlled stop %.4f (s units) in %.3f s from sdot %.3f at t = %.3f s"
                       % (b["stop_distance"], b["stop_duration"], b["stop_speed"], b["stop_distance_t"]))
            if r["violated"]:
                out.append("  last instant a stop ends short of the first violation: %s"
                           % ("none" if b["last_safe_stop_t"] < 0 else "t = %.3f s" % b["last_safe_stop_t"]))
        return out

    def draw_top(self, ax, sweep_poses=160):
        """Draws onto a top-view axes: keep-in (green), keep-out areas (red),
        speed zones (blue, with their caps), the footprint swept along the
        plan (grey) and the worst-margin or first-violation pose. Areas do not
        change the axes' limits."""
        from matplotlib.patches import Polygon as MPolygon

        def patch(pts, **kw):
            ax.add_artist(MPolygon(pts, closed=True, **kw))

        rng = self.range
        if rng.keep_in:
            patch(rng.keep_in, fill=False, ec="#1a9850", lw=2.0, ls="-", zorder=1.5, label="keep-in")
        for i, o in enumerate(rng.keep_out):
            patch(o, fc="#d73027", ec="#a50026", alpha=0.30, hatch="//", lw=1.2, zorder=1.5,
                  label="keep-out" if i == 0 else None)
            cx, cy = sum(p[0] for p in o) / len(o), sum(p[1] for p in o) / len(o)
            ax.annotate("keep_out[%d]" % i, (cx, cy), fontsize=7, color="#a50026", ha="center", zorder=6,
                        annotation_clip=True)
        for i, (a, v) in enumerate(rng.zones):
            patch(a, fc="#4575b4", ec="#313695", alpha=0.18, lw=1.0, zorder=1.4,
                  label="speed zone" if i == 0 else None)
            cx, cy = sum(p[0] for p in a) / len(a), sum(p[1] for p in a) / len(a)
            ax.annotate("speed_zone[%d]\n<= %.2f m/s" % (i, v), (cx, cy), fontsize=7, color="#313695", ha="center",
                        zorder=6, annotation_clip=True)
        # the footprint swept along the path
        p, fp = self.plan, self.footprint
        length = p.length
        n = max(2, int(sweep_poses))
        q, _, _ = p.path_at([length * k / (n - 1) for k in range(n)])
        for k in range(n):
            patch(fp.world(q[k]), fc="#969696", ec="none", alpha=0.12, zorder=1.6,
                  label="footprint sweep" if k == 0 else None)
        # the worst pose, or the first violation
        r = self.report
        ev = r["first_violation"] if r["violated"] else r["worst"]
        col = "#d7191c" if r["violated"] else "#fdae61"
        patch(fp.world(ev["pose"]), fill=False, ec=col, lw=2.0, zorder=6,
              label="first violation" if r["violated"] else "worst margin")
        w = r["worst"]
        txt = ("%s %s at t = %.2f s, %.3f m deep" % ("first violation:", ev["area"], ev["t"], -ev["margin"])
               if r["violated"] else
               "worst margin %.3f m to %s at t = %.2f s" % (w["margin"], w["area"], w["t"]))
        if self.braking is not None:
            txt += "\nlongest controlled stop %.2f in %.2f s" % (self.braking["stop_distance"],
                                                                self.braking["stop_duration"])
        ax.annotate(txt, (ev["pose"][0], ev["pose"][1]), xytext=(12, 14), textcoords="offset points", fontsize=8,
                    color=col, zorder=7, bbox=dict(boxstyle="round", fc="white", ec=col, alpha=0.9),
                    arrowprops=dict(arrowstyle="->", color=col))


def check(plan, rng, footprint, braking=True):
    """The footprint swept along the plan against the range's keep-in and
    keep-out areas, and with braking the braking envelope. Returns a RangeCheck."""
    r, f = rng._struct(), footprint._struct()
    rep = CRangeReport()
    diag = _lib.out_struct(_lib.Diag)
    st = _fn("veer_plan_check_range")(plan._h(), ctypes.byref(r), ctypes.byref(f), ctypes.byref(rep),
                                      ctypes.byref(diag))
    if st != 0:
        raise _fail(st, diag, "veer_plan_check_range")
    report = {"clear": bool(rep.clear), "worst": _event(rep.worst), "violated": bool(rep.violated),
              "first_violation": _event(rep.first_violation) if rep.violated else None,
              "first_violation_end": _event(rep.first_violation_end) if rep.violated else None,
              "poses": int(rep.poses)}
    brk = None
    if braking:
        b = CBrakingReport()
        st = _fn("veer_plan_check_braking")(plan._h(), ctypes.byref(r), ctypes.byref(f), ctypes.byref(b),
                                            ctypes.byref(diag))
        if st != 0:
            raise _fail(st, diag, "veer_plan_check_braking")
        brk = {k: getattr(b, k) for k, _ in CBrakingReport._fields_ if k != "worst_area"}
        brk["clear"] = bool(b.clear)
        brk["worst_area"] = _area_name(b.worst_area)
    return RangeCheck(plan, rng, footprint, report, brk)


def separation(carts, required):
    """Separation of several carts: carts is a list of (plan, start_time s,
    Footprint); required in m. Returns a dict (veer_separation_report):
    min_separation, min_t, min_a, min_b, conflict, conflict_t, ..."""
    if not 2 <= len(carts) <= MAX_CARTS:
        raise PlanError("ERR_VALUE" if len(carts) < 2 else "ERR_CAPACITY",
                        "separation needs 2..%d carts, got %d" % (MAX_CARTS, len(carts)))
    arr = (CCart * len(carts))()
    for i, (p, t0, fp) in enumerate(carts):
        if not isinstance(t0, numbers.Real) or isinstance(t0, bool):
            raise PlanError("ERR_VALUE", "cart %d: start_time must be a number" % i)
        arr[i].plan = p._h().value
        arr[i].start_time = float(t0)
        arr[i].footprint = fp._struct()
    rep = CSeparationReport()
    diag = _lib.out_struct(_lib.Diag)
    req = float(required)
    if not math.isfinite(req):
        raise PlanError("ERR_VALUE", "required must be finite, got %r" % required)
    st = _fn("veer_carts_check_separation")(arr, len(carts), req, ctypes.byref(rep), ctypes.byref(diag))
    if st != 0:
        raise _fail(st, diag, "veer_carts_check_separation")
    out = {k: getattr(rep, k) for k, _ in CSeparationReport._fields_}
    out["conflict"] = bool(rep.conflict)
    return out


# ---- through the message interface (proto/veer/v1/range.proto) -----------------------

def messages():
    """The protoc classes of range.proto (module veer.v1.range_pb2), found
    where the package finds the rest of the schema (veer._pb)."""
    _pb.modules()  # puts the schema's folder on veer.v1's path
    try:
        return importlib.import_module("veer.v1.range_pb2")
    except ImportError as exc:
        raise PlanError("ERR_STATE", "the Python classes of proto/veer/v1/range.proto are missing (%s); build the "
                        "CMake target veer_python_proto" % exc) from None


def check_bytes(plan_bytes, rng, footprint, braking=True):
    """The same check as check(), through the bytes API: a RangeCheckRequest
    (Plan bytes, range, footprint) to veer_range_check_pb; returns the
    RangeCheckReply message. Raises PlanError when the reply is an error."""
    from google.protobuf import json_format

    m = messages()
    req = m.RangeCheckRequest(plan=bytes(plan_bytes), braking=bool(braking))
    json_format.ParseDict(rng.to_json(), req.range)
    json_format.ParseDict(footprint.to_json(), req.footprint)
    data = req.SerializeToString()
    fn = _fn("veer_range_check_pb")
    size = ctypes.c_size_t(0)
    cap = 2048  # VEER_RANGE_REPLY_CAPACITY, include/veer/range_wire.h
    buf = ctypes.create_string_buffer(cap)
    st = fn(data, len(data), buf, cap, ctypes.byref(size))
    if st == 8:  # VEER_ERR_BUFFER: larger than promised; once more with the size asked for
        buf = ctypes.create_string_buffer(size.value)
        st = fn(data, len(data), buf, size.value, ctypes.byref(size))
    rep = m.RangeCheckReply.FromString(buf.raw[:size.value])
    if st != 0:
        d = rep.diagnostic
        raise PlanError(library().status_name(st), d.message or "veer_range_check_pb failed")
    return rep

