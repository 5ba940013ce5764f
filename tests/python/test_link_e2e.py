"""The radio link end to end, on 127.0.0.1 only: examples/ground_station.py
plans the demo scenario and sends it through examples/lossy_channel.py
(30 % loss, 5 % duplication, reordering, 1 % corruption, seeded) to
examples/cart_sim, which runs the player at 50 Hz and integrates its own
setpoints through the drive's forward kinematics.

References: the plan's final pose as libveer samples the plan bytes the
ground station sent; the scenario's limits; zlib's CRC-32, Python's hmac
(RFC 2104) and protoc's decoder for the frame format link.proto documents.
Every run is bounded in time (subprocess timeouts) and uses ephemeral ports.
"""

import hmac
import json
import math
import os
import pathlib
import random
import struct
import subprocess
import sys
import zlib

import pytest

import conftest

REPO = conftest.REPO
EXAMPLES = REPO / "examples"
DEMO = sorted(conftest.SCENARIO_DIR.glob("*demo*.json"))[0]
CART = 4


def build_dir():
    d = os.environ.get("VEER_BUILD_DIR")
    if d:
        return pathlib.Path(d)
    lib = os.environ.get("VEER_LIBRARY")
    return pathlib.Path(lib).parent if lib else REPO / "build" / "ci"


def cart_sim():
    exe = build_dir() / "examples" / "cart_sim"
    if not exe.is_file():
        pytest.skip("examples/cart_sim is not built in %s (VEER_BUILD_EXAMPLES)" % exe.parent)
    return exe


def figures_path():
    return build_dir() / "link_e2e_figures.json"


def record_figure(name, value):
    """Figures for the note (frames and bytes on the air), kept beside the build."""
    path = figures_path()
    try:
        data = json.loads(path.read_text()) if path.is_file() else {}
    except ValueError:
        data = {}
    data[name] = value
    try:
        path.write_text(json.dumps(data, indent=1, sort_keys=True) + "\n")
    except OSError:
        pass
    print("%s: %s" % (name, json.dumps(value)))


def first_line_port(proc, what, timeout=10.0):
    """The port a child prints on its first line ("...: listening on 127.0.0.1:PORT")."""
    import selectors
    sel = selectors.DefaultSelector()
    sel.register(proc.stdout, selectors.EVENT_READ)
    if not sel.select(timeout):
        proc.kill()
        raise AssertionError("%s did not say its port within %g s" % (what, timeout))
    line = proc.stdout.readline()
    assert "listening on 127.0.0.1:" in line, "%s said %r" % (what, line)
    return int(line.rsplit(":", 1)[1])


def limits_of(scenario):
    spec = conftest.load_scenario(scenario)
    m = spec["limits"]["modules"][0]
    return {"wheel_rate": m["wheelRate"], "wheel_accel": m["wheelAccel"], "steer_rate": m["steerRate"]}


def read_trace(path):
    rows = []
    with open(path) as f:
        head = f.readline().strip().split(",")
        for line in f:
            parts = line.strip().split(",")
            rows.append({k: (v if k == "state" else float(v)) for k, v in zip(head, parts)})
    return rows


