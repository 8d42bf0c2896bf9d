"""The STL kernel's direct loops, timed beside the same loops from an earlier commit.

    python benchmarks/kernel_loops.py                 # against main, default sizes
    python benchmarks/kernel_loops.py --before HEAD~3 # against another commit
    python benchmarks/kernel_loops.py --series 2000 --hourly 20

The earlier kernel is read with ``git show`` into a temporary package and compiled there,
so both run in one process on the same data (``suite.make_batch``'s invented series), one
thread each (the serial entry points), best of ``--runs`` taken in turn. Every case also
checks that the two give the same bits for every series: trend, seasonal parts, weights.
"""

from __future__ import annotations

import argparse
import importlib
import math
import os
import subprocess
import sys
import tempfile
import time
from types import ModuleType

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from suite import HOURLY, Case, make_batch

FILES = (
    "__init__.py", "layout.py", "loess.py", "threads.py", "median.py", "lanes.py", "stl.py",
    "mstl.py",
)  # fmt: skip


def load_before(ref: str, folder: str) -> tuple[ModuleType, ModuleType]:
    """The kernel's ``stl`` and ``mstl`` modules as they are at ``ref``."""
    root = subprocess.run(
        ["git", "rev-parse", "--show-toplevel"],
        capture_output=True,
        text=True,
        check=True,
        cwd=os.path.dirname(os.path.abspath(__file__)),
    ).stdout.strip()
    package = os.path.join(folder, "kernel_before")
    os.makedirs(package)
    for name in FILES:
        shown = subprocess.run(
            ["git", "show", f"{ref}:src/tidesplit/kernel/{name}"],
            capture_output=True,
            text=True,
            cwd=root,
        )
        if shown.returncode != 0:
            continue  # a module that came later
        text = shown.stdout
        with open(os.path.join(package, name), "w") as f:
            f.write(text)
    sys.path.insert(0, folder)
    return (
        importlib.import_module("kernel_before.stl"),
        importlib.import_module("kernel_before.mstl"),
    )


def interleaved(runs: int, first, second) -> tuple[float, float]:  # type: ignore[no-untyped-def]
    """Best of ``runs`` of each, taken in turn, so that a busy spell weighs on both alike."""
    best = [math.inf, math.inf]
    for _ in range(runs):
        for k, fn in enumerate((first, second)):
            started = time.perf_counter()
            fn()
            best[k] = min(best[k], time.perf_counter() - started)
    return best[0], best[1]


def prepare(case: Case, stl_mod: ModuleType, mstl_mod: ModuleType):  # type: ignore[no-untyped-def]
    """A call that runs the case through one kernel, and the arrays it fills."""
    from tidesplit import SplitParams

    values, offsets = make_batch(case)
    r = SplitParams.from_kwargs(**case.params).resolve()
    rows = r.settings_rows()
    count = offsets.size - 1
    if len(case.periods) == 1:
        settings = np.tile(rows[0], (count, 1))
        trend = np.full(values.size, np.nan)
        seasonal = np.full(values.size, np.nan)
        weight = np.full(values.size, np.nan)

        def go() -> None:
            stl_mod.stl_batch_serial(values, offsets, settings, trend, seasonal, weight)

        seasonal_out = seasonal
    else:
        settings = np.tile(rows[None, :, :], (count, 1, 1))
        n_periods = np.full(count, len(case.periods), dtype=np.int64)
        trend = np.full(values.size, np.nan)
        seasonal2 = np.full((len(case.periods), values.size), np.nan)
        weight = np.full(values.size, np.nan)

        def go() -> None:
            mstl_mod.mstl_batch_serial(
                values, offsets, settings, n_periods, r.iterations, trend, seasonal2, weight
            )

        seasonal_out = seasonal2
    go()  # compile or load
    return go, (trend, seasonal_out, weight)


def noisy(rng: np.random.Generator, n: int, cycle: list[int]) -> np.ndarray:
    """An invented series with the given periods, missing points, a gap and outliers."""
    t = np.arange(n)
    y = rng.normal(0, 1, n) * rng.uniform(0.1, 5) + rng.uniform(-50, 500) + 0.03 * t
    for p in cycle:
        y = y + rng.uniform(0, 10) * np.sin(2 * np.pi * t / p + rng.uniform(0, 6))
    if rng.random() < 0.5:
        y[rng.random(n) < rng.uniform(0, 0.3)] = np.nan
    if rng.random() < 0.2:
        y[rng.integers(0, n) :][: int(rng.integers(1, 3 * cycle[-1]))] = np.nan  # a long gap
    y[rng.integers(0, n, 3)] += rng.normal(0, 50, 3)  # outliers
    return y


