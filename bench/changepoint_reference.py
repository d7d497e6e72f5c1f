#!/usr/bin/env python3
"""Time ruptures' exact PELT on the series used by models/benches/changepoint.rs.

Usage (from the repository root):
    .venv/bin/python bench/changepoint_reference.py            # n = 2000
    .venv/bin/python bench/changepoint_reference.py 2000 5000  # several sizes

Same generator as the Rust bench: SplitMix64 (seed 20240607) + Box-Muller,
unit normal noise around a level ((i // 1000) * 7 % 5) * 1.5. Call:
rpt.Pelt(model="l2", min_size=2, jump=1).fit(y).predict(pen=2 ln n).
"""
from __future__ import annotations

import math
import sys
import time

import numpy as np
import ruptures as rpt

MASK = (1 << 64) - 1


class SplitMix64:
    def __init__(self, seed: int) -> None:
        self.state = seed & MASK

    def next_u64(self) -> int:
        self.state = (self.state + 0x9E3779B97F4A7C15) & MASK
        z = self.state
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & MASK
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & MASK
        return z ^ (z >> 31)

    def uniform(self) -> float:
        return (self.next_u64() >> 11) * (1.0 / 9007199254740992.0)

    def normal(self) -> float:
        u1 = 1.0 - self.uniform()
        u2 = self.uniform()
        return math.sqrt(-2.0 * math.log(u1)) * math.cos(2.0 * math.pi * u2)


def series(n: int) -> np.ndarray:
    g = SplitMix64(20240607)
    return np.array([((i // 1000) * 7 % 5) * 1.5 + g.normal() for i in range(n)])


def main() -> None:
    sizes = [int(a) for a in sys.argv[1:]] or [2000]
    print(f"ruptures {rpt.__version__}, numpy {np.__version__}")
    for n in sizes:
        y = series(n)
        pen = 2.0 * math.log(n)
        t0 = time.perf_counter()
        bkps = rpt.Pelt(model="l2", min_size=2, jump=1).fit(y).predict(pen=pen)
        dt = time.perf_counter() - t0
        print(f"pelt_l2/{n}: {dt:.3f} s, {len(bkps)} breakpoints, first {bkps[:6]}")


if __name__ == "__main__":
    main()
