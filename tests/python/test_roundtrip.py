"""Round trip through the message interface: request -> bytes -> C ->
reply bytes -> Python, and a plan decoded from bytes samples identically to
the original.

Sources: the protobuf wire format and proto3 JSON mapping as implemented by
Debian's python3-protobuf (the reference implementation decodes what libveer
wrote); SHA-256 from Python's hashlib (FIPS 180-4) for the plan's content
hash; the plain C API (include/veer/plan.h) as a second path to the same
plan."""

import ctypes
import hashlib
import math

import numpy as np
import pytest
from google.protobuf import json_format

import conftest
import scenarios

CASES = [(p.stem, conftest.load_scenario(p)) for p in conftest.shipped_scenarios()]
CASES += [(n, scenarios.get(n)) for n in ("icr_near_module", "pivot")]
IDS = [c[0] for c in CASES]


@pytest.mark.parametrize("name,request_", CASES, ids=IDS)
def test_request_reply_round_trip(veer, name, request_):
    from veer import _pb

    PlanRequest, PlanReply, PlanMsg = _pb.message("PlanRequest"), _pb.message("PlanReply"), _pb.message("Plan")
    req = json_format.ParseDict(request_, PlanRequest())
    p = veer.plan(req)                          # message in
    p2 = veer.plan(req.SerializeToString())     # bytes in
    p3 = veer.plan(request_)                    # dict in
    assert p.to_bytes() == p2.to_bytes() == p3.to_bytes()   # the planner is deterministic
    reply = p.reply
    assert isinstance(reply, PlanReply)
    assert reply.schema_version == veer.SCHEMA_VERSION == veer.library().veer_wire_schema_version()
    assert reply.library_version == veer.library().veer_version()
    # the plan carries what was asked, field for field
    msg = PlanMsg.FromString(p.to_bytes())
    assert msg.drive == req.drive and msg.limits == req.limits and msg.route == req.route
    assert msg.cart_id == req.cart_id
    # its content hash: SHA-256 of its encoding with content_hash empty (hashlib, FIPS 180-4)
    bare = PlanMsg()
    bare.CopyFrom(msg)
    bare.content_hash = b""
    assert hashlib.sha256(bare.SerializeToString()).digest() == msg.content_hash
    # the reply's figures agree with the decoded plan
    assert reply.duration == pytest.approx(p.duration, rel=1e-3)
    assert reply.length == pytest.approx(p.length, rel=1e-12)
    assert len(reply.legs) == len(p.legs) == len(req.route.legs)
    for a, b in zip(reply.legs, p.legs):
        assert a.s_begin == pytest.approx(b.s_begin, abs=1e-9) and a.s_end == pytest.approx(b.s_end, abs=1e-9)
        assert a.duration == pytest.approx(b.duration, rel=2e-3, abs=1e-3)
    assert len(reply.grid_s) == len(reply.grid_sdot) == len(reply.binding_kind) == len(reply.binding_module)


@pytest.mark.parametrize("name,request_", CASES, ids=IDS)
def test_decoded_plan_samples_identically(veer, name, request_):
    p = veer.plan(request_)
    q = veer.Plan.from_bytes(p.to_bytes())
    assert q.to_bytes() == p.to_bytes()
    assert q.duration == p.duration and q.length == p.length and q.legs == p.legs
    rng = np.random.default_rng(7)
    for t in np.concatenate([[0.0, p.duration], rng.uniform(0.0, p.duration, 200)]):
        a, b = p.sample(float(t)), q.sample(float(t))
        for f in a.__slots__:
            va, vb = getattr(a, f), getattr(b, f)
            assert np.array_equal(va, vb), (t, f, va, vb)
    ta, tb = p.table(37.0), q.table(37.0)
    for f in ta.FIELDS:
        assert np.array_equal(getattr(ta, f), getattr(tb, f)), f
    # a plan from bytes finds the planner's grid again (same content hash)
    sa, da = p.profile()
    sb, db = q.profile()
    assert np.array_equal(sa, sb) and np.array_equal(da, db) and p.binding() == q.binding()


