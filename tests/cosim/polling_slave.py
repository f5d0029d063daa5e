#!/usr/bin/env python3
"""A polling slave for `halfwire cosim`, in plain Python (standard library only).

It follows the built-in polling slave's rules: answer every intact poll, unless
the previous reply still holds the enable, after turnaround + response latency,
with up to max_per_poll queued messages or else an empty reply.

    python3 tests/cosim/polling_slave.py 127.0.0.1:7400 slave02 [--jitter-ms X] [--seed N]

--jitter-ms sleeps a random wall-clock time (0..X ms) before every answer, to
show that results do not depend on how fast a client answers.
"""
import argparse
import json
import random
import socket
import sys
import time


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("addr")
    ap.add_argument("node")
    ap.add_argument("--jitter-ms", type=float, default=0.0)
    ap.add_argument("--seed", type=int, default=None)
    a = ap.parse_args()
    rng = random.Random(a.seed)
    host, port = a.addr.rsplit(":", 1)
    sock = socket.create_connection((host, int(port)))
    sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
    rx = sock.makefile("r", encoding="utf-8")
    tx = sock.makefile("w", encoding="utf-8")

    def send(msg):
        tx.write(json.dumps(msg) + "\n")
        tx.flush()

    send({"type": "hello", "protocol": "halfwire-cosim/1", "node": a.node})
    welcome = json.loads(rx.readline())
    if welcome["type"] != "welcome":
        sys.exit("refused: " + welcome.get("message", ""))
    turnaround = welcome.get("turnaround_ps", 0)
    latency = welcome.get("response_latency_ps", 0)
    limit = welcome.get("max_per_poll", 1)
    empty_bits = welcome.get("empty_reply_bits", 16)
    for line in rx:
        msg = json.loads(line)
        if msg["type"] == "bye":
            return
        if msg["type"] == "error":
            sys.exit("halfwire: " + msg["message"])
        t, queued, busy_until = msg["t_ps"], msg["queued"], msg["busy_until_ps"]
        if a.jitter_ms:
            time.sleep(rng.uniform(0, a.jitter_ms) / 1000.0)
        for ev in msg["events"]:
            if ev["event"] != "frame" or ev["kind"] != "poll" or ev["corrupted"] or t < busy_until:
                continue
            take = queued if limit == 0 else min(queued, limit)
            frames = [{"kind": "data"}] * take or [{"kind": "empty-reply", "bits": empty_bits}]
            send({"type": "transmit", "at_ps": t + turnaround + latency, "frames": frames})
        send({"type": "wait"})


if __name__ == "__main__":
    main()
