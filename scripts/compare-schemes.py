#!/usr/bin/env python3
"""Run one bus under every access scheme at light and heavy load and print a
Markdown table (the comparison in the README). Usage:

    cargo build --release && python3 scripts/compare-schemes.py
"""
import json
import subprocess
import sys
import tempfile
from pathlib import Path

BINARY = Path(__file__).resolve().parent.parent / "target" / "release" / "halfwire"

BUS = """
name = "conveyor bus, {scheme}, {load}"
seed = 1
duration = "2 s"
warmup = "100 ms"

[line]
length = "12 m"
impedance = "120 ohm"
delay = "5.5 ns/m"

[transceiver]
drive_current = "11.3 mA"
enable_time = "20 ns"
disable_time = "20 ns"
receiver_delay = "15 ns"
load = "15 pF"
receiver = "type2"

[frame]
bit_rate = "2 Mbit/s"
overhead_bits = 48
interframe_gap = "1 us"

[access]
{access}

[[node]]
name = "controller"
position = "0 m"
{stations}
"""

SCHEMES = {
    "polling": 'scheme = "polling"\nmaster = "controller"\nrequest_bits = 24\nempty_reply_bits = 16\nturnaround = "200 ns"\nreply_timeout = "20 us"',
    "token": 'scheme = "token"\ntoken_bits = 24\nmax_per_token = 1\nturnaround = "200 ns"',
    "tdma": 'scheme = "tdma"\ntimekeeper = "controller"\nbeacon_bits = 24\nslot_length = "154 us"\nguard = "1 us"\norder = [{order}]',
    "aloha": 'scheme = "aloha"\nack_timeout = "2 us"\nbackoff = { mean = "2 ms" }',
    "csma (non-persistent)": 'scheme = "csma"\npersistence = "non"\nack_timeout = "2 us"\nbackoff = { mean = "1 ms" }',
    "csma/cd (1-persistent)": 'scheme = "csma"\npersistence = 1\ncollision_detect = true',
    "arbitration": 'scheme = "arbitration"\nid_bits = 11\nidle_bits = 11',
}

FRAME_S = (48 + 256) / 2e6  # 32-byte payload
LOADS = {"light (10 %)": 0.10, "heavy (60 %)": 0.60}
N = 15


def stations(rate):
    out = []
    for k in range(1, N + 1):
        out.append(
            f'[[node]]\nname = "st{k:02}"\nposition = "{0.8 * k:.1f} m"\n'
            f'traffic = {{ pattern = "poisson", rate = "{rate:.3f}/s", payload = "32 B", to = "controller", id = {0x100 + k} }}\n'
        )
    return "".join(out)


def main():
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for scheme, access in SCHEMES.items():
            for load, share in LOADS.items():
                rate = share / FRAME_S / N
                order = ", ".join(f'"st{k:02}"' for k in range(1, N + 1))
                text = BUS.format(scheme=scheme, load=load, access=access.replace("{order}", order), stations=stations(rate))
                path = Path(tmp) / "bus.toml"
                path.write_text(text)
                out = subprocess.run([str(BINARY), "run", str(path), "--format", "json"], capture_output=True, text=True)
                if out.returncode != 0:
                    sys.exit(f"{scheme} {load}: {out.stderr}")
                j = json.loads(out.stdout)
                rows.append((scheme, load, j))
    print("| scheme | load | carried | payload | p99 latency | contention events | corrupted | dropped |")
    print("|---|---|---|---|---|---|---|---|")
    for scheme, load, j in rows:
        p99 = j["latency_s"]["all"]["p99"]
        print(
            f"| {scheme} | {load} | {100 * j['throughput']['carried']:.1f} % | "
            f"{j['throughput']['payload_bit_s'] / 1e3:.0f} kbit/s | {p99 * 1e3:.3f} ms | "
            f"{j['contention']['events']} | {j['frames']['corrupted']} | {j['frames']['dropped']} |"
        )


if __name__ == "__main__":
    main()
