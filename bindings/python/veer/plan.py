"""veer.plan(), veer.Plan and veer.PlanError.

A Plan is the encoded Plan message (what a cart receives) together with that
message decoded by libveer (veer_plan_decode_pb): sampling, the setpoint
table, the path geometry and the leg summaries all come from the decoded
bytes, so Python sees exactly what a cart executing those bytes sees. The
planner's own grid (Plan.profile, Plan.binding) comes from the PlanReply.
"""

import collections
import ctypes
import json
import math
import numbers
import os
import warnings

import numpy as np

from . import _convert, _lib, _pb

PHASE_NAMES = {1: "resteer", 2: "moving", 3: "dwell", 4: "done"}
STATUS_CODES = {"OK": 0, "ERR_NULL": 1, "ERR_VALUE": 2, "ERR_CAPACITY": 3, "ERR_GEOMETRY": 4, "ERR_INFEASIBLE": 5,
                "ERR_UNBOUNDED": 6, "ERR_NO_MEMORY": 7, "ERR_BUFFER": 8, "ERR_DECODE": 9, "ERR_VERSION": 10,
                "ERR_STATE": 11, "ERR_LATE": 12}
_ERR_BUFFER = 8

LegTiming = collections.namedtuple("LegTiming", "start duration resteer_time dwell_time s_begin s_end")
LegTiming.__doc__ = """One leg's times (s) and the path positions it covers (veer_leg_summary)."""


class PlanError(Exception):
    """A request or plan that veer refused, with its diagnostic.

    status: the status name without prefix ("ERR_INFEASIBLE", "ERR_VALUE", ...);
    code: the veer_status number; message: what went wrong; leg, waypoint,
    grid_index: where (-1 when not applicable); s: path position or -1;
    limit: the limit involved ("wheel_speed[2]", "body_accel") or None;
    value: the figure the message is about (ERR_LATE: seconds late), else 0."""

    def __init__(self, status, message, leg=-1, waypoint=-1, grid_index=-1, s=-1.0, limit=None, value=0.0):
        self.status = status
        self.code = STATUS_CODES.get(status, -1)
        self.message = message
        self.leg = leg
        self.waypoint = waypoint
        self.grid_index = grid_index
        self.s = s
        self.limit = limit or None
        self.value = value
        super().__init__(str(self))

    def __str__(self):
        where = []
        if self.leg >= 0:
            where.append("leg %d" % self.leg)
        if self.waypoint >= 0:
            where.append("waypoint %d" % self.waypoint)
        if self.grid_index >= 0:
            where.append("grid point %d" % self.grid_index)
        if self.s >= 0:
            where.append("s = %.4g" % self.s)
        if self.limit:
            where.append("limit %s" % self.limit)
        text = "%s: %s" % (self.status, self.message)
        return text + (" (%s)" % ", ".join(where) if where else "")

    def to_dict(self):
        return {"status": self.status, "message": self.message, "leg": self.leg, "waypoint": self.waypoint,
                "grid_index": self.grid_index, "s": self.s, "limit": self.limit, "value": self.value}

    @classmethod
    def _from_diag(cls, lib, code, diag):
        limit = None
        if diag.limit.kind:
            limit = lib.limit_name(diag.limit.kind, diag.limit.module)
        msg = diag.message.decode("utf-8", "replace") or lib.status_text(code)
        return cls(lib.status_name(code), msg, diag.leg, diag.waypoint, diag.grid_index, diag.s, limit, diag.value)

    @classmethod
    def _from_pb(cls, lib, d, fallback_code):
        name = _pb.modules()["plan"].Status.Name(d.status) if d.status else ""
        status = name[len("STATUS_"):] if name.startswith("STATUS_") else lib.status_name(fallback_code)
        return cls(status, d.message or lib.status_text(STATUS_CODES.get(status, fallback_code)), d.leg, d.waypoint,
                   d.grid_index, d.s, d.limit_name or None, getattr(d, "value", 0.0))


