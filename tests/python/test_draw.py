"""The figure's numbers: each limit's speed curve (veer.kinematics, computed
in numpy from Plan.path_at and the limits) against the plan. A feasible plan
lies under every curve (the maximum velocity curve bounds any feasible
profile: Bobrow, Dubowsky, Gibson, IJRR 1985); where veer reports a speed
limit as binding, the plan touches that limit's curve. The curves are
checked against the reference rows of tests/python/reference.py too."""

import math

import numpy as np
import pytest

import conftest
import reference as ref
import scenarios

CASES = [(p.stem, conftest.load_scenario(p)) for p in conftest.shipped_scenarios()]
CASES += [(n, scenarios.get(n)) for n in ("icr_near_module", "toward", "body_accel_curve")]
SPEED_KINDS = ("wheel_speed", "steer_rate", "body_speed", "yaw_rate")


@pytest.mark.parametrize("name,request_", CASES, ids=[c[0] for c in CASES])
def test_limit_curves_bound_and_touch_the_plan(veer, name, request_):
    from veer import kinematics

    p = veer.plan(request_)
    s, sdot = p.profile()
    q, dq, ddq = p.path_at(s)
    curves = kinematics.limit_curves(p.drive(), p.limits(), q, dq, ddq)
    names = p.binding()
    lowest = np.min(np.vstack(list(curves.values())), axis=0)
    assert np.all(sdot <= lowest * (1 + 1e-6) + 1e-9)
    touched = 0
    for k, b in enumerate(names):
        if b.split("[")[0] in SPEED_KINDS and b in curves:
            want = curves[b][k]
            if b.startswith("steer_rate"):
                # veer holds a point to its neighbours' lowest steer-rate bound
                # (plan.c, steer_rate_bounds: the chord between grid points
                # stays under the curve); neighbours across a rest do not count
                lo, hi = k, k
                if k > 0 and s[k - 1] < s[k]:
                    lo = k - 1
                if k + 1 < len(s) and s[k + 1] > s[k]:
                    hi = k + 1
                want = min(curves[b][lo:hi + 1])
            assert sdot[k] == pytest.approx(want, rel=2e-3), (k, b)
            touched += 1
    # the speed curves are the reference rows' speed bounds: min over curves^2 = xmax
    drive, limits = p.drive(), p.limits()
    speed_min = np.min(np.vstack([c for n_, c in curves.items() if n_.split("[")[0] in SPEED_KINDS]), axis=0)
    for k in range(0, len(s), 11):
        r = ref.point_rows(drive, limits, q[k], dq[k], ddq[k])
        if math.isfinite(r.xmax):
            assert speed_min[k] ** 2 == pytest.approx(r.xmax, rel=1e-9)
        else:
            assert not math.isfinite(speed_min[k])


def test_accel_curve_of_a_single_wheel_limit():
    # Closed form: a mecanum cart translating along body x with only wheel
    # accel limits has no speed bound from them (a = 0 is feasible at any
    # speed on a straight line), and on a circle of radius R at fixed heading
    # |u_i'| b = |J_i xi'| b must stay under the limit with a chosen freely:
    # two opposite wheels need opposite a, so b <= L / |J_i xi'| for the pair.
    from veer import kinematics

    drive = {"kind": "mecanum", "half_wheelbase": 0.3, "half_track": 0.25, "wheel_radius": 0.1,
             "roller_angle": math.pi / 4, "modules": []}
    lim = {"body_speed": math.inf, "body_accel": math.inf, "yaw_rate": math.inf, "yaw_accel": math.inf,
           "modules": [{"wheel_rate": math.inf, "wheel_accel": 5.0}] * 4}
    q = np.array([[0.0, 0.0, 0.0]])
    c = kinematics.limit_curves(drive, lim, q, np.array([[1.0, 0.0, 0.0]]), np.zeros((1, 3)))
    assert not np.isfinite(c["wheel_accel"][0])
    # circle of radius R through the origin, heading held: c' = (0, 1), c'' = (-1/R, 0)
    R = 2.0
    c = kinematics.limit_curves(drive, lim, q, np.array([[0.0, 1.0, 0.0]]), np.array([[-1.0 / R, 0.0, 0.0]]))
    J = ref.wheel_matrix(drive)
    f, df = J @ np.array([0.0, 1.0, 0.0]), J @ np.array([-1.0 / R, 0.0, 0.0])
    # LP over (a, b) with the same rows: max b subject to |f_i a + df_i b| <= L
    import scipy.optimize

    A = np.vstack([np.column_stack([f, df]), -np.column_stack([f, df])])
    res = scipy.optimize.linprog([0.0, -1.0], A_ub=A, b_ub=np.full(8, 5.0), bounds=[(None, None), (0, None)],
                                 method="highs")
    assert c["wheel_accel"][0] ** 2 == pytest.approx(res.x[1], rel=1e-9)


def test_figure_has_its_parts(veer):
    import matplotlib

    matplotlib.use("Agg")
    from veer import draw

    p = veer.plan(conftest.load_scenario(conftest.SCENARIO_DIR / "north_lane3_steered.json"))
    fig = draw.figure(p, footprints=9)
    top, prof, band, steer, wheel = fig.axes[:5]
    assert len(top.patches) == 2 * 9                     # outline and nose per footprint
    assert len([l for l in top.lines if "track" in (l.get_label() or "")]) == p.module_count
    assert len(top.collections) >= 1                     # the path coloured by binding limit
    assert any(l.get_label() == "plan: sdot" for l in prof.lines)
    assert sum(1 for l in prof.lines if "allows" in l.get_label()) >= 3
    assert len(steer.lines) >= p.module_count and len(wheel.lines) >= p.module_count
    assert "safety" in " ".join(t.get_text() for t in fig.texts)
    import matplotlib.pyplot as plt

    plt.close(fig)
