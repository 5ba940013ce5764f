"""veer.link: the ground station's end of the radio link to a cart.

    import veer, veer.link
    link = veer.link.Link(cart=4, key=veer.link.read_key("cart4.key"))
    plan = veer.plan("examples/scenarios/kestrel_flats_lane4_demo.json")
    session = veer.link.Session(link, send=sock_send, recv=sock_recv)
    plan_id = session.deliver(plan.to_bytes())      # sealed, chunked, gaps resent until armed
    session.start(plan_id)
    report = session.watch(lambda r: r.state == veer.link.STOPPED)

The frames are made and checked by libveer (include/veer/link.h): the plan
tag (HMAC-SHA-256 under the cart's pre-shared key), CRC-32, chunking and
the frame tags of commands and reports. The cart's gap reports and player
reports are read with protoc's classes of proto/veer/v1/link.proto after
libveer has checked their checksum and tag.

Keys: 32 bytes per cart, pre-shared, kept out of plans, frames and logs;
nothing here prints them. Counters: every plan and every command needs a
number above the last the cart accepted; Session takes them from the clock
(microseconds since 1970), so a restarted ground station stays above them.

CAUTION: the link is not a safety function. A hardware emergency stop, the
range's safety rules and its safety officer always come first.
"""

import collections
import ctypes
import importlib
import struct
import time
import zlib

from . import _lib, _pb

KEY_BYTES = 32
FRAME_DEFAULT = 255
HEARTBEAT, START, STOP = 1, 2, 3  # veer_link_command

# veer_player_state
IDLE, ARMED, RUNNING, STOPPING, STOPPED, FAULT = 1, 2, 3, 4, 5, 6
# veer_link_reason values this module acts on (the full table: reason_name())
TRUNCATED, CRC, MALFORMED, WRONG_DIRECTION, STALE, REPLAY, PLAN_TAG = 2, 3, 4, 6, 9, 10, 12


class LinkDef(ctypes.Structure):
    """Mirrors veer_link_def (include/veer/link.h); tests/test_link.c pins its layout."""
    _fields_ = [("cart", ctypes.c_uint32), ("key", ctypes.c_uint8 * KEY_BYTES), ("frame_size", ctypes.c_int),
                ("max_plan_bytes", ctypes.c_uint32)]


_MESSAGE_BYTES = 8192  # room for veer_link_message (about 700 bytes) and any growth
_size_p = ctypes.POINTER(ctypes.c_size_t)
_PROTOTYPES = {
    "veer_link_crc32": (ctypes.c_uint32, [ctypes.c_uint32, ctypes.c_char_p, ctypes.c_size_t]),
    "veer_link_hmac_sha256": (ctypes.c_int, [ctypes.c_char_p, ctypes.c_size_t, ctypes.c_char_p, ctypes.c_size_t,
                                             ctypes.c_void_p]),
    "veer_link_reason_name": (ctypes.c_char_p, [ctypes.c_int]),
    "veer_link_reason_str": (ctypes.c_char_p, [ctypes.c_int]),
    "veer_player_state_name": (ctypes.c_char_p, [ctypes.c_int]),
    "veer_stop_reason_name": (ctypes.c_char_p, [ctypes.c_int]),
    "veer_stop_reason_str": (ctypes.c_char_p, [ctypes.c_int]),
    "veer_link_def_check": (ctypes.c_int, [ctypes.POINTER(LinkDef), ctypes.c_void_p]),
    "veer_link_sender_create": (ctypes.c_int, [ctypes.POINTER(LinkDef), ctypes.c_uint64, ctypes.c_char_p,
                                               ctypes.c_size_t, ctypes.POINTER(ctypes.c_void_p), ctypes.c_void_p]),
    "veer_link_sender_destroy": (None, [ctypes.c_void_p]),
    "veer_link_sender_chunk_count": (ctypes.c_int, [ctypes.c_void_p]),
    "veer_link_sender_tag": (ctypes.c_int, [ctypes.c_void_p, ctypes.c_void_p]),
    "veer_link_sender_frame": (ctypes.c_int, [ctypes.c_void_p, ctypes.c_int, ctypes.c_void_p, ctypes.c_size_t,
                                              _size_p]),
    "veer_link_command_frame": (ctypes.c_int, [ctypes.POINTER(LinkDef), ctypes.c_uint64, ctypes.c_int,
                                               ctypes.c_uint64, ctypes.c_void_p, ctypes.c_size_t, _size_p]),
    "veer_link_parse": (ctypes.c_int, [ctypes.POINTER(LinkDef), ctypes.c_char_p, ctypes.c_size_t, ctypes.c_void_p,
                                       ctypes.POINTER(ctypes.c_int)]),
}

