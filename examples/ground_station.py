#!/usr/bin/python3
"""ground_station: plans the demo scenario, sends it to a cart over the radio
link (UDP on 127.0.0.1 only, e.g. through examples/lossy_channel.py to
examples/cart_sim), starts it and watches the cart until it stands.

    ground_station.py --to 127.0.0.1:PORT --key-file KEY [--cart 4]
                      [--scenario FILE] [--frame-size 255]
                      [--heartbeat-period S] [--lose-link-after S]
                      [--hold-stopped S] [--deliver-only] [--summary FILE]
                      [--timeout S]
    ground_station.py --write-cart-config FILE [--cart 4] [--scenario FILE]
                      [--frame-size 255] [--link-timeout S] [--fit-cart]

The scenario defaults to examples/scenarios/*demo*.json. --lose-link-after S
goes silent S seconds after the start (a lost link: the cart must stop on
its own); --hold-stopped S keeps heartbeats going for S seconds after the
stop, tries a START of the same plan again, and checks that the cart stays
stopped. --write-cart-config writes the CartConfig (drive, limits, cart
name) a cart with this scenario's drive is set up with, and exits; with
--fit-cart the cart is sized for this scenario's plan (its bytes, knots,
waypoints and legs: the least cart memory, any larger plan refused). It
prints the frames and bytes it put on the air; the summary (JSON) has them
by kind, the plan's end pose and the cart's last report.

CAUTION: veer is not a safety-rated function. A hardware emergency stop, the
range's safety rules and its safety officer always come first.
"""

import argparse
import json
import pathlib
import socket
import sys
import time

HERE = pathlib.Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "bindings" / "python"))

import veer  # noqa: E402
import veer.link as vl  # noqa: E402


def default_scenario():
    found = sorted((HERE / "scenarios").glob("*demo*.json"))
    if not found:
        raise SystemExit("ground_station: no examples/scenarios/*demo*.json; give --scenario")
    return found[0]