def random_batch(rng: np.random.Generator, count: int, periods: int):  # type: ignore[no-untyped-def]
    """Series of random lengths, periods, spans, jumps, degrees, loops and missing points,
    with one settings row per period (MSTL's layout when ``periods`` is 2); each shape
    drawn is used by up to 20 series in a row."""
    from tidesplit.kernel import layout as k

    series, rows = [], []
    while len(series) < count:
        cycle = sorted(int(p) for p in rng.choice([2, 3, 4, 5, 7, 12, 24, 52], periods, False))
        n = int(rng.integers(2 * cycle[-1] + 1, 15 * cycle[-1] + 40))
        # up to 20 series of each shape drawn, so that series of one shape run side by
        # side as well as one by one
        copies = min(int(rng.integers(1, 21)), count - len(series))
        robust = rng.random() < 0.5
        row = np.zeros((periods, k.N_SETTINGS), dtype=np.int64)
        for r, p in enumerate(cycle):
            season = int(rng.choice([0, 3, 5, 7, 9, 13, 21, 35, 101]))
            trend = int(rng.integers(1, 4 * p + 20)) * 2 + 1
            row[r, k.COL_PERIOD] = p
            row[r, k.COL_SEASON_SPAN] = season
            row[r, k.COL_TREND_SPAN] = trend
            row[r, k.COL_LOWPASS_SPAN] = p + 1 if p % 2 == 0 else p + 2
            row[r, k.COL_SEASON_DEGREE : k.COL_LOWPASS_DEGREE + 1] = rng.integers(0, 2, 3)
            row[r, k.COL_SEASON_JUMP : k.COL_LOWPASS_JUMP + 1] = rng.integers(1, 8, 3)
            row[r, k.COL_INNER] = rng.integers(1, 3)
            row[r, k.COL_OUTER] = rng.integers(1, 8) if robust else 0
            row[r, k.COL_ACTIVE] = 1
        for _ in range(copies):
            series.append(noisy(rng, n, cycle))
            rows.append(row)
    values = np.concatenate(series)
    offsets = np.concatenate([[0], np.cumsum([y.size for y in series])]).astype(np.int64)
    return values, offsets, np.array(rows)


def check(count: int, old: tuple[ModuleType, ModuleType]) -> int:
    """Random batches through both kernels; the number of series that differ in any bit."""
    from tidesplit.kernel import mstl, stl

    rng = np.random.default_rng(2024)
    differ = 0
    for periods in (1, 2):
        values, offsets, settings = random_batch(rng, count, periods)
        outs = []
        for stl_k, mstl_k in ((old[0], old[1]), (stl, mstl)):
            trend = np.full(values.size, np.nan)
            weight = np.full(values.size, np.nan)
            if periods == 1:
                seasonal = np.full(values.size, np.nan)
                stl_k.stl_batch_serial(values, offsets, settings[:, 0], trend, seasonal, weight)
            else:
                seasonal = np.full((2, values.size), np.nan)
                n_periods = np.full(offsets.size - 1, 2, dtype=np.int64)
                mstl_k.mstl_batch_serial(
                    values, offsets, settings, n_periods, 2, trend, seasonal, weight
                )
            outs.append((trend, seasonal, weight))
        for s in range(offsets.size - 1):
            part = slice(offsets[s], offsets[s + 1])
            for a, b in zip(outs[0], outs[1], strict=True):
                if not np.array_equal(a[..., part].view(np.int64), b[..., part].view(np.int64)):
                    differ += 1
                    break
    return differ


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--before", default="main", help="commit to compare with")
    parser.add_argument("--series", type=int, default=10_000, help="monthly series")
    parser.add_argument("--hourly", type=int, default=100, help="hourly series")
    parser.add_argument("--runs", type=int, default=3)
    parser.add_argument(
        "--check",
        type=int,
        default=0,
        help="also compare the bits on this many random series of each kind (one and two "
        "periods: lengths, spans, jumps, degrees, loops, missing points)",
    )
    args = parser.parse_args()
    from tidesplit.kernel import mstl, stl

    cases = [
        Case(f"monthly {args.series} robust", args.series, 120, (12,), robust=True),
        Case(f"monthly {args.series} 5% missing", args.series, 120, (12,), missing=0.05),
        Case(
            f"monthly {args.series} robust 5% missing",
            args.series,
            120,
            (12,),
            robust=True,
            missing=0.05,
        ),
        Case(f"hourly {args.hourly} x 2 periods", args.hourly, 8_760, (24, 168), options=HOURLY),
        Case(
            f"hourly {args.hourly} x 2 periods robust",
            args.hourly,
            8_760,
            (24, 168),
            robust=True,
            options=HOURLY,
        ),
    ]
    print(f"kernel loops, one thread, best of {args.runs}; before = {args.before}\n")
    print(f"{'case':<36}{'before s':>10}{'after s':>10}{'speed-up':>10}  same bits")
    with tempfile.TemporaryDirectory() as folder:
        old_stl, old_mstl = load_before(args.before, folder)
        for case in cases:
            old_go, old = prepare(case, old_stl, old_mstl)
            new_go, new = prepare(case, stl, mstl)
            before, after = interleaved(args.runs, old_go, new_go)
            same = all(
                np.array_equal(a.view(np.int64), b.view(np.int64))
                for a, b in zip(old, new, strict=True)
            )
            print(f"{case.name:<36}{before:>10.3f}{after:>10.3f}{before / after:>9.2f}x  {same}")
        if args.check:
            differ = check(args.check, (old_stl, old_mstl))
            print(
                f"\nrandom series, one and two periods, {args.check} of each: "
                f"{differ} differ in any bit"
            )


if __name__ == "__main__":
    main()