_dll = None


def _c():
    """libveer with the link's entry points declared."""
    global _dll
    if _dll is None:
        lib = _lib.load()
        dll = lib.dll
        missing = [n for n in _PROTOTYPES if not hasattr(dll, n)]
        if missing:
            raise _lib.LibraryNotFound("%s has no radio link (missing %s)" % (lib.path, ", ".join(missing)))
        for name, (restype, argtypes) in _PROTOTYPES.items():
            fn = getattr(dll, name)
            fn.restype, fn.argtypes = restype, argtypes
        _dll = dll
    return _dll


def _text(p):
    return p.decode("ascii", "replace") if p else "UNKNOWN"


def reason_name(reason):
    """The veer_link_reason's name ("PLAN_TAG", "REPLAY", ...)."""
    return _text(_c().veer_link_reason_name(int(reason)))


def reason_text(reason):
    return _text(_c().veer_link_reason_str(int(reason)))


def state_name(state):
    """The veer_player_state's name ("RUNNING", ...)."""
    return _text(_c().veer_player_state_name(int(state)))


def stop_reason_name(reason):
    return _text(_c().veer_stop_reason_name(int(reason)))


class LinkError(Exception):
    """A frame or plan that was refused, with the veer_link_reason."""

    def __init__(self, reason, message=None):
        self.reason = int(reason)
        self.name = reason_name(reason)
        super().__init__(message or "%s: %s" % (self.name, reason_text(reason)))


def crc32(data, crc=0):
    """CRC-32 (IEEE 802.3) as libveer computes it."""
    data = bytes(data)
    return int(_c().veer_link_crc32(crc, data, len(data)))


def hmac_sha256(key, data):
    """HMAC-SHA-256 as libveer computes it (its own RFC 2104 code)."""
    key, data = bytes(key), bytes(data)
    out = ctypes.create_string_buffer(32)
    st = _c().veer_link_hmac_sha256(key, len(key), data, len(data), out)
    if st != 0:
        raise RuntimeError("veer_link_hmac_sha256 failed (%d)" % st)
    return out.raw


def read_key(path):
    """A cart key from a file of 64 hex digits."""
    with open(path) as f:
        text = "".join(f.read().split())
    try:
        key = bytes.fromhex(text)
    except ValueError:
        raise ValueError("%s: a key file holds 64 hex digits" % path) from None
    if len(key) != KEY_BYTES:
        raise ValueError("%s: a key file holds 64 hex digits (%d bytes found)" % (path, len(key)))
    return key


def clock_counter():
    """A counter from the clock: microseconds since 1970 (above any earlier one)."""
    return time.time_ns() // 1000


# ---- protoc classes of link.proto ------------------------------------------

_link_pb2 = None


def link_pb2():
    """The protoc module of proto/veer/v1/link.proto (LinkFrame, GapReport,
    PlayerReport, CartConfig), found or generated with the schema's other
    classes (veer._pb)."""
    global _link_pb2
    if _link_pb2 is None:
        mods = _pb.modules()
        _link_pb2 = mods["link"] if "link" in mods else importlib.import_module("veer.v1.link_pb2")
    return _link_pb2


def frame_body(frame):
    """The LinkFrame encoding inside a frame: length prefix and CRC-32
    checked here with zlib (independently of libveer). Raises LinkError."""
    frame = bytes(frame)
    n, shift, i = 0, 0, 0
    while True:
        if i >= len(frame) or shift > 7:
            raise LinkError(TRUNCATED)
        b = frame[i]
        i += 1
        n |= (b & 0x7F) << shift
        shift += 7
        if not b & 0x80:
            break
    if len(frame) < i + n + 4:
        raise LinkError(TRUNCATED)
    if len(frame) > i + n + 4:
        raise LinkError(MALFORMED)
    (crc,) = struct.unpack("<I", frame[i + n:])
    if zlib.crc32(frame[:i + n]) != crc:
        raise LinkError(CRC)
    return frame[i:i + n]


