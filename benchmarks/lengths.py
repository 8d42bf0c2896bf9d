"""The linear map's cost by the shapes of a fleet: equal lengths, mixed lengths, one series.

    python benchmarks/lengths.py            # three rounds, medians
    python benchmarks/lengths.py --rounds 5

A series takes the linear map by its own length and settings (complete, not robust, at most
200 points), whatever else is in its batch, so that its numbers never depend on the batch.
Its operators are built once per length and settings in a process (n splits of unit
vectors) and kept: a fleet of many lengths pays for them on its first call. Each case runs
in a fresh process (``first``: operators built; ``again``: kept), with split_batch on
invented series of a monthly cycle.
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time

import numpy as np

CASES = {
    "10,000 series of 120 points": ("equal", 10_000),
    "10,000 series of 24 to 200 points": ("mixed", 10_000),
    "one series of 200 points": ("single", 1),
}


def lengths_of(shape: str, count: int, rng: np.random.Generator) -> np.ndarray:
    if shape == "equal":
        return np.full(count, 120)
    if shape == "mixed":
        return rng.integers(24, 201, count)
    return np.full(count, 200)


def child(shape: str, count: int) -> None:
    import tidesplit
    from tidesplit import SplitParams

    rng = np.random.default_rng(1)

    def batch(lengths: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        values = np.concatenate(
            [50 + 0.1 * np.arange(n) + 5 * np.sin(np.arange(n) * np.pi / 6) for n in lengths]
        )
        values += rng.normal(0, 1, values.size)
        return values, np.concatenate(([0], np.cumsum(lengths))).astype(np.int64)

    # compile (or load) the kernels on a batch of another shape first
    tidesplit.split_batch(*batch(np.array([30, 30])), SplitParams(period=5))
    values, offsets = batch(lengths_of(shape, count, rng))
    times = []
    for _ in range(2):
        start = time.perf_counter()
        tidesplit.split_batch(values, offsets, SplitParams(period=12))
        times.append(time.perf_counter() - start)
    print(*times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=3)
    parser.add_argument("--child", nargs=2)
    args = parser.parse_args()
    if args.child:
        child(args.child[0], int(args.child[1]))
        return
    print(f"{'case':36s} {'first s':>8s} {'again s':>8s}")
    for name, (shape, count) in CASES.items():
        runs = []
        for _ in range(args.rounds):
            done = subprocess.run(
                [sys.executable, __file__, "--child", shape, str(count)],
                capture_output=True,
                text=True,
                check=True,
            )
            runs.append([float(x) for x in done.stdout.split()])
        first = statistics.median(r[0] for r in runs)
        again = statistics.median(r[1] for r in runs)
        print(f"{name:36s} {first:8.3f} {again:8.3f}")


if __name__ == "__main__":
    main()