def report_dict(r):
    return {"state": vl.state_name(r.state), "plan_id": r.plan_id, "t": r.t, "s": r.s, "sdot": r.sdot,
            "leg": r.leg, "stop_reason": vl.stop_reason_name(r.stop_reason),
            "last_rejection": vl.reason_name(r.last_rejection), "accepted_plan_id": r.accepted_plan_id,
            "pose": [r.x, r.y, r.yaw], "report_seq": r.report_seq}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--to", help="the cart (or channel) as 127.0.0.1:PORT")
    ap.add_argument("--key-file")
    ap.add_argument("--cart", type=int, default=4)
    ap.add_argument("--scenario")
    ap.add_argument("--frame-size", type=int, default=vl.FRAME_DEFAULT)
    ap.add_argument("--lose-link-after", type=float)
    ap.add_argument("--hold-stopped", type=float, default=0.0)
    ap.add_argument("--summary")
    ap.add_argument("--timeout", type=float, default=120.0)
    ap.add_argument("--deliver-only", action="store_true", help="stop once the cart has armed the plan")
    ap.add_argument("--write-cart-config")
    ap.add_argument("--link-timeout", type=float, default=1.0)
    ap.add_argument("--fit-cart", action="store_true", help="size the cart config for this scenario's plan")
    ap.add_argument("--heartbeat-period", type=float, default=0.1)
    a = ap.parse_args(argv)

    scenario = pathlib.Path(a.scenario) if a.scenario else default_scenario()
    plan = veer.plan(str(scenario))
    data = plan.to_bytes()
    if a.write_cart_config:
        with open(a.write_cart_config, "wb") as f:
            cap = vl.cart_capacity(data) if a.fit_cart else {}
            f.write(vl.cart_config(plan.request, a.cart, a.frame_size, a.link_timeout, **cap))
        return 0
    if not a.to or not a.key_file:
        ap.error("--to and --key-file are needed to talk to a cart")
    host, _, port = a.to.rpartition(":")
    if host != "127.0.0.1":
        ap.error("this example talks to 127.0.0.1 only")
    target = (host, int(port))
    link = vl.Link(a.cart, vl.read_key(a.key_file), a.frame_size)

    sock = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    sock.bind(("127.0.0.1", 0))

    def send(frame):
        sock.sendto(frame, target)

    def recv(timeout):
        sock.settimeout(max(timeout, 1e-4))
        try:
            frame, addr = sock.recvfrom(4096)
        except socket.timeout:
            return None
        return frame if addr == target else None

    def log(msg):
        print("ground_station: " + msg, flush=True)

    session = vl.Session(link, send, recv, log=log)
    end = plan.sample(plan.duration)
    log("%s: %.2f s, %d Plan bytes, cart %d" % (scenario.name, plan.duration, len(data), a.cart))
    t0 = time.monotonic()
    plan_id = session.deliver(data, timeout=a.timeout)
    delivery = session.stats.as_dict()
    t_armed = time.monotonic() - t0
    log("plan %d armed after %.2f s: %d frames (%d bytes) sent, %d received" % (
        plan_id, t_armed, delivery["frames_sent"], delivery["bytes_sent"], delivery["frames_received"]))
    summary = {"scenario": scenario.name, "plan_id": plan_id, "plan_bytes": len(data),
               "chunks": session.link.sender(plan_id, data).count, "plan_duration": plan.duration,
               "plan_end_pose": [float(v) for v in end.pose], "seconds_to_arm": t_armed, "delivery": delivery}
    if a.deliver_only:
        if a.summary:
            with open(a.summary, "w") as f:
                json.dump(summary, f, indent=1)
        return 0
    r = session.start(plan_id, timeout=a.timeout)
    log("started: %s" % vl.state_name(r.state))
    lose = a.lose_link_after

    def silent(t):
        return lose is not None and t >= lose

    final = session.watch(lambda rep: rep.plan_id == plan_id and rep.state in (vl.STOPPED, vl.FAULT),
                          timeout=a.timeout + plan.duration, heartbeat_period=a.heartbeat_period, silent=silent)
    log("cart %s: %s at s = %.3f" % (vl.state_name(final.state), vl.stop_reason_name(final.stop_reason), final.s))
    held = None
    if a.hold_stopped > 0:
        seen = session.hold(a.hold_stopped, a.heartbeat_period)
        # A START of the spent plan must change nothing. Sent three times, as
        # an operator would retry: the radio may lose any one frame.
        after = []
        for _ in range(3):
            session.command(vl.START, plan_id)
            after += session.hold(0.4, a.heartbeat_period)
        seen = [report_dict(r) for r in seen + after]
        held = {"reports": len(seen), "states": sorted({s["state"] for s in seen}),
                "stop_reasons": sorted({s["stop_reason"] for s in seen}),
                "poses": [seen[0]["pose"], seen[-1]["pose"]] if seen else [],
                "last_rejection": seen[-1]["last_rejection"] if seen else None,
                # what the cart refused after the STARTs (a corrupted frame
                # on the way shows up here too, as TRUNCATED or CRC)
                "rejections_after_start": sorted({report_dict(r)["last_rejection"] for r in after})}
        log("held %.1f s after the stop: %d reports, states %s" % (a.hold_stopped + 1.2, len(seen),
                                                                 ", ".join(held["states"])))
    stats = session.stats.as_dict()
    log("frames on the air from the ground: %d (%d bytes); from the cart: %d (%d bytes)" % (
        stats["frames_sent"], stats["bytes_sent"], stats["frames_received"], stats["bytes_received"]))
    summary.update({"total": stats, "final": report_dict(final), "held": held})
    if a.summary:
        with open(a.summary, "w") as f:
            json.dump(summary, f, indent=1)
    return 0


if __name__ == "__main__":
    sys.exit(main())
