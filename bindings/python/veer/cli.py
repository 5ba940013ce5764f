"""The veer command line: `python3 -m veer plan|draw|table ...`."""

import argparse
import collections
import csv
import json
import math
import os
import sys

from .plan import PHASE_NAMES, Plan, PlanError
from .plan import plan as make_plan
from ._version import __version__

CAUTION = ("CAUTION: the planner is not a safety-rated function. A hardware emergency stop, the range's safety "
           "rules and its safety officer always come first. Drive every new or changed plan at low speed with "
           "nobody near the cart before it is used near people.")

INPUT_HELP = ("a scenario file (.json: a PlanRequest in the proto3 JSON mapping) or a file of Plan message "
              "bytes (as written by `plan --out`)")


def load_input(path):
    """A Plan from a scenario .json file (planned now) or from Plan bytes."""
    if str(path).lower().endswith(".json"):
        return make_plan(path)
    try:
        with open(path, "rb") as f:
            data = f.read()
    except OSError as exc:
        raise PlanError("ERR_VALUE", "cannot read %s: %s" % (path, exc.strerror or exc)) from None
    return Plan.from_bytes(data)


def summary(p, rate_hz=100.0):
    """The figures of a plan as a dict (what `plan --json` prints)."""
    drive, limits = p.drive(), p.limits()
    legs = p.legs
    kinds = {1: "travel", 2: "spin", 3: "pivot"}
    req_legs = list(p.request.route.legs)
    names = p.binding()
    cnt = collections.Counter(names)
    tab = p.table(rate_hz)
    out = {
        "status": "OK",
        "cart_id": p.cart_id,
        "drive": drive["kind"],
        "modules": p.module_count,
        "duration_s": p.duration,
        "moving_s": p.duration - sum(g.resteer_time + g.dwell_time for g in legs),
        "resteer_s": sum(g.resteer_time for g in legs),
        "dwell_s": sum(g.dwell_time for g in legs),
        "length": p.length,
        "legs": [{"leg": i, "kind": kinds.get(req_legs[i].kind, "?") if i < len(req_legs) else "?",
                  "start_s": g.start, "duration_s": g.duration, "resteer_s": g.resteer_time, "dwell_s": g.dwell_time,
                  "s_begin": g.s_begin, "s_end": g.s_end} for i, g in enumerate(legs)],
        "grid_points": len(names),
        "binding_share": {k: v / len(names) for k, v in cnt.most_common()},
        "peaks": {},
    }
    if tab.wheel_rate.size:
        i = int(abs(tab.wheel_rate).max(axis=0).argmax())
        lim = limits["modules"][i]["wheel_rate"] if i < len(limits["modules"]) else math.inf
        out["peaks"]["wheel_rate"] = {"value": float(abs(tab.wheel_rate).max()), "module": i,
                                      "limit": lim if math.isfinite(lim) else None}
    if drive["kind"] == "steered" and tab.steer_rate.size:
        i = int(abs(tab.steer_rate).max(axis=0).argmax())
        lim = limits["modules"][i]["steer_rate"]
        out["peaks"]["steer_rate"] = {"value": float(abs(tab.steer_rate).max()), "module": i,
                                      "limit": lim if math.isfinite(lim) else None}
    speed = (tab.twist_world[:, 0] ** 2 + tab.twist_world[:, 1] ** 2) ** 0.5
    out["peaks"]["body_speed"] = {"value": float(speed.max()), "limit": limits["body_speed"]
                                  if math.isfinite(limits["body_speed"]) else None}
    try:
        data = p.to_bytes()
        out["plan_bytes"] = len(data)
        out["content_hash"] = p.message.content_hash.hex()
        out["schema_version"] = p.message.schema_version
    except PlanError:
        out["plan_bytes"] = None
    out["library"] = p._lib.dll.veer_version_string().decode()
    return out