def cart_config(request, cart, frame_size=FRAME_DEFAULT, link_timeout=None, max_plan_bytes=0, max_knots=0,
                max_waypoints=0, max_legs=0):
    """CartConfig bytes (link.proto) for a cart that drives what `request`
    (a veer.v1.PlanRequest, or a Plan's .request) describes: its drive,
    limits and cart name, and the largest plan it takes (0: the library's
    maxima; they size the cart's memory, see veer_player_def). The key is
    not in it."""
    m = link_pb2().CartConfig(cart=int(cart), cart_name=request.cart_id, frame_size=int(frame_size),
                              max_plan_bytes=int(max_plan_bytes), max_knots=int(max_knots),
                              max_waypoints=int(max_waypoints), max_legs=int(max_legs))
    m.drive.CopyFrom(request.drive)
    m.limits.CopyFrom(request.limits)
    if link_timeout is not None:
        m.link_timeout = float(link_timeout)
    return m.SerializeToString()


PLAN_BYTES_MIN = 256  # VEER_LINK_MIN_PLAN_BYTES


def cart_capacity(plan_bytes):
    """The smallest capacity a cart needs to take this plan (Plan bytes,
    checked as a cart checks them: veer_plan_needs_pb): cart_config's
    max_plan_bytes, max_knots, max_waypoints and max_legs, as a dict. A cart
    sized so needs the least memory that holds the plan
    (veer_player_size_for); any larger plan is refused (reason CAPACITY).
    Raises ValueError for bytes that are not a valid plan."""
    plan_bytes = bytes(plan_bytes)
    lib = _lib.load()
    need = _lib.out_struct(_lib.PlanNeeds)
    diag = _lib.out_struct(_lib.Diag)
    if lib.veer_plan_needs_pb(plan_bytes, len(plan_bytes), ctypes.byref(need), ctypes.byref(diag)) != 0:
        raise ValueError(diag.message.decode("utf-8", "replace") or "veer_plan_needs_pb failed")
    return {"max_plan_bytes": need.plan_bytes, "max_knots": need.knots,
            "max_waypoints": need.waypoints, "max_legs": need.legs}


# ---- frames ------------------------------------------------------------------

Received = collections.namedtuple("Received", "kind message frame")
Received.__doc__ = """A frame from the cart: kind "gaps" or "report", the link_pb2
GapReport or PlayerReport, and the frame's bytes."""


class Link:
    """One cart's link: its number, pre-shared key and frame size, and the
    most Plan bytes the cart takes (0: the library's maximum; a larger plan
    is refused before it goes on the air)."""

    def __init__(self, cart, key, frame_size=FRAME_DEFAULT, max_plan_bytes=0):
        key = bytes(key)
        if len(key) != KEY_BYTES:
            raise ValueError("a cart key has %d bytes, got %d" % (KEY_BYTES, len(key)))
        self._def = LinkDef()
        self._def.cart = int(cart)
        ctypes.memmove(self._def.key, key, KEY_BYTES)
        self._def.frame_size = int(frame_size)
        self._def.max_plan_bytes = int(max_plan_bytes)
        diag = _lib.out_struct(_lib.Diag)
        if _c().veer_link_def_check(ctypes.byref(self._def), ctypes.byref(diag)) != 0:
            raise ValueError(diag.message.decode("utf-8", "replace"))
        self.cart = int(cart)
        self.frame_size = int(frame_size)

    def __repr__(self):
        return "Link(cart=%d, frame_size=%d)" % (self.cart, self.frame_size)  # never the key

    def sender(self, plan_id, plan):
        return Sender(self, plan_id, plan)

    def command(self, seq, kind, plan_id=0):
        """A tagged command frame (HEARTBEAT, START, STOP)."""
        buf = ctypes.create_string_buffer(2048)
        n = ctypes.c_size_t(0)
        st = _c().veer_link_command_frame(ctypes.byref(self._def), int(seq), int(kind), int(plan_id), buf,
                                          ctypes.sizeof(buf), ctypes.byref(n))
        if st != 0:
            raise ValueError("veer_link_command_frame refused seq %r kind %r (status %d)" % (seq, kind, st))
        return buf.raw[:n.value]

    def check(self, frame):
        """libveer's checks of a frame from this cart (size, CRC, fields, cart,
        tag); raises LinkError with the reason."""
        frame = bytes(frame)
        out = ctypes.create_string_buffer(_MESSAGE_BYTES)
        reason = ctypes.c_int(0)
        st = _c().veer_link_parse(ctypes.byref(self._def), frame, len(frame), out, ctypes.byref(reason))
        if st != 0:
            raise LinkError(reason.value)

    def parse(self, frame):
        """A gap report or player report from the cart as a Received; raises
        LinkError for anything refused or not from the cart."""
        self.check(frame)
        msg = link_pb2().LinkFrame.FromString(frame_body(frame))
        which = msg.WhichOneof("body")
        if which == "gaps":
            return Received("gaps", msg.gaps, bytes(frame))
        if which == "report":
            return Received("report", msg.report, bytes(frame))
        raise LinkError(WRONG_DIRECTION)