class Sample:
    """The plan's state at one time: body pose, twist and acceleration, and
    each module's setpoint (arrays indexed by module)."""

    __slots__ = ("t", "phase", "leg", "s", "sdot", "sddot", "pose", "twist_world", "twist_body", "accel_world",
                 "accel_body", "steer", "steer_rate", "wheel_rate", "wheel_accel")

    def __init__(self, c):
        n = c.module_count
        self.t = c.t
        self.phase = PHASE_NAMES.get(c.phase, str(c.phase))
        self.leg = c.leg
        self.s, self.sdot, self.sddot = c.s, c.sdot, c.sddot
        self.pose = np.array(c.pose[:])
        self.twist_world = np.array(c.twist_world[:])
        self.twist_body = np.array(c.twist_body[:])
        self.accel_world = np.array(c.accel_world[:])
        self.accel_body = np.array(c.accel_body[:])
        self.steer = np.array([c.modules[i].steer for i in range(n)])
        self.steer_rate = np.array([c.modules[i].steer_rate for i in range(n)])
        self.wheel_rate = np.array([c.modules[i].wheel_rate for i in range(n)])
        self.wheel_accel = np.array([c.modules[i].wheel_accel for i in range(n)])

    def __repr__(self):
        return "Sample(t=%.4f, phase=%s, leg=%d, pose=%s)" % (self.t, self.phase, self.leg, np.round(self.pose, 4))


class Table:
    """A fixed-rate table of samples as numpy arrays: t, phase (veer_phase
    numbers, see PHASE_NAMES), leg, s, sdot, sddot of shape (n,); pose,
    twist_world, twist_body, accel_world, accel_body of shape (n, 3); steer,
    steer_rate, wheel_rate, wheel_accel of shape (n, modules)."""

    FIELDS = ("t", "phase", "leg", "s", "sdot", "sddot", "pose", "twist_world", "twist_body", "accel_world",
              "accel_body", "steer", "steer_rate", "wheel_rate", "wheel_accel")

    def __init__(self, rows, n_modules, rate_hz):
        self.rate_hz = rate_hz
        self.module_count = n_modules
        cnt = len(rows)
        dbl = ctypes.sizeof(ctypes.c_double)
        # Read the ctypes array through numpy structured views (no per-row Python loop).
        raw = np.frombuffer(rows, dtype=np.uint8).reshape(cnt, ctypes.sizeof(_lib.Sample))

        def col(name, count=1, dtype=np.float64):
            off = getattr(_lib.Sample, name).offset
            width = np.dtype(dtype).itemsize
            a = raw[:, off:off + count * width].copy().view(dtype)
            return a.reshape(cnt) if count == 1 else a.reshape(cnt, count)

        self.t = col("t")
        self.phase = col("phase", dtype=np.intc).astype(int)
        self.leg = col("leg", dtype=np.intc).astype(int)
        self.s, self.sdot, self.sddot = col("s"), col("sdot"), col("sddot")
        for f in ("pose", "twist_world", "twist_body", "accel_world", "accel_body"):
            setattr(self, f, col(f, 3))
        off = _lib.Sample.modules.offset
        msz = ctypes.sizeof(_lib.ModuleSetpoint)
        for j, f in enumerate(("steer", "steer_rate", "wheel_rate", "wheel_accel")):
            cols = [raw[:, off + i * msz + j * dbl: off + i * msz + (j + 1) * dbl].copy().view(np.float64).reshape(cnt)
                    for i in range(n_modules)]
            setattr(self, f, np.stack(cols, axis=1) if cols else np.zeros((cnt, 0)))

    def __len__(self):
        return len(self.t)


# ---- request handling ---------------------------------------------------

def _request_bytes(request):
    """PlanRequest bytes from a message, a dict (proto3 JSON mapping), a JSON
    file path, or bytes of an encoded PlanRequest."""
    from google.protobuf import json_format, message as pb_message

    PlanRequest = _pb.message("PlanRequest")
    if isinstance(request, (bytes, bytearray, memoryview)):
        return bytes(request)
    if isinstance(request, pb_message.Message):
        if request.DESCRIPTOR.full_name != "veer.v1.PlanRequest":
            raise PlanError("ERR_VALUE", "request must be a veer.v1.PlanRequest, got a %s message"
                            % request.DESCRIPTOR.full_name)
        try:
            return request.SerializeToString()
        except pb_message.EncodeError as exc:  # pragma: no cover - proto3 has no required fields
            raise PlanError("ERR_VALUE", "request does not encode: %s" % exc) from None
    if isinstance(request, (str, os.PathLike)):
        path = os.fspath(request)
        try:
            with open(path, "rb") as f:
                text = f.read()
        except OSError as exc:
            raise PlanError("ERR_VALUE", "cannot read scenario file %s: %s" % (path, exc.strerror or exc)) from None
        try:
            request = json.loads(text.decode("utf-8"))
        except (UnicodeDecodeError, ValueError) as exc:
            raise PlanError("ERR_DECODE", "%s is not JSON: %s" % (path, exc)) from None
        if not isinstance(request, dict):
            raise PlanError("ERR_DECODE", "%s holds a JSON %s, not an object (a PlanRequest in the proto3 JSON "
                            "mapping)" % (path, type(request).__name__))
    if isinstance(request, dict):
        msg = PlanRequest()
        try:
            json_format.ParseDict(_json_floats(request), msg)
        except (json_format.ParseError, TypeError, ValueError, AttributeError, RecursionError) as exc:
            raise PlanError("ERR_VALUE", "request is not a PlanRequest in the proto3 JSON mapping: %s" % exc) from None
        return msg.SerializeToString()
    raise PlanError("ERR_VALUE", "request must be a veer.v1.PlanRequest, a dict in the proto3 JSON mapping or a path "
                    "to a JSON file, got %s" % type(request).__name__)


