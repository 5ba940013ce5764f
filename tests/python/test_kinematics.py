"""Setpoints sampled from Python agree with numpy rigid-body kinematics at 200
random times on every shipped scenario and the extra test scenarios.

Sources: the chain rule along the path (velocity q' sdot, acceleration
q'' sdot^2 + q' sddot); rigid-body velocity and acceleration of a body point,
v + w x r and a + alpha x r - w^2 r (K. M. Lynch, F. C. Park, "Modern
Robotics", 2017, 13.2); wheel rates of mecanum and omni carts, [MR17]
eq. (13.5); differential drive wheel speeds v -+ (d/2) w (Siciliano et al.,
"Robotics", 2009, 11.2) with the skid-steer effective track. See
tests/python/reference.py."""

import math

import numpy as np
import pytest

import conftest
import reference as ref
import scenarios

CASES = [(p.stem, conftest.load_scenario(p)) for p in conftest.shipped_scenarios()]
CASES += [(n, scenarios.get(n)) for n in ("icr_near_module", "pivot", "toward")]

TOL = 1e-8  # all quantities are computed in doubles from the same s, sdot, sddot


def close(a, b, scale=1.0):
    return np.allclose(a, b, rtol=TOL, atol=TOL * max(1.0, scale))


@pytest.mark.parametrize("name,request_", CASES, ids=[c[0] for c in CASES])
def test_samples_match_rigid_body_kinematics(veer, name, request_):
    p = veer.plan(request_)
    drive = p.drive()
    rng = np.random.default_rng(20261201)
    times = np.sort(rng.uniform(0.0, p.duration, 200))
    r = drive["wheel_radius"]
    pos = ref.module_positions(drive)
    J = None if drive["kind"] == "steered" else ref.wheel_matrix(drive)
    moving = 0
    for t in times:
        smp = p.sample(float(t))
        assert smp.t == pytest.approx(t, abs=1e-12)
        q, dq, ddq = p.path_at(smp.s)
        # chain rule along the path
        assert close(smp.pose[:2], q[:2]) and math.remainder(smp.pose[2] - q[2], 2 * math.pi) == pytest.approx(0, abs=1e-9)
        assert close(smp.twist_world, dq * smp.sdot)
        assert close(smp.accel_world, ddq * smp.sdot ** 2 + dq * smp.sddot)
        # body frame: rotate by -yaw
        Rt = ref.rot(-smp.pose[2])
        assert close(smp.twist_body[:2], Rt @ smp.twist_world[:2]) and close(smp.twist_body[2], smp.twist_world[2])
        assert close(smp.accel_body[:2], Rt @ smp.accel_world[:2]) and close(smp.accel_body[2], smp.accel_world[2])
        v, w = smp.twist_world[:2], smp.twist_world[2]
        a, alpha = smp.accel_world[:2], smp.accel_world[2]
        if smp.phase != "moving":
            assert np.allclose(smp.twist_world, 0.0) and np.allclose(smp.wheel_rate, 0.0, atol=1e-12)
            continue
        moving += 1
        if J is None:
            for i, rb in enumerate(pos):
                Rr = ref.rot(smp.pose[2]) @ rb
                vi = v + w * (ref.JROT @ Rr)                       # v + w x r
                ai = a + alpha * (ref.JROT @ Rr) - w * w * Rr      # a + alpha x r - w^2 r
                sp = float(np.hypot(*vi))
                # tread velocity in the body frame = wheel_rate * r * (cos steer, sin steer)
                tread = smp.wheel_rate[i] * r * np.array([math.cos(smp.steer[i]), math.sin(smp.steer[i])])
                assert close(tread, Rt @ vi, sp)
                if sp > 1e-6:
                    steer_rate = (vi[0] * ai[1] - vi[1] * ai[0]) / sp ** 2 - w
                    assert smp.steer_rate[i] == pytest.approx(steer_rate, rel=1e-6, abs=1e-7)
                    sign = 1.0 if smp.wheel_rate[i] >= 0 else -1.0
                    assert smp.wheel_accel[i] == pytest.approx(sign * float(vi @ ai) / sp / r, rel=1e-6, abs=1e-7)
        else:
            xi = smp.twist_body
            # d/dt of the body twist: R(-yaw) a - w J R(-yaw) v, alpha
            vb = Rt @ v
            xid = np.concatenate([Rt @ a - w * (ref.JROT @ vb), [alpha]])
            assert close(smp.wheel_rate, J @ xi, np.max(np.abs(J @ xi)))
            assert close(smp.wheel_accel, J @ xid, np.max(np.abs(J @ xid)))
    assert moving > 100  # most random times fall in motion, so the checks above ran


@pytest.mark.parametrize("name,request_", [c for c in CASES if c[1]["drive"]["kind"] != "DRIVE_KIND_STEERED"],
                         ids=[c[0] for c in CASES if c[1]["drive"]["kind"] != "DRIVE_KIND_STEERED"])
def test_fixed_wheels_report_their_direction(veer, name, request_):
    # drive.h: the mecanum, omni and differential kinds report their fixed
    # wheel direction as the steer angle (omni: the wheel's drive_angle, the
    # direction it pushes; mecanum and differential wheels drive along body x).
    p = veer.plan(request_)
    drive = p.drive()
    want = np.array([m["drive_angle"] for m in drive["modules"]] if drive["kind"] == "omni"
                    else [0.0] * p.module_count)
    for t in np.linspace(0.0, p.duration, 17):
        smp = p.sample(float(t))
        assert np.allclose(np.remainder(smp.steer - want + math.pi, 2 * math.pi) - math.pi, 0.0, atol=1e-12)
        assert np.allclose(smp.steer_rate, 0.0)


DENSE = CASES + [("body_accel_curve", scenarios.get("body_accel_curve"))]


@pytest.mark.parametrize("name,request_", DENSE, ids=[c[0] for c in DENSE])
def test_dense_samples_stay_within_the_limits(veer, name, request_):
    # Issue 3 and design.md: the cart's setpoints stay within the limits
    # (0.5 % allowance for the compact profile). Sampled at 1 kHz, between the
    # grid points too, where the planner's rows are not evaluated.
    p = veer.plan(request_)
    lim = p.limits()
    tab = p.table(1000.0)
    worst = {}
    for key, arr in (("wheel_rate", tab.wheel_rate), ("steer_rate", tab.steer_rate), ("wheel_accel", tab.wheel_accel)):
        L = np.array([m[key] for m in lim["modules"]])
        if arr.size and np.any(np.isfinite(L)):
            worst[key] = float(np.max(np.abs(arr) / L))
    v = np.hypot(tab.twist_world[:, 0], tab.twist_world[:, 1])
    a = np.hypot(tab.accel_world[:, 0], tab.accel_world[:, 1])
    for key, val in (("body_speed", v), ("body_accel", a), ("yaw_rate", np.abs(tab.twist_world[:, 2])),
                     ("yaw_accel", np.abs(tab.accel_world[:, 2]))):
        if math.isfinite(lim[key]):
            worst[key] = float(np.max(val) / lim[key])
    over = {k: round(w, 4) for k, w in worst.items() if w > 1.005}
    assert not over, "peak / limit above 1.005: %s" % over