def print_summary(d, f=sys.stdout):
    w = f.write
    w("%s: %s drive, %d modules\n" % (d["cart_id"] or "(no cart id)", d["drive"], d["modules"]))
    w("  duration %.3f s (moving %.3f s, re-steer %.3f s, dwell %.3f s); path length %.3f\n"
      % (d["duration_s"], d["moving_s"], d["resteer_s"], d["dwell_s"], d["length"]))
    for g in d["legs"]:
        w("  leg %d %-6s %8.3f s -> %8.3f s  (%.3f s; re-steer %.3f s, dwell %.3f s)  s %.3f .. %.3f\n"
          % (g["leg"], g["kind"], g["start_s"], g["start_s"] + g["duration_s"], g["duration_s"], g["resteer_s"],
             g["dwell_s"], g["s_begin"], g["s_end"]))
    share = ", ".join("%s %.1f %%" % (k, 100 * v) for k, v in d["binding_share"].items())
    w("  binding limits (share of %d grid points): %s\n" % (d["grid_points"], share))
    for name, pk in d["peaks"].items():
        unit = {"wheel_rate": "rad/s", "steer_rate": "rad/s", "body_speed": "m/s"}[name]
        lim = " of %.4g" % pk["limit"] if pk.get("limit") is not None else " (no limit)"
        mod = " (module %d)" % pk["module"] if "module" in pk else ""
        w("  peak %s %.4g %s%s%s\n" % (name.replace("_", " "), pk["value"], unit, lim, mod))
    if d.get("plan_bytes") is not None:
        w("  plan message %d bytes, schema %d, content hash %s...\n"
          % (d["plan_bytes"], d["schema_version"], d["content_hash"][:16]))


def write_csv(p, rate_hz, f):
    """The setpoint table as CSV: one row per sample, SI units in the header."""
    tab = p.table(rate_hz)
    n = tab.module_count
    head = ["t_s", "phase", "leg", "s", "sdot", "sddot", "x_m", "y_m", "yaw_rad",
            "vx_world_mps", "vy_world_mps", "wz_radps", "vx_body_mps", "vy_body_mps",
            "ax_world_mps2", "ay_world_mps2", "yaw_accel_radps2"]
    for i in range(n):
        head += ["steer%d_rad" % i, "steer_rate%d_radps" % i, "wheel_rate%d_radps" % i, "wheel_accel%d_radps2" % i]
    wr = csv.writer(f, lineterminator="\n")
    wr.writerow(head)
    names = PHASE_NAMES
    for k in range(len(tab)):
        row = [tab.t[k], names.get(int(tab.phase[k]), tab.phase[k]), int(tab.leg[k]), tab.s[k], tab.sdot[k],
               tab.sddot[k], *tab.pose[k], *tab.twist_world[k], *tab.twist_body[k, :2], *tab.accel_world[k]]
        for i in range(n):
            row += [tab.steer[k, i], tab.steer_rate[k, i], tab.wheel_rate[k, i], tab.wheel_accel[k, i]]
        wr.writerow([("%.9g" % v) if isinstance(v, float) else v for v in row])
    return len(tab)


# ---- range safety checks (issue 6) ----
def _range_check(input_path, range_path):
    """(plan, RangeCheck): a scenario planned with the range's speed zones, or
    Plan bytes as they are, checked against the range file."""
    from . import range as vrange

    rng, fp = vrange.load(range_path)
    if fp is None:
        raise PlanError("ERR_VALUE", "%s has no footprint; a range file holds {\"range\": ..., \"footprint\": ...}"
                        % range_path)
    if str(input_path).lower().endswith(".json"):
        p = vrange.plan_in_range(input_path, rng, fp)
    else:
        p = load_input(input_path)
    return p, vrange.check(p, rng, fp)
# ---- end range safety checks ----