def _json_floats(v, depth=0):
    """Python's float NaN and infinities spelled as the proto3 JSON mapping
    spells them ("NaN", "Infinity", "-Infinity"), so that they reach libveer,
    which names the field they are in."""
    if depth > 64:
        raise ValueError("request nested too deeply")
    if isinstance(v, float) and not math.isfinite(v):
        return "NaN" if math.isnan(v) else ("Infinity" if v > 0 else "-Infinity")
    if isinstance(v, dict):
        return {k: _json_floats(x, depth + 1) for k, x in v.items()}
    if isinstance(v, list):
        return [_json_floats(x, depth + 1) for x in v]
    return v


def _field_bytes(buf, number):
    """Raw bytes of the last length-delimited field `number` at the top level
    of an encoded message (protobuf wire format), or None."""
    i, n, found = 0, len(buf), None

    def varint(i):
        v, shift = 0, 0
        while True:
            if i >= n or shift > 63:
                raise ValueError("truncated varint")
            b = buf[i]
            i += 1
            v |= (b & 0x7F) << shift
            if not b & 0x80:
                return v, i
            shift += 7

    while i < n:
        tag, i = varint(i)
        wt, fn = tag & 7, tag >> 3
        if wt == 0:
            _, i = varint(i)
        elif wt == 1:
            i += 8
        elif wt == 5:
            i += 4
        elif wt == 2:
            ln, i = varint(i)
            if fn == number:
                found = buf[i:i + ln]
            i += ln
        else:
            raise ValueError("unexpected wire type %d" % wt)
    if i != n:
        raise ValueError("truncated message")
    return found


def _call_with_buffer(fn, first_capacity, *args):
    """Calls a bytes-out function with the buffer rules of wire.h: retried once
    with the size it asks for. Returns (status, bytes or None)."""
    cap = max(int(first_capacity), 64)
    for _ in range(2):
        buf = ctypes.create_string_buffer(cap)
        size = ctypes.c_size_t(0)
        st = fn(*args, buf, cap, ctypes.byref(size))
        if st == _ERR_BUFFER and size.value > cap:
            cap = size.value
            continue
        if size.value == 0 or size.value > cap:
            return st, None
        return st, buf.raw[:size.value]
    return st, None


def _plan_reply(lib, data):
    """Runs veer_plan_request_pb; returns the decoded PlanReply and its raw bytes."""
    PlanReply = _pb.message("PlanReply")
    PlanRequest = _pb.message("PlanRequest")
    grid = 1000
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # garbage bytes: the C side names the error
            req = PlanRequest.FromString(data)
        if req.options.HasField("grid_points"):
            grid = max(16, min(int(req.options.grid_points), 200000))
    except Exception:  # garbage bytes: the C side names the error
        pass
    st, raw = _call_with_buffer(lib.veer_plan_request_pb, lib.veer_plan_reply_size_bound(grid), data, len(data))
    if raw is None:
        raise PlanError(lib.status_name(st), "veer_plan_request_pb wrote no reply: %s" % lib.status_text(st))
    reply = PlanReply.FromString(raw)
    if reply.status != PlanReply.DESCRIPTOR.fields_by_name["status"].enum_type.values_by_name["STATUS_OK"].number:
        raise PlanError._from_pb(lib, reply.diagnostic, st)
    if reply.schema_version != _pb.SCHEMA_VERSION:
        raise PlanError("ERR_VERSION", "reply made by schema version %d; this package reads %d"
                        % (reply.schema_version, _pb.SCHEMA_VERSION))
    return reply, raw


