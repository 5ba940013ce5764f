#!/usr/bin/python3
"""lossy_channel: a bad radio between a ground station and a cart, over UDP
on 127.0.0.1 only.

    lossy_channel.py --cart-port PORT [--port 0] [--drop 0.3] [--duplicate 0.05]
                     [--reorder 0.2] [--reorder-delay 0.08] [--corrupt 0.01]
                     [--seed 1] [--stats FILE]

The ground station sends to this program's port; it forwards every frame to
the cart at 127.0.0.1:PORT and the cart's answers back to whoever sent the
last frame. Each frame, in both directions, is dropped with probability
--drop; otherwise it is corrupted (one to three bits flipped, or cut short)
with probability --corrupt, held back by up to --reorder-delay seconds with
probability --reorder (so later frames overtake it), and sent twice with
probability --duplicate. One seeded random generator drives all of it, so a
run repeats with the same seed (the frames' timing still varies). The first
line on stdout is "lossy_channel: listening on 127.0.0.1:PORT"; on SIGTERM
or SIGINT it writes its counts (JSON) to --stats or stdout.
"""

import argparse
import heapq
import json
import random
import selectors
import signal
import socket
import sys
import time

LOOPBACK = "127.0.0.1"


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--cart-port", type=int, required=True)
    ap.add_argument("--port", type=int, default=0)
    ap.add_argument("--drop", type=float, default=0.0)
    ap.add_argument("--duplicate", type=float, default=0.0)
    ap.add_argument("--reorder", type=float, default=0.0)
    ap.add_argument("--reorder-delay", type=float, default=0.08)
    ap.add_argument("--corrupt", type=float, default=0.0)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--stats")
    a = ap.parse_args(argv)
    for name in ("drop", "duplicate", "reorder", "corrupt"):
        v = getattr(a, name)
        if not 0.0 <= v <= 1.0:
            ap.error("--%s must be a probability in [0, 1], got %r" % (name, v))
    if not 0.0 <= a.reorder_delay <= 10.0:
        ap.error("--reorder-delay must be 0..10 s")

    rng = random.Random(a.seed)
    ground = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    ground.bind((LOOPBACK, a.port))
    cart = socket.socket(socket.AF_INET, socket.SOCK_DGRAM)
    cart.bind((LOOPBACK, 0))
    cart_addr = (LOOPBACK, a.cart_port)
    print("lossy_channel: listening on %s:%d" % ground.getsockname(), flush=True)

    counts = {d: {"in": 0, "dropped": 0, "corrupted": 0, "truncated": 0, "delayed": 0, "duplicated": 0, "out": 0,
                  "bytes_out": 0} for d in ("to_cart", "to_ground")}
    queue = []  # (due, order, direction, bytes)
    order = [0]
    ground_addr = [None]
    stop = [False]

    def on_signal(sig, frame):
        stop[0] = True

    signal.signal(signal.SIGTERM, on_signal)
    signal.signal(signal.SIGINT, on_signal)

    def impair(direction, data):
        c = counts[direction]
        c["in"] += 1
        if rng.random() < a.drop:
            c["dropped"] += 1
            return
        if rng.random() < a.corrupt:
            data = bytearray(data)
            if rng.random() < 0.25 and len(data) > 1:
                data = data[:rng.randrange(1, len(data))]
                c["truncated"] += 1
            else:
                for _ in range(rng.randint(1, 3)):
                    i = rng.randrange(len(data) * 8)
                    data[i // 8] ^= 1 << (i % 8)
                c["corrupted"] += 1
            data = bytes(data)
        copies = 2 if rng.random() < a.duplicate else 1
        if copies == 2:
            c["duplicated"] += 1
        now = time.monotonic()
        for _ in range(copies):
            delay = 0.001
            if rng.random() < a.reorder:
                delay += rng.uniform(0.0, a.reorder_delay)
                c["delayed"] += 1
            order[0] += 1
            heapq.heappush(queue, (now + delay, order[0], direction, data))

    sel = selectors.DefaultSelector()
    sel.register(ground, selectors.EVENT_READ, "to_cart")
    sel.register(cart, selectors.EVENT_READ, "to_ground")
    while not stop[0]:
        timeout = max(0.0, queue[0][0] - time.monotonic()) if queue else 0.2
        try:
            events = sel.select(timeout)
        except InterruptedError:
            continue
        for key, _ in events:
            try:
                data, addr = key.fileobj.recvfrom(4096)
            except OSError:
                continue
            if addr[0] != LOOPBACK:
                continue
            if key.data == "to_cart":
                ground_addr[0] = addr
            elif addr != cart_addr:
                continue
            impair(key.data, data)
        now = time.monotonic()
        while queue and queue[0][0] <= now:
            _, _, direction, data = heapq.heappop(queue)
            target, sock = (cart_addr, cart) if direction == "to_cart" else (ground_addr[0], ground)
            if target is None:
                continue
            try:
                sock.sendto(data, target)
                counts[direction]["out"] += 1
                counts[direction]["bytes_out"] += len(data)
            except OSError:
                pass
    out = json.dumps({"seed": a.seed, "rates": {"drop": a.drop, "duplicate": a.duplicate, "reorder": a.reorder,
                                                "corrupt": a.corrupt}, "counts": counts}, indent=1)
    if a.stats:
        with open(a.stats, "w") as f:
            f.write(out + "\n")
    else:
        print(out, flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