class Sender:
    """A plan sealed for one cart (plan tag) and cut into frames."""

    def __init__(self, link, plan_id, plan):
        plan = bytes(plan)
        self.link = link
        self.plan_id = int(plan_id)
        self._h = ctypes.c_void_p()
        diag = _lib.out_struct(_lib.Diag)
        st = _c().veer_link_sender_create(ctypes.byref(link._def), self.plan_id, plan, len(plan),
                                          ctypes.byref(self._h), ctypes.byref(diag))
        if st != 0 or not self._h.value:
            raise ValueError(diag.message.decode("utf-8", "replace") or "veer_link_sender_create failed")
        self.count = int(_c().veer_link_sender_chunk_count(self._h))
        tag = ctypes.create_string_buffer(32)
        _c().veer_link_sender_tag(self._h, tag)
        self.tag = tag.raw
        self._frames = [None] * self.count

    def frame(self, index):
        if not 0 <= index < self.count:
            raise IndexError(index)
        if self._frames[index] is None:
            buf = ctypes.create_string_buffer(2048)
            n = ctypes.c_size_t(0)
            st = _c().veer_link_sender_frame(self._h, int(index), buf, ctypes.sizeof(buf), ctypes.byref(n))
            if st != 0:
                raise RuntimeError("veer_link_sender_frame(%d) failed (%d)" % (index, st))
            self._frames[index] = buf.raw[:n.value]
        return self._frames[index]

    def close(self):
        h, self._h = self._h, None
        if h is not None and h.value:
            _c().veer_link_sender_destroy(h)

    def __del__(self):
        try:
            self.close()
        except Exception:
            pass


def missing_chunks(gaps):
    """Chunk indices a GapReport names as missing."""
    out = []
    for i in range(len(gaps.missing) * 8):
        if gaps.missing[i >> 3] >> (i & 7) & 1 and gaps.base + i < gaps.count:
            out.append(gaps.base + i)
    return out


# ---- the ground station's side of a session ----------------------------------

class Stats:
    """Frames and bytes on the air, by kind."""

    def __init__(self):
        self.sent = collections.Counter()
        self.sent_bytes = collections.Counter()
        self.received = collections.Counter()
        self.received_bytes = collections.Counter()
        self.refused = collections.Counter()

    def as_dict(self):
        return {"sent": dict(self.sent), "sent_bytes": dict(self.sent_bytes), "received": dict(self.received),
                "received_bytes": dict(self.received_bytes), "refused": dict(self.refused),
                "frames_sent": sum(self.sent.values()), "bytes_sent": sum(self.sent_bytes.values()),
                "frames_received": sum(self.received.values()), "bytes_received": sum(self.received_bytes.values())}


