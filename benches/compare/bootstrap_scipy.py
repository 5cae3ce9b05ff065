"""Times scipy's `stats.bootstrap` on the six cell means of the same 2×3 design with
N = 10 000 that `benches/bootstrap.rs` uses, with 1999 resamples (BCa, the default
method, `vectorized=True`): one call per cell, which is all scipy can do here. quorum's
bench computes far more on the same resamples (cell means and trimmed means, marginal
means, level differences, interaction contrasts, partial η² and ω², robust d; percentile
and BCa with Monte Carlo errors).

    /work/venv/bin/python benches/compare/bootstrap_scipy.py   # or any Python with numpy + scipy

The data generator is the bench's xorshift, so both programs see the same values. The
script prints the medians of 7 runs (wall clock and CPU time; the machine may be shared).
"""
import math
import statistics
import time

import numpy as np
import scipy
import scipy.stats as st

M64 = (1 << 64) - 1


def design(n):
    x = 0x9E3779B97F4A7C15
    cells = [[] for _ in range(6)]
    for i in range(n):
        x ^= (x << 13) & M64
        x ^= x >> 7
        x ^= (x << 17) & M64
        u = ((x >> 11) + 0.5) / float(1 << 53)
        c = i % 6
        cells[c].append(20.0 + c - (1.0 + c * 0.5) * math.log(u))
    return [np.array(c) for c in cells]


def main():
    cells = design(10_000)
    times, cpu = [], []
    for run in range(7):
        rng = np.random.default_rng(run)
        t0, c0 = time.perf_counter(), time.process_time()
        for c in cells:
            st.bootstrap((c,), np.mean, n_resamples=1999, vectorized=True, rng=rng)
        times.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    print(f"numpy {np.__version__}, scipy {scipy.__version__}")
    print(f"scipy.stats.bootstrap, six cell means, B = 1999 (BCa): median wall {statistics.median(times):.3f} s, "
          f"median CPU {statistics.median(cpu):.3f} s (wall runs: {', '.join(f'{t:.3f}' for t in times)})")


if __name__ == "__main__":
    main()
