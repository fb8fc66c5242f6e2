"""bin_cp on a long 16-tap record: turns from one encoder unwrap against one unwrap per tap.

    python benchmarks/bench_bin_cp.py [--seconds 20] [--rate 1000] [--taps 16] [--rounds 7]

Both ways give the same bins (tests/test_pressure.py checks 1e-12); this measures what the
reduction saves by counting the taps' revolutions from the encoder (pressure.tap_azimuths) and
numbering the passes in one scan. Alternating rounds in one process, medians printed.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from tunnelred.physics import pressure


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=20.0)
    parser.add_argument("--rate", type=float, default=1000.0, help="samples per second")
    parser.add_argument("--taps", type=int, default=16)
    parser.add_argument("--rounds", type=int, default=7)
    args = parser.parse_args()
    rng = np.random.default_rng(0)
    t = np.arange(int(args.seconds * args.rate)) / args.rate
    omega = 1000.0
    angle = np.mod(np.degrees(omega * t), 360.0)
    azimuth = np.arange(args.taps) * 360.0 / args.taps
    delay = np.full(args.taps, 4e-3)
    times = {"one unwrap per tap (default)": [], "turns from the encoder": []}
    for _ in range(args.rounds):
        start = time.perf_counter()
        theta = np.stack(
            [pressure.tap_azimuth(angle, a, d, omega) for a, d in zip(azimuth, delay, strict=True)]
        )
        cp = rng.normal(size=theta.shape)
        pressure.bin_cp(theta, cp)
        times["one unwrap per tap (default)"].append(time.perf_counter() - start)
        start = time.perf_counter()
        theta, turns = pressure.tap_azimuths(angle, azimuth, delay, omega)
        pressure.bin_cp(theta, cp, revolution=turns)
        times["turns from the encoder"].append(time.perf_counter() - start)
    samples = t.size * args.taps
    print(f"{args.taps} taps x {t.size} samples ({samples} values), medians of {args.rounds}:")
    for name, values in times.items():
        print(f"  {name:<30} {1e3 * np.median(values):7.1f} ms")


if __name__ == "__main__":
    main()
