#!/usr/bin/env python3
"""halfwire against a hand-written SimPy model of the same polling workload
(benches/simpy/polling.toml and model.py): simulated seconds per wall second
of each, as whole processes, run in turn, and their ratio.

SimPy comes from the Python package registry, installed by this script into
a virtual environment beside it (benches/simpy/.venv, not committed).

Usage: python3 benches/simpy/compare.py [--load 0.5] [--seconds 20] [--runs 3]
The halfwire binary is $HALFWIRE, else ${CARGO_TARGET_DIR:-target}/release/halfwire
(build it first: cargo build --release).
"""

import argparse
import json
import os
import statistics
import subprocess
import sys
import time
import venv

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
# One exchange with data: 64 µs poll + 10 µs + 256 µs reply + 10 µs.
CAPACITY_PER_S = 1 / 340e-6
SLAVES = 16
SIMPY = "simpy==4.1.1"


def python_with_simpy():
    env_dir = os.path.join(HERE, ".venv")
    py = os.path.join(env_dir, "bin", "python")
    if not os.path.exists(py):
        print(f"creating {env_dir} and installing {SIMPY} from the package registry", file=sys.stderr)
        venv.create(env_dir, with_pip=True)
        subprocess.run([py, "-m", "pip", "install", "--quiet", SIMPY], check=True)
    return py


def timed(cmd):
    start = time.perf_counter()
    out = subprocess.run(cmd, check=True, capture_output=True, text=True).stdout
    return time.perf_counter() - start, out


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--load", type=float, default=0.5, help="offered load as a share of the polling capacity")
    ap.add_argument("--seconds", type=float, default=20.0, help="simulated seconds per run")
    ap.add_argument("--runs", type=int, default=3, help="runs of each, in turn")
    ap.add_argument("--seed", type=int, default=1)
    a = ap.parse_args()
    target = os.environ.get("CARGO_TARGET_DIR", os.path.join(ROOT, "target"))
    halfwire = os.environ.get("HALFWIRE", os.path.join(target, "release", "halfwire"))
    if not os.path.exists(halfwire):
        sys.exit(f"{halfwire}: not found; build it with cargo build --release (or set HALFWIRE)")
    py = python_with_simpy()
    rate = a.load * CAPACITY_PER_S / SLAVES
    scenario = os.path.join(HERE, "polling.toml")
    hw_cmd = [
        halfwire, "run", scenario, "--format", "json", "--duration", f"{a.seconds} s",
        "--seed", str(a.seed), "--set", f"nodes.traffic.rate=\"{rate:.6f}/s\"",
    ]
    sp_cmd = [py, os.path.join(HERE, "model.py"), str(a.seconds), str(rate), str(a.seed)]
    hw_times, sp_times, ratios = [], [], []
    for _ in range(a.runs):
        t_hw, out_hw = timed(hw_cmd)
        t_sp, out_sp = timed(sp_cmd)
        hw_times.append(t_hw)
        sp_times.append(t_sp)
        ratios.append(t_sp / t_hw)
    r = json.loads(out_hw)
    s = json.loads(out_sp)
    print(f"workload: 16 slaves, 1 Mbit/s, load {a.load} ({rate:.2f} messages/s per slave), {a.seconds} s simulated")
    print(f"  halfwire: {r['frames']['delivered']} delivered, mean latency {r['latency_s']['all']['mean'] * 1e6:.1f} us, "
          f"{r['scheme']['polls']} polls")
    print(f"  SimPy:    {s['delivered']} delivered, mean latency {s['mean_latency_s'] * 1e6:.1f} us, {s['polls']} polls")
    med = statistics.median
    print(f"  wall s (median of {a.runs}, whole process): halfwire {med(hw_times):.3f}, SimPy {med(sp_times):.3f}")
    print(f"  simulated s per wall s: halfwire {a.seconds / med(hw_times):.1f}, SimPy {a.seconds / med(sp_times):.2f}")
    print(f"  halfwire / SimPy speed: {med(ratios):.1f}x (median of pairs; range {min(ratios):.1f}-{max(ratios):.1f})")


if __name__ == "__main__":
    main()
