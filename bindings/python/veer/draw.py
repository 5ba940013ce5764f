"""The design-review figure of a plan (matplotlib, Agg backend; PNG or SVG).

Left: the top view of the path, coloured by the binding limit, with each
module's track and the cart's footprint at intervals. Right: the speed
profile against the curve each limit allows, a band of the binding limit
along the path, the steer angles (or, for fixed-wheel carts, the body twist)
and the wheel rates over time against their limits."""

import math
import os

import matplotlib

if os.environ.get("MPLBACKEND") is None:
    matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.collections import LineCollection  # noqa: E402
from matplotlib.patches import Patch, Polygon  # noqa: E402

from . import kinematics  # noqa: E402
from ._version import __version__  # noqa: E402

COLOURS = {
    "none": "#c8c8c8",
    "wheel_speed": "#1f77b4",
    "wheel_accel": "#ff7f0e",
    "steer_rate": "#d62728",
    "steer_range": "#e377c2",
    "body_speed": "#2ca02c",
    "body_accel": "#bcbd22",
    "yaw_rate": "#9467bd",
    "yaw_accel": "#8c564b",
    "no_sideways_motion": "#000000",
    "stop_at_end": "#17becf",
    "speed_zone": "#393b79",
    "traction": "#843c39",
    "motor_curve": "#e7969c",
    "module_out": "#7f7f7f",
    "start_state": "#637939",
    "body_jerk": "#ce6dbd",
    "wheel_jerk": "#9c9ede",
}
LABELS = {
    "none": "none (rest)",
    "wheel_speed": "wheel speed",
    "wheel_accel": "wheel acceleration",
    "steer_rate": "steer rate",
    "steer_range": "steer range",
    "body_speed": "body speed",
    "body_accel": "body acceleration",
    "yaw_rate": "yaw rate",
    "yaw_accel": "yaw acceleration",
    "no_sideways_motion": "no sideways motion",
    "stop_at_end": "stop at end",
    "speed_zone": "speed zone",
    "traction": "traction",
    "motor_curve": "motor curve",
    "module_out": "module out",
    "start_state": "start state",
    "body_jerk": "body jerk",
    "wheel_jerk": "wheel jerk",
}
MODULE_COLOURS = ["#4c4c4c", "#7a3b8f", "#b35806", "#1b7837", "#2166ac", "#b2182b", "#8c6d31", "#35978f"]
DRIVE_TITLES = {"steered": "steered modules", "mecanum": "mecanum wheels", "omni": "omni wheels",
                "differential": "differential / skid steer"}
MODULE_WORD = {"steered": "module", "mecanum": "wheel", "omni": "wheel", "differential": "side"}
LEG_KIND_NAMES = {1: "travel", 2: "spin", 3: "pivot"}


def kind_of(name):
    return name.split("[")[0]


def footprint(drive):
    """Outline of the cart in the body frame: the modules' bounding box
    widened by a wheel radius and a margin (the schema has no body outline)."""
    pos = kinematics.module_positions(drive)
    pad = max(drive["wheel_radius"] * 1.3, 0.06)
    if drive["kind"] == "differential":
        half_len = max(0.5 * drive["track_width"], 2 * pad)
        x0, x1 = -half_len, half_len
    else:
        x0, x1 = pos[:, 0].min() - pad, pos[:, 0].max() + pad
    y0, y1 = pos[:, 1].min() - pad, pos[:, 1].max() + pad
    if x1 - x0 < 0.2:
        x0, x1 = -0.1 + x0, 0.1 + x1
    box = np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]])
    L = x1 - x0
    nose = np.array([[x1 - 0.3 * L, 0.3 * y0], [x1, 0.0], [x1 - 0.3 * L, 0.3 * y1]])  # front marker, inside
    return box, nose


def _to_world(pose, pts):
    c, s = math.cos(pose[2]), math.sin(pose[2])
    return np.column_stack([pose[0] + c * pts[:, 0] - s * pts[:, 1], pose[1] + s * pts[:, 0] + c * pts[:, 1]])


def _shade_phases(ax, tab):
    """Re-steer phases and dwells as background spans over time."""
    for code, colour, label in ((1, "#fdd9a0", "re-steer"), (3, "#e2e2e2", "dwell")):
        on = tab.phase == code
        if not on.any():
            continue
        edges = np.flatnonzero(np.diff(np.concatenate([[0], on.astype(int), [0]])))
        for a, b in zip(edges[::2], edges[1::2]):
            ax.axvspan(tab.t[a], tab.t[min(b, len(tab.t) - 1)], color=colour, lw=0, zorder=0, label=label)
            label = None


