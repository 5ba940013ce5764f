"""Motor torque-speed curve against an independent integration of the
equations of motion.

A DC motor's available acceleration falls linearly from stall at rest to zero
at free speed (the torque-speed line of any electric machines text). On a
straight line a mecanum cart's four wheels turn alike, so the time-optimal
motion is: accelerate along the curve, dv/dt = r A (1 - v / (r w_free)), then
brake at the stall acceleration r A to rest at the end. The test integrates
that with scipy's solve_ivp (an event finds the switch where the braking
distance v^2 / (2 r A) uses up the rest of the line) and compares durations.
"""
import numpy as np
import pytest
from scipy.integrate import solve_ivp

import veer

R = 0.1        # m, wheel radius (invented cart)
A = 12.0       # rad/s^2, wheel acceleration at stall
W_FREE = 20.0  # rad/s, free-running wheel rate


def request(D):
    return {
        "drive": {"kind": "DRIVE_KIND_MECANUM", "wheelRadius": R},
        "limits": {"modules": [{"motorStallAccel": A, "motorFreeRate": W_FREE}]},
        "route": {
            "startX": 0.0, "startY": 0.0, "startYaw": 0.0,
            "legs": [{"kind": "LEG_KIND_TRAVEL", "waypointCount": 1}],
            "waypoints": [{"x": D, "y": 0.0, "stop": True}],
        },
        "options": {"gridPoints": 2000},
    }


def reference_duration(D):
    a_brake = R * A

    def motion(t, z):
        x, v = z
        return [v, R * A * (1.0 - v / (R * W_FREE))]

    def switch(t, z):  # remaining line equals the braking distance
        x, v = z
        return x + v * v / (2.0 * a_brake) - D

    switch.terminal = True
    switch.direction = 1
    sol = solve_ivp(motion, [0.0, 1e3], [0.0, 0.0], events=switch, rtol=1e-10, atol=1e-12, max_step=0.01)
    t_s = sol.t_events[0][0]
    v_s = sol.y_events[0][0][1]
    return t_s + v_s / a_brake


@pytest.mark.parametrize("D", [1.0, 6.0, 25.0])
def test_motor_curve_duration_matches_solve_ivp(D):
    plan = veer.plan(request(D))
    want = reference_duration(D)
    assert plan.duration == pytest.approx(want, rel=0.005), (plan.duration, want)


def test_no_wheel_beyond_its_curve():
    plan = veer.plan(request(25.0))
    table = plan.table(1000.0)
    rate = np.asarray(table.wheel_rate)
    accel = np.asarray(table.wheel_accel)
    driving = np.where(rate >= 0.0, accel, -accel)
    available = A * (1.0 - np.abs(rate) / W_FREE)
    assert np.all(driving <= available + 0.01 * A)
    assert np.all(np.abs(rate) <= W_FREE * 1.001)