def _parser():
    ap = argparse.ArgumentParser(
        prog="python3 -m veer",
        description="Plan time-optimal trajectories for wheeled target carts, draw them and export their "
                    "setpoints. " + CAUTION,
        epilog=CAUTION)
    ap.add_argument("--version", action="version", version="veer %s" % __version__)
    sub = ap.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True

    sp = sub.add_parser("plan", help="plan a scenario file and summarise the plan", description=
                        "Plan a scenario file and print a summary (duration, legs, binding limits, peaks). " + CAUTION,
                        epilog=CAUTION)
    sp.add_argument("scenario", help="a PlanRequest in the proto3 JSON mapping (.json)")
    sp.add_argument("--json", action="store_true", help="print a machine-readable JSON summary instead")
    sp.add_argument("--out", metavar="PLAN_FILE", help="also write the Plan message bytes to this file")

    dp = sub.add_parser("draw", help="draw a plan (PNG or SVG)", description=
                        "Draw a plan: top view with footprints and module tracks, speed profile against each "
                        "limit, binding-limit band, steer angles and wheel rates over time. " + CAUTION,
                        epilog=CAUTION)
    dp.add_argument("input", help=INPUT_HELP)
    dp.add_argument("-o", "--output", required=True, help="figure file, .png or .svg")
    dp.add_argument("--title", help="figure title (default: the cart id)")
    dp.add_argument("--footprints", type=int, default=14, help="footprints drawn along the plan (default 14)")
    # ---- range safety checks (issue 6) ----
    dp.add_argument("--range", metavar="RANGE_FILE", dest="range_file",
                    help="also draw the range's areas and speed zones, the footprint sweep and the worst margin "
                         "(a range file: see `check`); a scenario is then planned with the speed zones")
    cp = sub.add_parser("check", help="check a plan against a range (areas, speed zones, braking)", description=
                        "Sweep the cart's footprint along the plan against the range's keep-in and keep-out "
                        "areas, and check the braking envelope (the controlled stop from every instant). A "
                        "scenario is planned with the range's speed zones. " + CAUTION, epilog=CAUTION)
    cp.add_argument("input", help=INPUT_HELP)
    cp.add_argument("range_file", metavar="RANGE_FILE",
                    help="the range and footprint: {\"range\": Range, \"footprint\": Footprint} in the proto3 "
                         "JSON mapping of proto/veer/v1/range.proto")
    cp.add_argument("--json", action="store_true", help="print the reports as JSON")
    # ---- end range safety checks ----

    tp = sub.add_parser("table", help="export the setpoint table as CSV", description=
                        "Export the setpoint table at a fixed rate as CSV (SI units, radians). " + CAUTION,
                        epilog=CAUTION)
    tp.add_argument("input", help=INPUT_HELP)
    tp.add_argument("--rate", type=float, default=50.0, help="rows per second (default 50)")
    tp.add_argument("-o", "--output", help="CSV file (default: standard output)")
    return ap


def console():
    """Entry point of the `veer` console script."""
    raise SystemExit(main())


def main(argv=None):
    args = _parser().parse_args(argv)
    try:
        if args.command == "plan":
            p = make_plan(args.scenario)
            if args.out:
                with open(args.out, "wb") as f:
                    f.write(p.to_bytes())
            d = summary(p)
            if args.json:
                json.dump(d, sys.stdout, indent=2)
                sys.stdout.write("\n")
            else:
                print_summary(d)
                if args.out:
                    print("  wrote %s" % args.out)
        elif args.command == "draw":
            from . import draw

            ext = os.path.splitext(args.output)[1].lower()
            if ext not in (".png", ".svg"):
                print("veer: the figure file must end in .png or .svg: %s" % args.output, file=sys.stderr)
                return 2
            # ---- range safety checks (issue 6) ----
            rc = None
            if args.range_file:
                p, rc = _range_check(args.input, args.range_file)
                print("\n".join(rc.lines()))
            else:
                p = load_input(args.input)
            draw.save(p, args.output, title=args.title, footprints=args.footprints, range_check=rc)
            # ---- end range safety checks ----
            print("wrote %s" % args.output)
        # ---- range safety checks (issue 6) ----
        elif args.command == "check":
            p, rc = _range_check(args.input, args.range_file)
            if args.json:
                json.dump(rc.to_json(), sys.stdout, indent=2)
                sys.stdout.write("\n")
            else:
                print("\n".join(rc.lines()))
                print(CAUTION)
            return 0 if rc.clear else 3
        # ---- end range safety checks ----
        elif args.command == "table":
            p = load_input(args.input)
            if args.output:
                with open(args.output, "w", newline="") as f:
                    n = write_csv(p, args.rate, f)
                print("wrote %s (%d rows at %g Hz)" % (args.output, n, args.rate))
            else:
                write_csv(p, args.rate, sys.stdout)
    except PlanError as exc:
        if getattr(args, "json", False):
            json.dump(dict(exc.to_dict(), status=exc.status), sys.stdout, indent=2)
            sys.stdout.write("\n")
        print("veer: %s" % exc, file=sys.stderr)
        return 1
    except BrokenPipeError:
        try:
            sys.stdout = open(os.devnull, "w")
        except OSError:
            pass
        return 0
    except OSError as exc:
        print("veer: %s" % exc, file=sys.stderr)
        return 1
    return 0