def run_link(tmp_path, drop=0.30, duplicate=0.05, reorder=0.20, corrupt=0.01, seed=11, frame_size=255,
             ground_args=(), exit_after_stop=1.0, deliver_only=False, fit_cart=False):
    """One run: cart simulator, channel, ground station. Returns the three summaries and the trace."""
    env = dict(os.environ)
    key = tmp_path / "cart.key"
    key.write_text(random.Random(seed).randbytes(32).hex() + "\n")
    cfg = tmp_path / "cart.cfg"
    gs = [sys.executable, str(EXAMPLES / "ground_station.py")]
    subprocess.run(gs + ["--write-cart-config", str(cfg), "--cart", str(CART), "--scenario", str(DEMO),
                         "--frame-size", str(frame_size), "--link-timeout", "1.0"]
                   + (["--fit-cart"] if fit_cart else []),
                   check=True, timeout=60, env=env)
    sim = subprocess.Popen([str(cart_sim()), "--config", str(cfg), "--key-file", str(key),
                            "--summary", str(tmp_path / "sim.json"), "--trace", str(tmp_path / "trace.csv"),
                            "--exit-after-stop", str(exit_after_stop), "--max-time", "100"],
                           stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    channel = None
    try:
        sim_port = first_line_port(sim, "cart_sim")
        channel = subprocess.Popen([sys.executable, str(EXAMPLES / "lossy_channel.py"), "--cart-port", str(sim_port),
                                    "--drop", str(drop), "--duplicate", str(duplicate), "--reorder", str(reorder),
                                    "--corrupt", str(corrupt), "--seed", str(seed),
                                    "--stats", str(tmp_path / "channel.json")],
                                   stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
        ch_port = first_line_port(channel, "lossy_channel")
        r = subprocess.run(gs + ["--to", "127.0.0.1:%d" % ch_port, "--key-file", str(key), "--cart", str(CART),
                                 "--scenario", str(DEMO), "--frame-size", str(frame_size),
                                 "--summary", str(tmp_path / "ground.json"), "--timeout", "60"] + list(ground_args)
                           + (["--deliver-only"] if deliver_only else []),
                           capture_output=True, text=True, timeout=120, env=env)
        assert r.returncode == 0, "ground_station failed:\n%s\n%s" % (r.stdout, r.stderr)
        print(r.stdout)
        if deliver_only:
            sim.terminate()
        sim.wait(timeout=30)
    finally:
        for p in (sim, channel):
            if p is not None and p.poll() is None:
                p.terminate()
                try:
                    p.wait(timeout=10)
                except subprocess.TimeoutExpired:
                    p.kill()
    assert sim.returncode == 0, sim.stderr.read()
    load = lambda name: json.loads((tmp_path / name).read_text())  # noqa: E731
    return load("sim.json"), load("ground.json"), load("channel.json"), read_trace(tmp_path / "trace.csv")


def check_limits(rows, limits, what):
    """Every setpoint within the scenario's limits (0.5 %: the message
    interface's tolerance, src/wire_internal.h), and the wheel rates'
    finite differences within the wheel acceleration limit (2 %)."""
    wheels = sorted(k for k in rows[0] if k.startswith("wheel_rate"))
    for r in rows:
        for k in wheels:
            i = k[len("wheel_rate"):]
            assert abs(r[k]) <= limits["wheel_rate"] * 1.005, "%s: t %.2f %s %g" % (what, r["time"], k, r[k])
            assert abs(r["wheel_accel" + i]) <= limits["wheel_accel"] * 1.005, (what, r["time"], i)
            assert abs(r["steer_rate" + i]) <= limits["steer_rate"] * 1.005, (what, r["time"], i)
    for a, b in zip(rows, rows[1:]):
        dt = b["time"] - a["time"]
        if dt <= 0:
            continue
        for k in wheels:
            rate = abs(b[k] - a[k]) / dt
            assert rate <= limits["wheel_accel"] * 1.02 + 1e-6, "%s: t %.2f %s changes at %g rad/s^2" % (
                what, b["time"], k, rate)


def test_demo_plan_over_a_lossy_link(veer, tmp_path):
    sim, ground, channel, trace = run_link(tmp_path)
    # The channel did impair the traffic (both directions).
    for d in ("to_cart", "to_ground"):
        c = channel["counts"][d]
        assert c["in"] > 20 and c["dropped"] > 0.15 * c["in"], c
    assert channel["counts"]["to_cart"]["duplicated"] + channel["counts"]["to_ground"]["duplicated"] > 0
    assert channel["counts"]["to_cart"]["delayed"] > 0
    # Armed, run to its end, stopped there.
    assert ground["final"]["state"] == "STOPPED" and ground["final"]["stop_reason"] == "END_OF_PLAN", ground["final"]
    assert sim["accepted_plan_id"] == ground["plan_id"] == sim["plan_id"]
    assert sim["state"] == "STOPPED" and sim["stop_reason"] == "END_OF_PLAN"
    # The simulated cart's odometry ends at the plan's final pose: within
    # 1 cm and 0.5 degree (the figure). The reference pose comes from
    # the plan bytes the ground station sent, sampled by libveer here.
    want = ground["plan_end_pose"]
    got = sim["pose"]
    err = math.hypot(got[0] - want[0], got[1] - want[1])
    yaw_err = abs(math.remainder(got[2] - want[2], 2 * math.pi))
    assert err < 0.01, "odometry ends %.4f m from the plan's end pose" % err
    assert yaw_err < math.radians(0.5), "odometry heading %.4f deg off" % math.degrees(yaw_err)
    running = [r for r in trace if r["state"] == "RUNNING"]
    assert len(running) > 0.9 * ground["plan_duration"] * 50
    check_limits(running, limits_of(DEMO), "run")
    record_figure("demo_30pct_loss", {"plan_bytes": ground["plan_bytes"], "chunks": ground["chunks"],
                                      "to_arm": {k: ground["delivery"][k] for k in
                                                 ("frames_sent", "bytes_sent", "frames_received", "bytes_received")},
                                      "whole_run": {k: ground["total"][k] for k in
                                                    ("frames_sent", "bytes_sent", "frames_received",
                                                     "bytes_received")},
                                      "seconds_to_arm": round(ground["seconds_to_arm"], 3),
                                      "pose_error_m": err, "yaw_error_deg": math.degrees(yaw_err)})


def test_demo_plan_clean_link_figures(veer, tmp_path):
    """The same at 0 % loss: the frame count to arm is the chunk count."""
    sim, ground, channel, trace = run_link(tmp_path, drop=0.0, duplicate=0.0, reorder=0.0, corrupt=0.0)
    assert ground["final"]["stop_reason"] == "END_OF_PLAN"
    assert ground["delivery"]["sent"]["chunk"] == ground["chunks"]
    got, want = sim["pose"], ground["plan_end_pose"]
    assert math.hypot(got[0] - want[0], got[1] - want[1]) < 0.01
    record_figure("demo_0pct_loss", {"plan_bytes": ground["plan_bytes"], "chunks": ground["chunks"],
                                     "to_arm": {k: ground["delivery"][k] for k in
                                                ("frames_sent", "bytes_sent", "frames_received", "bytes_received")},
                                     "whole_run": {k: ground["total"][k] for k in
                                                   ("frames_sent", "bytes_sent", "frames_received",
                                                    "bytes_received")}})


def test_demo_on_a_cart_sized_for_it(veer, tmp_path):
    """A cart configured with the demo plan's own capacity (ground_station
    --fit-cart: its bytes, knots, waypoints and legs) takes the plan over a
    lossy link and runs it to the end like the default cart, in a fraction of
    the memory (the default cart sizes for any plan)."""
    sim, ground, _, trace = run_link(tmp_path, drop=0.1, seed=5, fit_cart=True)
    assert sim["state"] == "STOPPED" and sim["stop_reason"] == "END_OF_PLAN", sim
    got, want = sim["pose"], ground["plan_end_pose"]
    assert math.hypot(got[0] - want[0], got[1] - want[1]) < 0.01
    default_tmp = tmp_path / "default"
    default_tmp.mkdir()
    sim_default, _, _, _ = run_link(default_tmp, drop=0.0, duplicate=0.0, reorder=0.0, corrupt=0.0, deliver_only=True)
    assert sim["player_memory_bytes"] * 4 < sim_default["player_memory_bytes"], (sim["player_memory_bytes"],
                                                                                  sim_default["player_memory_bytes"])
    record_figure("cart_sized_for_demo", {"player_memory_bytes": sim["player_memory_bytes"],
                                          "default_player_memory_bytes": sim_default["player_memory_bytes"]})


def test_small_frames_selective_repeat(veer, tmp_path):
    """The smallest frames (160 bytes) cut the demo plan into more chunks: the gap reports
    bring the missing ones at 30 % loss, and only those are sent again
    (far fewer chunk frames than resending the whole plan each round)."""
    sim, ground, channel, trace = run_link(tmp_path, frame_size=160, seed=5)
    assert ground["final"]["stop_reason"] == "END_OF_PLAN"
    n = ground["chunks"]
    assert n >= 5
    sent = ground["delivery"]["sent"]["chunk"]
    assert ground["delivery"]["received"].get("gaps", 0) > 0
    # With loss p each chunk needs 1 / (1 - p) sends on average (geometric
    # distribution); 30 % loss and 1 % corruption: about 1.45 n; allow 3 n.
    assert n <= sent <= 3 * n, "%d chunk frames for %d chunks" % (sent, n)
    got, want = sim["pose"], ground["plan_end_pose"]
    assert math.hypot(got[0] - want[0], got[1] - want[1]) < 0.01
    record_figure("demo_30pct_loss_160_byte_frames", {"chunks": n, "chunk_frames_sent": sent,
                                                    "frames_sent": ground["delivery"]["frames_sent"],
                                                    "bytes_sent": ground["delivery"]["bytes_sent"]})


def test_delivery_figures_over_seeds(veer, tmp_path):
    """Frames and bytes on the air until the cart has armed the demo plan, at
    0 % and at 30 % loss (5 % duplication, reordering, 1 % corruption) over
    eight seeds each: every delivery arms; the clean link needs exactly one
    frame per chunk."""
    figures = {}
    for loss in (0.0, 0.30):
        runs = []
        for seed in range(1, 9):
            d = tmp_path / ("loss%d_seed%d" % (loss * 100, seed))
            d.mkdir()
            rates = dict(drop=loss, duplicate=0.05, reorder=0.2, corrupt=0.01) if loss else \
                dict(drop=0.0, duplicate=0.0, reorder=0.0, corrupt=0.0)
            sim, ground, channel, _ = run_link(d, seed=seed, deliver_only=True, **rates)
            assert sim["state"] == "ARMED" and sim["accepted_plan_id"] == ground["plan_id"], sim
            runs.append(ground)
        sent = [g["delivery"]["frames_sent"] for g in runs]
        sent_bytes = [g["delivery"]["bytes_sent"] for g in runs]
        back = [g["delivery"]["frames_received"] for g in runs]
        back_bytes = [g["delivery"]["bytes_received"] for g in runs]
        if loss == 0.0:
            assert all(g["delivery"]["sent"]["chunk"] == g["chunks"] for g in runs)
        figures["%d%%" % round(loss * 100)] = {
            "chunks": runs[0]["chunks"], "plan_bytes": runs[0]["plan_bytes"],
            "frames_sent_mean": sum(sent) / len(sent), "frames_sent_max": max(sent),
            "bytes_sent_mean": sum(sent_bytes) / len(sent_bytes), "bytes_sent_max": max(sent_bytes),
            "frames_back_mean": sum(back) / len(back), "bytes_back_mean": sum(back_bytes) / len(back_bytes),
            "seconds_to_arm_mean": sum(g["seconds_to_arm"] for g in runs) / len(runs)}
    record_figure("demo_delivery_to_armed_8_seeds", figures)


def test_link_loss_controlled_stop(veer, tmp_path):
    """The ground station goes silent 4 s into the run: the cart stops under
    control along the path within the limits, reports LINK_LOST, and stays
    stopped when heartbeats come back and a START of the same plan is tried."""
    sim, ground, channel, trace = run_link(tmp_path, ground_args=("--lose-link-after", "4", "--hold-stopped", "3"),
                                           exit_after_stop=6.0)
    final = ground["final"]
    assert final["state"] == "STOPPED" and final["stop_reason"] == "LINK_LOST", final
    assert sim["stop_reason"] == "LINK_LOST"
    held = ground["held"]
    assert held["reports"] >= 3 and held["states"] == ["STOPPED"] and held["stop_reasons"] == ["LINK_LOST"], held
    assert held["poses"][0] == held["poses"][-1], "the cart moved after the stop"
    # What the cart refused after the STARTs is informative only: a report
    # shows the latest refusal, and on this channel duplicated heartbeats
    # (COMMAND_REPLAY) and corrupted frames overwrite the START's STATE
    # refusal before a report leaves; tests/test_player.c checks the STATE
    # refusal of a spent plan's START frame by frame. What must hold here:
    # the cart stayed STOPPED where it stood (above).
    print("refused after the STARTs:", held["rejections_after_start"])
    # The stop: from the last running sample to rest, speed never rising,
    # every setpoint within the limits.
    i_run = max(i for i, r in enumerate(trace) if r["state"] == "RUNNING")
    stop = [r for r in trace[i_run:] if r["state"] in ("RUNNING", "STOPPING", "STOPPED")]
    moving = [r for r in stop if r["state"] != "STOPPED"]
    assert any(r["state"] == "STOPPING" for r in stop), "no controlled stop (the link was lost while standing?)"
    assert stop[0]["sdot"] > 0.2, "moving when the link went"
    for a, b in zip(moving, moving[1:]):
        assert b["sdot"] <= a["sdot"] + 1e-9 and b["s"] >= a["s"] - 1e-9
    check_limits(stop, limits_of(DEMO), "stop")
    at_rest = [r for r in trace if r["state"] == "STOPPED"]
    assert at_rest and all(r["sdot"] == 0.0 for r in at_rest)
    # Braking along the path: ends where the range checks' stop from that
    # moment ends (veer_plan_stop_info on the same plan bytes), to within the
    # distance of one control period at the stop's start speed.
    plan = veer.Plan.from_bytes(open_plan_bytes(tmp_path, ground))
    info = stop_info(veer, plan, stop[0]["plan_t"] + 0.01)
    assert abs(info["s_end"] - sim["s"]) <= stop[0]["sdot"] * 0.02 + 1e-3, (info, sim["s"])
    # Odometry: standing where the player says it stands (pose within 1 cm).
    rp = sim["reported_pose"]
    assert math.hypot(sim["pose"][0] - rp[0], sim["pose"][1] - rp[1]) < 0.01


def open_plan_bytes(tmp_path, ground):
    """The demo plan's bytes as the ground station made them (planning is deterministic)."""
    import veer
    return veer.plan(str(DEMO)).to_bytes()


def stop_info(veer, plan, t):
    import ctypes

    class StopInfo(ctypes.Structure):
        _fields_ = [("t", ctypes.c_double), ("leg", ctypes.c_int), ("s_start", ctypes.c_double),
                    ("sdot_start", ctypes.c_double), ("s_end", ctypes.c_double), ("duration", ctypes.c_double)]

    lib = veer.library()
    fn = lib.dll.veer_plan_stop_info
    fn.restype = ctypes.c_int
    fn.argtypes = [ctypes.c_void_p, ctypes.c_double, ctypes.POINTER(StopInfo)]
    out = StopInfo()
    assert fn(plan._h(), t, ctypes.byref(out)) == 0
    return {"s_start": out.s_start, "sdot_start": out.sdot_start, "s_end": out.s_end, "duration": out.duration}


# ---- the frame format against independent references ------------------------

def test_frames_against_zlib_hmac_and_protoc(veer):
    import veer.link as vl
    rnd = random.Random(3)
    # CRC-32 of IEEE 802.3: zlib.crc32 is the reference implementation.
    for n in list(range(0, 70)) + [255, 1024, 5000]:
        data = rnd.randbytes(n)
        assert vl.crc32(data) == zlib.crc32(data)
    # HMAC-SHA-256: Python's hmac module (RFC 2104) over the layout link.proto documents.
    key = rnd.randbytes(32)
    assert vl.hmac_sha256(key, b"abc") == hmac.new(key, b"abc", "sha256").digest()
    link = vl.Link(CART, key, 160)
    plan = veer.plan(str(DEMO)).to_bytes()
    plan_id = 123456789
    s = link.sender(plan_id, plan)
    want_tag = hmac.new(key, b"veer-link-plan-1" + struct.pack("<IQI", CART, plan_id, len(plan)) + plan,
                        "sha256").digest()
    assert s.tag == want_tag
    # Chunks, decoded by protoc's classes and put together by the rule in
    # link.proto, give back the Plan bytes and the tag.
    pb = vl.link_pb2()
    sealed = bytearray()
    for i in range(s.count):
        frame = s.frame(i)
        assert len(frame) <= 160
        m = pb.LinkFrame.FromString(vl.frame_body(frame))
        assert m.cart == CART and m.WhichOneof("body") == "chunk" and not m.tag
        c = m.chunk
        assert (c.plan_id, c.index, c.count, c.sealed_size) == (plan_id, i, s.count, len(plan) + 32)
        assert len(sealed) == i * math.ceil(c.sealed_size / c.count)
        sealed += c.data
    assert bytes(sealed) == plan + want_tag
    # A command's frame tag: HMAC over "veer-link-frame-1" and the bytes
    # before the tag field, first 16 bytes.
    frame = link.command(77, vl.START, plan_id)
    body = vl.frame_body(frame)
    m = pb.LinkFrame.FromString(body)
    assert m.command.seq == 77 and m.command.kind == vl.START and m.command.plan_id == plan_id
    assert body[-18:-16] == b"\x7a\x10"
    assert m.tag == hmac.new(key, b"veer-link-frame-1" + body[:-18], "sha256").digest()[:16]
    # One flipped bit: zlib and libveer both refuse it.
    bad = bytearray(frame)
    bad[3] ^= 0x04
    with pytest.raises(vl.LinkError):
        vl.frame_body(bytes(bad))
    with pytest.raises(vl.LinkError) as e:
        link.check(bytes(bad))
    assert e.value.name == "CRC"
    # The module's reason and state numbers are libveer's.
    for name in ("TRUNCATED", "CRC", "MALFORMED", "WRONG_DIRECTION", "STALE", "REPLAY", "PLAN_TAG"):
        assert vl.reason_name(getattr(vl, name)) == name
    for name in ("IDLE", "ARMED", "RUNNING", "STOPPING", "STOPPED", "FAULT"):
        assert vl.state_name(getattr(vl, name)) == name
    # The key never shows in a Link's text.
    assert key.hex() not in repr(link) and key.hex() not in str(vars(link))
