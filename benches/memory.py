#!/usr/bin/env python3
"""Peak memory of halfwire runs, whole process (the child's maximum resident set).

Memory should be set by the scenario when a run starts, not by how long it runs.
For every demo in scenarios/ this runs the scenario at its own duration and at
ten times it, and prints both peaks and their ratio. With --large it also runs
the reference bus of benches/reference-polling.toml grown to 4096 nodes (4095
slaves at 20 messages/s on 410 m) for 3 s simulated.

    cargo build --release
    python3 benches/memory.py [--bin target/release/halfwire] [--large]

Needs GNU time (/usr/bin/time); peaks in KiB as it reports them.
"""

import argparse
import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
TIME = shutil.which("time", path="/usr/bin:/bin") or sys.exit("needs GNU time (/usr/bin/time), e.g. apt install time")


def peak_kib(cmd):
    """Run `cmd` with its output discarded; return its peak resident set (KiB).

    Measured by GNU time (`/usr/bin/time -f %M`): a child forked from this
    Python process would carry Python's own resident set into its peak.
    """
    with tempfile.NamedTemporaryFile("r") as out:
        p = subprocess.run([TIME, "-f", "%M", "-o", out.name] + cmd, stdout=subprocess.DEVNULL,
                           stderr=subprocess.PIPE, text=True)
        if p.returncode != 0:
            sys.exit(f"{' '.join(cmd)} failed (status {p.returncode}):\n{p.stderr}")
        return int(out.read().split()[-1])


def duration_of(path):
    m = re.search(r'^duration\s*=\s*"([0-9.]+)\s*([a-zA-Zµ]+)"', path.read_text(), re.M)
    if not m:
        sys.exit(f"{path}: no top-level duration")
    return float(m.group(1)), m.group(2)


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--bin", default=str(ROOT / "target/release/halfwire"))
    ap.add_argument("--large", action="store_true", help="also the 4096-node polling bus, 3 s (a few minutes)")
    args = ap.parse_args()
    print(f"{'scenario':28} {'duration':>10} {'peak':>10} {'x10':>10} {'peak':>10} {'ratio':>6}")
    for path in sorted((ROOT / "scenarios").glob("*.toml")):
        value, unit = duration_of(path)
        short, long = f"{value:g} {unit}", f"{value * 10:g} {unit}"
        run = [args.bin, "run", str(path), "--quiet", "--duration"]
        a, b = peak_kib(run + [short]), peak_kib(run + [long])
        print(f"{path.stem:28} {short:>10} {a / 1024:8.1f}MB {long:>10} {b / 1024:8.1f}MB {b / a:6.2f}")
    if args.large:
        large = [
            args.bin, "run", str(ROOT / "benches/reference-polling.toml"), "--quiet",
            "--set", "nodes.count=4095", "--set", 'line.length="410 m"',
            "--set", 'nodes.traffic.rate="20/s"',
        ]
        for d in ["10 ms", "100 ms", "3 s"]:
            print(f"{'4096-node polling':28} {d:>10} {peak_kib(large + ['--duration', d]) / 1024:8.1f}MB", flush=True)


if __name__ == "__main__":
    main()