def _leg_marks(ax, legs, key, top_label=True):
    for i, leg in enumerate(legs):
        x = leg.start if key == "t" else leg.s_begin
        if i:
            ax.axvline(x, color="#888888", lw=0.7, ls=":", zorder=1)
        if top_label:
            ax.text(x, 0.985, " leg %d" % i, transform=ax.get_xaxis_transform(), fontsize=7, color="#555555",
                    va="top", ha="left")


def figure(plan, title=None, footprints=14, rate_hz=None, range_check=None):
    """The figure of a plan (a matplotlib Figure; save it with savefig).
    range_check (a veer.range.RangeCheck) adds the range's areas, speed
    zones, the footprint sweep and the worst margin to the top view."""
    drive, limits = plan.drive(), plan.limits()
    req = plan.request
    kind = drive["kind"]
    n_mod = plan.module_count
    word = MODULE_WORD.get(kind, "module")
    s, sdot = plan.profile()
    binding = plan.binding()
    bkinds = [kind_of(b) for b in binding]
    q, dq, ddq = plan.path_at(s)
    sides = req.options.accel_polygon_sides if req.options.HasField("accel_polygon_sides") else 32
    curves = kinematics.by_kind(kinematics.limit_curves(drive, limits, q, dq, ddq, polygon_sides=sides))
    dur = plan.duration
    if rate_hz is None:
        rate_hz = max(10.0, min(200.0, 1500.0 / max(dur, 1e-3)))
    tab = plan.table(rate_hz)
    legs = plan.legs

    fig = plt.figure(figsize=(17, 10.5), dpi=100)
    gs = fig.add_gridspec(4, 2, width_ratios=[1.05, 1.0], height_ratios=[3.0, 0.32, 2.0, 2.0],
                          left=0.05, right=0.985, top=0.9, bottom=0.08, wspace=0.14, hspace=0.55)
    ax_top = fig.add_subplot(gs[:, 0])
    ax_prof = fig.add_subplot(gs[0, 1])
    ax_band = fig.add_subplot(gs[1, 1], sharex=ax_prof)
    ax_steer = fig.add_subplot(gs[2, 1])
    ax_wheel = fig.add_subplot(gs[3, 1], sharex=ax_steer)

    # ---- top view ----
    ax = ax_top
    pts = q[:, :2]
    segs = np.stack([pts[:-1], pts[1:]], axis=1)
    keep = np.hypot(*(segs[:, 1] - segs[:, 0]).T) > 0
    seg_kind = [bkinds[k] if bkinds[k] != "none" else bkinds[k + 1] for k in range(len(pts) - 1)]
    cols = [COLOURS.get(seg_kind[k], "#000000") for k in range(len(segs))]
    ax.add_collection(LineCollection(segs[keep], colors=np.array(cols, dtype=object)[keep], linewidths=6.0,
                                     alpha=0.55, capstyle="round", zorder=2))
    mpos = kinematics.module_positions(drive)
    for i, rb in enumerate(mpos):
        c, sn = np.cos(tab.pose[:, 2]), np.sin(tab.pose[:, 2])
        wx = tab.pose[:, 0] + c * rb[0] - sn * rb[1]
        wy = tab.pose[:, 1] + sn * rb[0] + c * rb[1]
        ax.plot(wx, wy, lw=0.8, color=MODULE_COLOURS[i % len(MODULE_COLOURS)], zorder=3,
                label="%s %d track" % (word, i))
    ax.plot(tab.pose[:, 0], tab.pose[:, 1], lw=0.8, ls="--", color="#222222", zorder=3, label="body origin")
    box, nose = footprint(drive)
    times = np.linspace(0.0, dur, max(2, int(footprints)))
    for j, t in enumerate(times):
        pose = plan.sample(float(t)).pose
        edge = "#1a9850" if j == 0 else ("#d73027" if j == len(times) - 1 else "#555555")
        ax.add_patch(Polygon(_to_world(pose, box), closed=True, fill=False, ec=edge, lw=1.1 if j in (0, len(times) - 1)
                             else 0.6, zorder=4))
        ax.add_patch(Polygon(_to_world(pose, nose), closed=True, fc=edge, ec="none", alpha=0.45, zorder=4))
        if j % 2 == 0 or j == len(times) - 1:
            tip = _to_world(pose, nose[1:2])[0]
            ax.annotate("%.1f s" % t, tip, xytext=(3, -9), textcoords="offset points", fontsize=6, color=edge,
                        zorder=6)
    # waypoints, pivot and toward points
    wps = list(req.route.waypoints)
    span = np.ptp(pts, axis=0).max() if len(pts) > 1 else 1.0
    lo, hi = pts.min(axis=0) - 0.15 * span - 1.0, pts.max(axis=0) + 0.15 * span + 1.0
    w_idx = 0
    for li, leg in enumerate(req.route.legs):
        if leg.kind == 1:
            for k in range(leg.waypoint_count):
                if w_idx + k >= len(wps):
                    break
                wp = wps[w_idx + k]
                stop = wp.stop or k == leg.waypoint_count - 1
                ax.plot(wp.x, wp.y, "s" if stop else "o", ms=6 if stop else 4, mfc="white" if not stop else "#333333",
                        mec="#333333", zorder=5)
                lab = "w%d" % (w_idx + k) + (" stop" if stop else "") + (" +%.1f s" % wp.dwell if wp.dwell else "")
                ax.annotate(lab, (wp.x, wp.y), xytext=(5, 5), textcoords="offset points", fontsize=7, color="#333333")
            w_idx += leg.waypoint_count
            if leg.heading == 3:
                tp = np.array([leg.toward_x, leg.toward_y])
                if np.all(tp >= lo) and np.all(tp <= hi):
                    ax.plot(*tp, marker="*", ms=12, color="#d62728", zorder=5)
                    ax.annotate("faces (%.1f, %.1f)" % tuple(tp), tp, xytext=(6, -10), textcoords="offset points",
                                fontsize=8, color="#d62728")
                else:
                    c0 = pts.mean(axis=0)
                    d = (tp - c0) / np.linalg.norm(tp - c0)
                    a0 = c0 + d * 0.25 * span
                    ax.annotate("leg %d faces (%.1f, %.1f)" % (li, tp[0], tp[1]), xy=a0 + d * 0.12 * span, xytext=a0,
                                arrowprops=dict(arrowstyle="->", color="#d62728"), fontsize=8, color="#d62728",
                                ha="center", zorder=6)
        elif leg.kind == 3:
            ax.plot(leg.pivot_x, leg.pivot_y, marker="P", ms=9, color="#6a3d9a", zorder=5)
            ax.annotate("pivot (leg %d)" % li, (leg.pivot_x, leg.pivot_y), xytext=(6, -12), textcoords="offset points",
                        fontsize=8, color="#6a3d9a")
    # ---- range safety checks (issue 6): drawn by veer.range ----
    if range_check is not None:
        range_check.draw_top(ax)
    # ---- end range safety checks ----
    ax.set_aspect("equal", adjustable="datalim")
    ax.autoscale_view()
    ax.grid(True, lw=0.4, alpha=0.5)
    ax.set_xlabel("x (m), range frame")
    ax.set_ylabel("y (m)")
    ax.set_title("Top view: path coloured by binding limit, %s tracks, footprint every %.2f s"
                 % (word, dur / max(len(times) - 1, 1)), fontsize=10)
    present = [k for k in COLOURS if k in set(bkinds)]
    handles = [Patch(color=COLOURS[k], alpha=0.7, label=LABELS[k]) for k in present]
    h2, l2 = ax.get_legend_handles_labels()
    leg1 = ax.legend(handles=handles, title="binding limit", loc="upper left", fontsize=7, title_fontsize=8,
                     framealpha=0.85)
    ax.add_artist(leg1)
    ax.legend(h2, l2, loc="lower right", fontsize=7, framealpha=0.85)
    rows = ["leg  kind    start    time  re-steer  dwell"]
    for i, lg in enumerate(legs):
        lk = LEG_KIND_NAMES.get(req.route.legs[i].kind, "?") if i < len(req.route.legs) else "?"
        rows.append("%3d  %-6s %6.2f  %6.2f  %8.2f  %5.2f" % (i, lk, lg.start, lg.duration, lg.resteer_time,
                                                            lg.dwell_time))
    ax.text(0.99, 0.99, "\n".join(rows), transform=ax.transAxes, ha="right", va="top", family="monospace",
            fontsize=7, bbox=dict(boxstyle="round", fc="white", ec="#999999", alpha=0.9), zorder=7)

    # ---- speed profile against each limit's curve ----
    ax = ax_prof
    ymax = 1.35 * max(float(np.max(sdot)), 1e-6)
    for k, c in curves.items():
        if not np.any(np.isfinite(c)):
            continue
        ax.plot(s, np.minimum(c, 10 * ymax), ls="--", lw=1.1, color=COLOURS.get(k, "#000000"),
                label="%s allows" % LABELS.get(k, k))
    ax.plot(s, sdot, color="black", lw=2.0, label="plan: sdot")
    ax.set_ylim(0.0, ymax)
    ax.set_xlim(s[0], s[-1])
    ax.set_ylabel("sdot (s units / s)")
    ax.set_title("Speed along the path against the speed each limit allows", fontsize=10)
    ax.grid(True, lw=0.4, alpha=0.5)
    ax.legend(loc="upper right", fontsize=7, ncol=2, framealpha=0.85)
    _leg_marks(ax, legs, "s")
    plt.setp(ax.get_xticklabels(), visible=False)

    # ---- binding band ----
    ax = ax_band
    for k in range(len(s) - 1):
        if s[k + 1] > s[k]:
            ax.axvspan(s[k], s[k + 1], color=COLOURS.get(seg_kind[k], "#000000"), lw=0, alpha=0.85)
    ax.set_yticks([])
    ax.set_ylabel("binding", rotation=0, ha="right", va="center", fontsize=8)
    ax.set_xlabel("path position s (m on travel legs, rad on spin and pivot legs)", fontsize=8, labelpad=1)
    _leg_marks(ax, legs, "s", top_label=False)

    # ---- steer angles or body twist over time ----
    ax = ax_steer
    _shade_phases(ax, tab)
    if kind == "steered":
        for i in range(n_mod):
            ax.plot(tab.t, np.degrees(tab.steer[:, i]), color=MODULE_COLOURS[i % len(MODULE_COLOURS)], lw=1.1,
                    label="module %d" % i)
        ax.set_ylabel("steer (deg, from body x)")
        srates = [m["steer_rate"] for m in limits["modules"]]
        ttl = "Steer angles over time"
        if srates and all(math.isfinite(v) for v in srates):
            ttl += " (steer rate limit %.3g rad/s)" % min(srates)
            peak = np.max(np.abs(tab.steer_rate)) if tab.steer_rate.size else 0.0
            ttl += ", peak %.3g rad/s" % peak
        ax.set_title(ttl, fontsize=10)
    else:
        ax.plot(tab.t, tab.twist_body[:, 0], color="#1f77b4", lw=1.1, label="vx (m/s)")
        ax.plot(tab.t, tab.twist_body[:, 1], color="#2ca02c", lw=1.1, label="vy (m/s)")
        ax.plot(tab.t, tab.twist_body[:, 2], color="#9467bd", lw=1.1, label="wz (rad/s)")
        ax.set_ylabel("body twist")
        ax.set_title("Body twist over time (%s: fixed wheel directions)" % DRIVE_TITLES.get(kind, kind), fontsize=10)
    ax.grid(True, lw=0.4, alpha=0.5)
    ax.legend(loc="best", fontsize=7, ncol=4, framealpha=0.85)
    _leg_marks(ax, legs, "t")
    plt.setp(ax.get_xticklabels(), visible=False)

    # ---- wheel rates over time ----
    ax = ax_wheel
    _shade_phases(ax, tab)
    for i in range(n_mod):
        ax.plot(tab.t, tab.wheel_rate[:, i], color=MODULE_COLOURS[i % len(MODULE_COLOURS)], lw=1.1,
                label="%s %d" % (word, i))
    wr = [m["wheel_rate"] for m in limits["modules"]]
    if wr and all(math.isfinite(v) for v in wr):
        lim = min(wr)
        ax.axhline(lim, color=COLOURS["wheel_speed"], ls="--", lw=1.0, label="wheel rate limit")
        ax.axhline(-lim, color=COLOURS["wheel_speed"], ls="--", lw=1.0)
    ax.set_ylabel("wheel rate (rad/s)")
    ax.set_xlabel("time (s)")
    ax.set_xlim(0.0, dur)
    ax.grid(True, lw=0.4, alpha=0.5)
    peak = float(np.max(np.abs(tab.wheel_rate))) if tab.wheel_rate.size else 0.0
    ax.set_title("Wheel rates over time (peak %.3g rad/s); shaded: re-steer and dwell phases" % peak, fontsize=10)
    ax.legend(loc="best", fontsize=7, ncol=5, framealpha=0.85)
    _leg_marks(ax, legs, "t", top_label=False)

    name = title or plan.cart_id or "plan"
    fig.suptitle("%s: %s, %d %ss; %.2f s over %.2f path units in %d legs"
                 % (name, DRIVE_TITLES.get(kind, kind), n_mod, word, dur, plan.length, len(legs)),
                 fontsize=13, x=0.05, ha="left")
    info = "veer %s" % __version__
    try:
        data = plan.to_bytes()
        info += ", plan message %d bytes" % len(data)
        if plan.message is not None and plan.message.content_hash:
            info += ", content hash %s..." % plan.message.content_hash[:6].hex()
    except Exception:
        pass
    fig.text(0.05, 0.935, info + "; grid %d points" % len(s), fontsize=8, color="#555555", ha="left")
    fig.text(0.05, 0.012, "CAUTION: the planner is not a safety-rated function. A hardware emergency stop, the "
             "range's safety rules and its safety officer always come first.", fontsize=8, color="#a50026", ha="left")
    return fig


def save(plan, path, **kw):
    """Draws plan into path (.png or .svg, by the file name). Returns path."""
    ext = os.path.splitext(str(path))[1].lower()
    if ext not in (".png", ".svg"):
        raise ValueError("the figure's file name must end in .png or .svg, got %r" % str(path))
    fig = figure(plan, **kw)
    try:
        fig.savefig(path, dpi=110 if ext == ".png" else None)
    finally:
        plt.close(fig)
    return path