def _check_schema(lib):
    if not lib.has("veer_wire_schema_version"):
        return
    have = int(lib.veer_wire_schema_version())
    if have != _pb.SCHEMA_VERSION:
        raise _lib.LibraryNotFound("%s speaks message schema version %d; this package speaks %d"
                                   % (lib.path, have, _pb.SCHEMA_VERSION))


def library():
    """The loaded libveer, its version and schema checked."""
    lib = _lib.load()
    _check_schema(lib)
    return lib


def plan(request):
    """Plans a request: a veer.v1.PlanRequest, a dict in its proto3 JSON
    mapping, or the path of a JSON file holding one. Returns a Plan; raises
    PlanError with the diagnostic when veer refuses the request."""
    lib = library()
    data = _request_bytes(request)
    if lib.has("veer_plan_request_pb"):
        reply, raw = _plan_reply(lib, data)
        return Plan(_field_bytes(raw, 5) or b"", _reply=reply)
    return Plan._plain(lib, data)


class Plan:
    """A planned trajectory: path + time-optimal profile (+ re-steer phases and
    dwells), as the cart will execute it."""

    def __init__(self, data, _reply=None, _handle=None, _request=None):
        self._lib = library()
        self._reply = _reply
        self._handle = None
        self._msg = None
        self._request = _request
        if _handle is not None:  # plain C API fallback (no bytes API in the library)
            self._handle = _handle
            self._bytes = None
            return
        if not isinstance(data, (bytes, bytearray, memoryview)):
            raise PlanError("ERR_VALUE", "plan bytes must be bytes, got %s" % type(data).__name__)
        self._bytes = bytes(data)
        handle = ctypes.c_void_p()
        diag = _lib.out_struct(_lib.Diag)
        st = self._lib.veer_plan_decode_pb(self._bytes, len(self._bytes), ctypes.byref(handle), ctypes.byref(diag))
        if st != 0 or not handle.value:
            raise PlanError._from_diag(self._lib, st, diag)
        self._handle = handle
        try:
            self._msg = _pb.message("Plan").FromString(self._bytes)
        except Exception as exc:  # the C decoder accepted it, so this would be a schema mismatch
            self.close()
            raise PlanError("ERR_DECODE", "libveer accepted the plan but Python's classes cannot read it: %s" % exc)

    @classmethod
    def from_bytes(cls, data):
        """A plan from Plan message bytes (as Plan.to_bytes wrote them); the
        bytes are checked (schema version, content hash, every value) by
        libveer. Raises PlanError when they do not decode."""
        return cls(data)

    @classmethod
    def _plain(cls, lib, data):
        """Fallback while the library has no bytes API: the plain C planner."""
        req = _pb.message("PlanRequest").FromString(data)
        try:
            drive = _convert.drive_struct(lib, req.drive)
            n = _convert.module_count(lib, drive)
            limits = _convert.limits_struct(lib, req.limits, n)
            route = _convert.route_struct(lib, req.route)
            opts = _convert.options_struct(lib, req.options)
        except _convert.ConvertError as exc:
            raise PlanError(exc.status, exc.text) from None
        handle = ctypes.c_void_p()
        diag = _lib.out_struct(_lib.Diag)
        st = lib.veer_plan_create(ctypes.byref(drive), ctypes.byref(limits), ctypes.byref(route), ctypes.byref(opts),
                                  ctypes.byref(handle), ctypes.byref(diag))
        if st != 0 or not handle.value:
            raise PlanError._from_diag(lib, st, diag)
        return cls(None, _handle=handle, _request=req)

    def close(self):
        """Frees the decoded plan now (it is also freed when the object goes)."""
        h, self._handle = self._handle, None
        if h is not None and h.value:
            self._lib.veer_plan_destroy(h)

    def __del__(self):
        try:
            self.close()
        except Exception:
            pass

    def _h(self):
        if self._handle is None:
            raise PlanError("ERR_STATE", "the plan was closed")
        return self._handle

    # ---- whole-plan figures ----
    @property
    def duration(self):
        """s, including re-steer phases and dwells."""
        return float(self._lib.veer_plan_duration(self._h()))

    @property
    def length(self):
        """Path length in s units (m on travel legs, rad on spin and pivot legs)."""
        return float(self._lib.veer_plan_length(self._h()))

    @property
    def module_count(self):
        return int(self._lib.veer_plan_module_count(self._h()))

    @property
    def legs(self):
        """Per-leg times: a list of LegTiming (start, duration, resteer_time,
        dwell_time, s_begin, s_end)."""
        out = []
        h = self._h()
        for i in range(int(self._lib.veer_plan_leg_count(h))):
            ls = _lib.out_struct(_lib.LegSummary)
            st = self._lib.veer_plan_leg(h, i, ctypes.byref(ls))
            if st != 0:
                raise PlanError(self._lib.status_name(st), "veer_plan_leg(%d) failed" % i)
            out.append(LegTiming(ls.start, ls.duration, ls.resteer_time, ls.dwell_time, ls.s_begin, ls.s_end))
        return out

    @property
    def request(self):
        """The PlanRequest this plan answers (drive, limits, route, options as sent)."""
        if self._request is None:
            PlanRequest = _pb.message("PlanRequest")
            m = self._msg
            self._request = PlanRequest(schema_version=m.schema_version, drive=m.drive, limits=m.limits, route=m.route,
                                        options=m.options, cart_id=m.cart_id)
        return self._request

    @property
    def message(self):
        """The Plan message (None for a plan made without the bytes API)."""
        return self._msg

    @property
    def reply(self):
        """The PlanReply that brought this plan, if it came from veer.plan()."""
        return self._reply

    @property
    def cart_id(self):
        return self.request.cart_id

    def drive(self):
        """The drive as planned, with the defaults filled in (a dict with the
        field names of include/veer/drive.h)."""
        return _convert.drive_dict(_convert.drive_struct(self._lib, self.request.drive))

    def limits(self):
        """The limits as planned (a dict; unset limits are math.inf)."""
        d = _convert.drive_struct(self._lib, self.request.drive)
        n = _convert.module_count(self._lib, d)
        return _convert.limits_dict(_convert.limits_struct(self._lib, self.request.limits, n), n)

    def to_bytes(self):
        """The encoded Plan message: what a cart receives."""
        if self._bytes is None:
            raise PlanError("ERR_STATE", "%s has no bytes API (veer_plan_request_pb); this plan cannot be encoded"
                            % self._lib.path)
        return self._bytes

    # ---- sampling ----
    @staticmethod
    def _real(v, what):
        if isinstance(v, bool) or not isinstance(v, numbers.Real):
            raise PlanError("ERR_VALUE", "%s must be a real number, got %s" % (what, type(v).__name__))
        v = float(v)
        if not math.isfinite(v):
            raise PlanError("ERR_VALUE", "%s must be finite, got %r" % (what, v))
        return v

    def sample(self, t):
        """The state at time t (s, clamped to [0, duration])."""
        t = self._real(t, "t")
        out = _lib.out_struct(_lib.Sample)
        st = self._lib.veer_plan_sample(self._h(), t, ctypes.byref(out))
        if st != 0:
            raise PlanError(self._lib.status_name(st), "veer_plan_sample(t = %r) failed: %s"
                            % (t, self._lib.status_text(st)))
        return Sample(out)

    def table(self, rate_hz):
        """Samples at t = 0, 1/rate_hz, ... and a last row at the duration (a Table)."""
        rate = self._real(rate_hz, "rate_hz")
        if rate <= 0:
            raise PlanError("ERR_VALUE", "rate_hz must be > 0, got %r" % rate)
        count = ctypes.c_size_t(0)
        h = self._h()
        st = self._lib.veer_plan_table(h, rate, None, 0, ctypes.byref(count))
        if st not in (0, _ERR_BUFFER) or count.value == 0:
            raise PlanError(self._lib.status_name(st), "veer_plan_table(rate_hz = %r) failed: %s"
                            % (rate, self._lib.status_text(st)))
        if count.value > 50_000_000 // ctypes.sizeof(_lib.Sample):
            raise PlanError("ERR_CAPACITY", "a %g Hz table of this %.1f s plan has %d rows; choose a lower rate"
                            % (rate, self.duration, count.value))
        rows = (_lib.Sample * count.value)()
        st = self._lib.veer_plan_table(h, rate, rows, count.value, ctypes.byref(count))
        if st != 0:
            raise PlanError(self._lib.status_name(st), "veer_plan_table failed: %s" % self._lib.status_text(st))
        return Table(rows, self.module_count, rate)

    def setpoint_table_bytes(self, rate_hz):
        """The SetpointTable message libveer writes for carts that cannot
        evaluate plans (veer_plan_table_pb)."""
        rate = self._real(rate_hz, "rate_hz")
        data = self.to_bytes()
        n = int(self.duration * rate) + 2 if rate > 0 else 1
        st, raw = _call_with_buffer(self._lib.veer_plan_table_pb, 4096 + n * (8 * 7 + 4 + 32 * self.module_count),
                                    data, len(data), rate)
        if st != 0 or raw is None:
            raise PlanError(self._lib.status_name(st), "veer_plan_table_pb(rate_hz = %r) failed: %s"
                            % (rate, self._lib.status_text(st)))
        return raw

    # ---- geometry and profile ----
    def path_at(self, s):
        """Path geometry at path position s: (q, q', q'') with q = (x, y, yaw).
        For an array of positions each is an array of shape (n, 3)."""
        h = self._h()
        arr = None
        if isinstance(s, numbers.Real):
            vals = [self._real(s, "s")]
        else:
            try:
                arr = np.asarray(s, dtype=float)
            except (TypeError, ValueError):
                raise PlanError("ERR_VALUE", "s must be a number or a 1-D array of numbers, got %s"
                                % type(s).__name__) from None
            if arr.ndim != 1 or not np.all(np.isfinite(arr)):
                raise PlanError("ERR_VALUE", "s must be a finite number or a 1-D array of finite numbers")
            vals = arr.tolist()
        length = self.length
        for v in vals:
            if not -1e-9 * max(1.0, length) <= v <= length * (1 + 1e-12) + 1e-9:
                raise PlanError("ERR_VALUE", "s = %r is outside the path [0, %.9g]" % (v, length))
        q = np.empty((len(vals), 3))
        dq = np.empty((len(vals), 3))
        ddq = np.empty((len(vals), 3))
        a, b, c = (ctypes.c_double * 3)(), (ctypes.c_double * 3)(), (ctypes.c_double * 3)()
        for i, v in enumerate(vals):
            st = self._lib.veer_plan_path_at(h, v, a, b, c)
            if st != 0:
                raise PlanError(self._lib.status_name(st), "veer_plan_path_at(s = %r) failed: %s (path length %g)"
                                % (v, self._lib.status_text(st), self.length))
            q[i], dq[i], ddq[i] = a[:], b[:], c[:]
        if arr is None:
            return q[0], dq[0], ddq[0]
        return q, dq, ddq

    def _grid_source(self):
        """Where the planner's grid comes from: the reply, or the C plan itself."""
        if self._reply is None and self._bytes is not None:
            # A plan from bytes: plan its request again with this library; if
            # that gives these very bytes (same content hash), its grid is this
            # plan's grid. Otherwise only the decoded plan's knots are known.
            try:
                reply, raw = _plan_reply(self._lib, self.request.SerializeToString())
                if reply.plan.content_hash == self._msg.content_hash:
                    self._reply = reply
            except PlanError:
                pass
        return self._reply

    def profile(self):
        """The planner's grid: (s, sdot) arrays. For a plan from bytes that this
        library cannot reproduce, the decoded plan's profile knots."""
        rep = self._grid_source()
        if rep is not None and len(rep.grid_s):
            return np.array(rep.grid_s), np.array(rep.grid_sdot)
        s, sd, _ = self._c_grid()
        return s, sd

    def binding(self):
        """The binding limit's name at each grid point of profile() ("none"
        where none binds, e.g. at rests)."""
        rep = self._grid_source()
        if rep is not None and len(rep.grid_s):
            return [self._lib.limit_name(k, m) if k else "none" for k, m in zip(rep.binding_kind, rep.binding_module)]
        return self._c_grid()[2]

    def _c_grid(self):
        h = self._h()
        n = int(self._lib.veer_plan_grid_count(h))
        s, sd, names = np.empty(n), np.empty(n), []
        a, b, lid = ctypes.c_double(), ctypes.c_double(), _lib.LimitId()
        for k in range(n):
            st = self._lib.veer_plan_grid(h, k, ctypes.byref(a), ctypes.byref(b), ctypes.byref(lid))
            if st != 0:
                raise PlanError(self._lib.status_name(st), "veer_plan_grid(%d) failed" % k)
            s[k], sd[k] = a.value, b.value
            names.append(self._lib.limit_name(lid.kind, lid.module) if lid.kind else "none")
        return s, sd, names

    def __repr__(self):
        return "<veer.Plan %s: %.3f s, %.3f path units, %d legs>" % (self.cart_id or "(no cart id)", self.duration,
                                                                    self.length, len(self.legs))