@pytest.mark.parametrize("name,request_", CASES, ids=IDS)
def test_plain_c_api_gives_the_same_plan(veer, name, request_):
    # The bytes API decodes the request into the C structs the plain API
    # takes; the package's own conversion (following the .proto comments)
    # must reach the same plan: same duration, grid and profile.
    from veer import _convert, _lib, _pb

    lib = veer.library()
    req = json_format.ParseDict(request_, _pb.message("PlanRequest")())
    drive = _convert.drive_struct(lib, req.drive)
    n = _convert.module_count(lib, drive)
    limits = _convert.limits_struct(lib, req.limits, n)
    route = _convert.route_struct(lib, req.route)
    opts = _convert.options_struct(lib, req.options)
    h = ctypes.c_void_p()
    diag = _lib.Diag()
    st = lib.veer_plan_create(ctypes.byref(drive), ctypes.byref(limits), ctypes.byref(route), ctypes.byref(opts),
                              ctypes.byref(h), ctypes.byref(diag))
    assert st == 0, diag.message
    try:
        p = veer.plan(request_)
        assert lib.veer_plan_duration(h) == pytest.approx(p.reply.duration, rel=1e-12)
        s, sdot = p.profile()
        assert lib.veer_plan_grid_count(h) == len(s)
        a, b, lid = ctypes.c_double(), ctypes.c_double(), _lib.LimitId()
        for k in range(0, len(s), 7):
            assert lib.veer_plan_grid(h, k, ctypes.byref(a), ctypes.byref(b), ctypes.byref(lid)) == 0
            assert a.value == pytest.approx(s[k], abs=1e-12) and b.value == pytest.approx(sdot[k], rel=1e-9, abs=1e-12)
    finally:
        lib.veer_plan_destroy(h)


@pytest.mark.parametrize("name,request_", CASES[:4], ids=IDS[:4])
def test_setpoint_table_message_matches_table(veer, name, request_):
    from veer import _pb

    p = veer.plan(request_)
    raw = p.setpoint_table_bytes(50.0)
    st = _pb.message("SetpointTable").FromString(raw)
    tab = p.table(50.0)
    assert st.schema_version == veer.SCHEMA_VERSION and st.row_count == len(tab) == len(st.t)
    assert st.plan_hash == p.message.content_hash
    np.testing.assert_allclose(st.t, tab.t, rtol=0, atol=1e-12)
    np.testing.assert_allclose(np.column_stack([st.x, st.y, st.yaw]), tab.pose, rtol=0, atol=1e-9)
    np.testing.assert_allclose(np.column_stack([st.vx, st.vy, st.wz]), tab.twist_body, rtol=0, atol=1e-9)
    assert len(st.modules) == p.module_count
    for i, m in enumerate(st.modules):
        np.testing.assert_allclose(m.steer, tab.steer[:, i], atol=1e-9)
        np.testing.assert_allclose(m.wheel_rate, tab.wheel_rate[:, i], atol=1e-9)
    # the plan is the compact form: report the sizes
    ratio = len(raw) / len(p.to_bytes())
    print("%s: plan %d B, 50 Hz table %d B (%.0f x)" % (name, len(p.to_bytes()), len(raw), ratio))
    assert ratio >= 20


def test_table_rows_are_samples(veer):
    # Plan.table rows equal Plan.sample at the same times; times follow
    # veer_plan_table's rule (k / rate up to the duration, plus the duration).
    p = veer.plan(conftest.load_scenario(conftest.shipped_scenarios()[0]))
    rate = 20.0
    tab = p.table(rate)
    n = int(math.floor(p.duration * rate + 1e-9)) + 1
    want = np.arange(n) / rate
    if want[-1] < p.duration:
        want = np.append(want, p.duration)
    np.testing.assert_allclose(tab.t, want, rtol=0, atol=1e-9)
    for k in range(0, len(tab), 13):
        smp = p.sample(float(tab.t[k]))
        assert np.array_equal(tab.pose[k], smp.pose) and np.array_equal(tab.wheel_rate[k], smp.wheel_rate)


@pytest.mark.parametrize("name,request_", CASES, ids=IDS)
def test_cart_capacity_matches_the_message(veer, name, request_):
    """What a cart needs for a plan (veer_plan_needs_pb through
    veer.link.cart_capacity) against the Plan message read by Debian's
    python3-protobuf: its size, Profile.knot_count and the route's counts."""
    from veer import _pb
    import veer.link as vl

    data = veer.plan(request_).to_bytes()
    msg = _pb.message("Plan").FromString(data)
    cap = vl.cart_capacity(data)
    assert cap == {"max_plan_bytes": max(len(data), vl.PLAN_BYTES_MIN), "max_knots": msg.profile.knot_count,
                   "max_waypoints": len(msg.route.waypoints), "max_legs": len(msg.route.legs)}
    with pytest.raises(ValueError):
        vl.cart_capacity(data[:-1])