class Session:
    """The ground station talking to one cart over a transport:
    send(frame_bytes) puts a frame on the air, recv(timeout_s) returns the
    next frame or None. Counters come from the clock."""

    def __init__(self, link, send, recv, log=None, resend_after=0.12):
        self.link = link
        self._send = send
        self._recv = recv
        self.log = log or (lambda msg: None)
        self.stats = Stats()
        self.report = None  # the latest PlayerReport
        self.resend_after = resend_after
        self._seq = 0

    def _out(self, kind, frame):
        self._send(frame)
        self.stats.sent[kind] += 1
        self.stats.sent_bytes[kind] += len(frame)

    def next_counter(self):
        self._seq = max(self._seq + 1, clock_counter())
        return self._seq

    def command(self, kind, plan_id=0):
        self._out({HEARTBEAT: "heartbeat", START: "start", STOP: "stop"}[kind],
                  self.link.command(self.next_counter(), kind, plan_id))

    def receive(self, timeout):
        """The next gap report or report (None on timeout); refused frames are counted and skipped."""
        end = time.monotonic() + timeout
        while True:
            left = end - time.monotonic()
            frame = self._recv(max(left, 0.0))
            if frame is None:
                return None
            try:
                got = self.link.parse(frame)
            except LinkError as exc:
                self.stats.refused[exc.name] += 1
                if left <= 0:
                    return None
                continue
            self.stats.received[got.kind] += 1
            self.stats.received_bytes[got.kind] += len(frame)
            if got.kind == "report":
                # Reports count up (report_seq): one overtaken on the way is old news.
                if self.report is not None and got.message.report_seq <= self.report.report_seq:
                    self.stats.refused["OLD_REPORT"] += 1
                    continue
                self.report = got.message
            return got

    def deliver(self, plan, plan_id=None, timeout=60.0):
        """Sends a plan until the cart has armed it (selective repeat on the
        gap reports). Returns the plan id; raises LinkError with the cart's
        verdict when it refuses the plan, TimeoutError when it does not
        arrive in time."""
        plan_id = int(plan_id) if plan_id is not None else self.next_counter()
        sender = self.link.sender(plan_id, plan)
        last_sent = [0.0] * sender.count
        last_gaps = time.monotonic()

        def send(indices):
            now = time.monotonic()
            for i in indices:
                if now - last_sent[i] >= self.resend_after:
                    self._out("chunk", sender.frame(i))
                    last_sent[i] = now

        self.log("plan %d: %d bytes in %d chunks" % (plan_id, len(plan), sender.count))
        send(range(sender.count))
        end = time.monotonic() + timeout
        while time.monotonic() < end:
            got = self.receive(0.15)
            now = time.monotonic()
            if got is None:
                self.command(HEARTBEAT)  # the cart answers with a gap report and a report
                if now - last_gaps > 0.6:  # nothing heard of this plan for a while: all again
                    send(range(sender.count))
                continue
            m = got.message
            if got.kind == "gaps" and m.plan_id == plan_id:
                last_gaps = now
                if m.complete:
                    if m.verdict == 0:
                        return plan_id
                    if m.verdict == PLAN_TAG:  # a chunk was spoilt on the way: all again
                        last_sent = [0.0] * sender.count
                        send(range(sender.count))
                        continue
                    raise LinkError(m.verdict, "the cart refused plan %d: %s" % (plan_id, reason_name(m.verdict)))
                send(missing_chunks(m))
                if not m.missing:  # missing chunks beyond what the report could hold
                    send(range(m.base, sender.count))
            elif got.kind == "gaps" and m.plan_id > plan_id and not m.complete:
                raise LinkError(STALE, "the cart is receiving a newer plan (%d)" % m.plan_id)
            elif got.kind == "report":
                if m.accepted_plan_id >= plan_id and m.plan_id == plan_id:
                    return plan_id
                if m.accepted_plan_id > plan_id:
                    raise LinkError(REPLAY, "the cart accepted a newer plan (%d)" % m.accepted_plan_id)
        raise TimeoutError("plan %d did not arrive within %.0f s" % (plan_id, timeout))

    def start(self, plan_id, timeout=10.0):
        """Starts the armed plan; returns the report that shows it running."""
        end = time.monotonic() + timeout
        while time.monotonic() < end:
            self.command(START, plan_id)
            t_cmd = time.monotonic() + 0.3
            while time.monotonic() < t_cmd:
                got = self.receive(t_cmd - time.monotonic())
                if got is None or got.kind != "report":
                    continue
                r = got.message
                if r.plan_id == plan_id and r.state in (RUNNING, STOPPING, STOPPED):
                    return r
        raise TimeoutError("plan %d did not start within %.0f s" % (plan_id, timeout))

    def watch(self, until, timeout=120.0, heartbeat_period=0.2, silent=None):
        """Keeps the cart's watchdog fed (heartbeats every heartbeat_period s)
        and reads its reports until until(report) is true; returns that
        report. silent(t) -> True holds every frame back at t seconds into the
        watch (a simulated link loss)."""
        t0 = time.monotonic()
        next_hb = t0
        while time.monotonic() - t0 < timeout:
            now = time.monotonic()
            if now >= next_hb:
                next_hb = now + heartbeat_period
                if not (silent and silent(now - t0)):
                    self.command(HEARTBEAT)
            got = self.receive(max(0.0, min(next_hb - time.monotonic(), 0.1)))
            if got is not None and got.kind == "report" and until(got.message):
                return got.message
        raise TimeoutError("the cart's reports did not show the awaited state within %.0f s" % timeout)

    def hold(self, seconds, heartbeat_period=0.2):
        """Keeps heartbeats going for `seconds` and returns every fresh report
        that came in meanwhile."""
        seen = []
        t0 = time.monotonic()
        next_hb = t0
        while time.monotonic() - t0 < seconds:
            now = time.monotonic()
            if now >= next_hb:
                next_hb = now + heartbeat_period
                self.command(HEARTBEAT)
            got = self.receive(max(0.0, min(next_hb - time.monotonic(), t0 + seconds - time.monotonic(), 0.1)))
            if got is not None and got.kind == "report":
                seen.append(got.message)
        return seen
