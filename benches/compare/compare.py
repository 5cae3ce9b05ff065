#!/usr/bin/env python3
"""Speed of quorum's permutation engine against numpy and statsmodels, measured in one run.

The same Freedman–Lane permutation F test of every term of a 2×3 design (Type III, sum
coding) is timed four ways on the same generated data, for N = 240, 10 000 and
1 000 000 rows:

* quorum: the `permutation` engine on all cores (`examples/permutation_throughput`,
  built here with `cargo build --release`), and the floor, a bare Rust loop that only
  shuffles and sums cell ranges;
* numpy, one permutation per call: `rng.permutation(N)`, then per term a gather of the
  term's reduced-model residuals, `np.add.reduceat` cell sums and the Type III
  quadratic form;
* numpy, batched: a block of permutations at once (`rng.permuted` on a tiled index, or
  `argsort` of uniforms), the same cell sums and quadratic forms on whole matrices;
  the faster of the two counts as numpy's best;
* statsmodels: refit `ols('y ~ C(A, Sum) * C(B, Sum)')` and `anova_lm(typ=3)` on each
  permuted data set (one fit per permutation and term, as Freedman–Lane needs).

Rates are term tests per second (one permutation of one term). Every method is run
`--rounds` times (default 3) and the fastest round counts, because the machine may be
shared. quorum runs on all cores and, for reference, on one thread; numpy and
statsmodels run as they come (numpy's random and indexing code is single-threaded).
The p-values of the methods are printed so that the runs can be seen to do the same
test.

    python3 benches/compare/compare.py                  # all sizes (a few minutes)
    python3 benches/compare/compare.py --sizes 10000    # one size

Needs numpy, pandas and statsmodels (the pinned versions of
tests/reference/requirements.txt) and cargo.
"""
import argparse
import json
import os
import pathlib
import platform
import subprocess
import tempfile
import time

import numpy as np
import pandas as pd

ROOT = pathlib.Path(__file__).resolve().parents[2]
QUORUM_B = {240: 99_999, 10_000: 19_999, 1_000_000: 511}
NUMPY_SECONDS = 4.0
STATSMODELS_FITS = {240: 60, 10_000: 12, 1_000_000: 2}


def make_data(n, path):
    """2×3 design, cells of nearly equal size, small effects (invented data)."""
    rng = np.random.default_rng(1)
    cell = np.arange(n) % 6
    a = np.where(cell < 3, "a1", "a2")
    b = np.array(["b1", "b2", "b3"])[cell % 3]
    scale = np.sqrt(n / 240)
    y = 10 + 0.3 * (a == "a2") / scale + 0.2 * (b == "b2") / scale + rng.normal(size=n)
    df = pd.DataFrame({"y": np.round(y, 4), "A": a, "B": b})
    df.to_csv(path, index=False)
    return df


class FreedmanLane:
    """Everything the numpy methods share: canonical order, cell ranges, the Type III
    factors X_S (Q_S = X_S'X_S), reduced-model residuals e₀ of every term."""

    def __init__(self, df):
        order = np.lexsort((df["B"].values, df["A"].values))  # cell order, stable
        d = df.iloc[order]
        cells = pd.Categorical(d["A"] + "|" + d["B"]).codes
        self.y = d["y"].values.astype(float)
        self.sizes = np.bincount(cells)
        self.starts = np.concatenate([[0], np.cumsum(self.sizes)])
        self.n = len(self.y)
        self.cell_of = np.repeat(np.arange(6), self.sizes)
        yc = self.y - self.y.mean()
        s = np.add.reduceat(yc, self.starts[:-1])
        means = s / self.sizes
        e_full = yc - means[self.cell_of]
        self.sse = float(e_full @ e_full)
        self.df_error = self.n - 6
        h2 = np.hstack([np.eye(1), -np.ones((1, 1))])
        h3 = np.hstack([np.eye(2), -np.ones((2, 1))])
        ls = [np.kron(h2, np.ones((1, 3))), np.kron(np.ones((1, 2)), h3), np.kron(h2, h3)]
        d_inv = 1.0 / self.sizes
        self.x, self.e0, self.total, self.f_obs, self.q = [], [], [], [], []
        for l in ls:
            m = (l * d_inv) @ l.T
            lc = np.linalg.cholesky(m)
            x = np.linalg.solve(lc, l * d_inv)
            delta = x.T @ (x @ s)
            e0 = e_full + delta[self.cell_of]
            self.x.append(x)
            self.e0.append(e0)
            self.total.append(float(e0 @ e0))
            self.q.append(l.shape[0])
            self.f_obs.append(float(np.sum((x @ s) ** 2)) / l.shape[0] / (self.sse / self.df_error))

    def one_per_call(self, b, rng):
        counts = np.zeros(3, dtype=int)
        for _ in range(b):
            idx = rng.permutation(self.n)
            for t in range(3):
                u = np.add.reduceat(self.e0[t][idx], self.starts[:-1])
                ss = float(np.sum((self.x[t] @ u) ** 2))
                sse = self.total[t] - float(np.sum(u * u / self.sizes))
                f = ss / self.q[t] / (sse / self.df_error)
                counts[t] += f >= self.f_obs[t] * (1 - 1e-10)
        return counts

    def batched(self, b, rng, batch, how):
        counts = np.zeros(3, dtype=int)
        base = np.tile(np.arange(self.n), (batch, 1)) if how == "permuted" else None
        done = 0
        while done < b:
            m = min(batch, b - done)
            if how == "permuted":
                idx = rng.permuted(base[:m], axis=1)
            else:
                idx = np.argsort(rng.random((m, self.n)), axis=1)
            for t in range(3):
                u = np.add.reduceat(self.e0[t][idx], self.starts[:-1], axis=1)
                ss = np.sum((u @ self.x[t].T) ** 2, axis=1)
                sse = self.total[t] - np.sum(u * u / self.sizes, axis=1)
                f = ss / self.q[t] / (sse / self.df_error)
                counts[t] += int(np.sum(f >= self.f_obs[t] * (1 - 1e-10)))
            done += m
        return counts


def timed(fn, seconds, rounds):
    """Runs fn(b) with growing b until it takes about `seconds`, then `rounds` times at
    that b; returns (b, fastest seconds, result). The machine may be shared: the fastest
    round counts, as for quorum."""
    b = 4
    while True:
        start = time.perf_counter()
        result = fn(b)
        elapsed = time.perf_counter() - start
        if elapsed >= seconds or b >= 1 << 22:
            break
        b = max(b * 2, int(b * seconds / max(elapsed, 1e-3) * 1.1))
    for _ in range(rounds - 1):
        start = time.perf_counter()
        fn(b)
        elapsed = min(elapsed, time.perf_counter() - start)
    return b, elapsed, result


def statsmodels_rate(df, fl, fits):
    import statsmodels.formula.api as smf
    from statsmodels.stats.anova import anova_lm
    d = pd.DataFrame({"A": np.repeat(["a1", "a2"], [fl.sizes[:3].sum(), fl.sizes[3:].sum()]),
                      "B": np.concatenate([np.repeat(["b1", "b2", "b3"], fl.sizes[:3]),
                                           np.repeat(["b1", "b2", "b3"], fl.sizes[3:])])})
    rng = np.random.default_rng(3)
    fitted = [fl.y - fl.y.mean() - e for e in fl.e0]
    names = ["C(A, Sum)", "C(B, Sum)", "C(A, Sum):C(B, Sum)"]
    start = time.perf_counter()
    done = 0
    while done < fits:
        idx = rng.permutation(fl.n)
        for t in range(3):
            d["ystar"] = fitted[t] + fl.e0[t][idx]
            table = anova_lm(smf.ols("ystar ~ C(A, Sum) * C(B, Sum)", d).fit(), typ=3)
            float(table.loc[names[t], "F"])
            done += 1
            if done >= fits:
                break
    return done / (time.perf_counter() - start)


def quorum_run(path, n, rounds, threads=None):
    subprocess.run(["cargo", "build", "--release", "--quiet", "--example", "permutation_throughput"],
                   cwd=ROOT, check=True)
    exe = ROOT / "target" / "release" / "examples" / "permutation_throughput"
    env = dict(os.environ, QUORUM_BENCH_ROUNDS=str(rounds))
    if threads:
        env["RAYON_NUM_THREADS"] = str(threads)
    out = subprocess.run([str(exe), str(path), "y", "A,B", str(QUORUM_B[n])], check=True,
                         capture_output=True, text=True, env=env)
    return json.loads(out.stdout)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--sizes", type=int, nargs="*", default=[240, 10_000, 1_000_000])
    ap.add_argument("--rounds", type=int, default=3, help="repetitions per method; the fastest counts")
    args = ap.parse_args()
    print(f"machine: {platform.processor() or platform.machine()}, {os.cpu_count()} cores, "
          f"load average {os.getloadavg()[0]:.1f}; numpy {np.__version__}")
    tmp = pathlib.Path(tempfile.mkdtemp())
    for n in args.sizes:
        path = tmp / f"perm{n}.csv"
        df = make_data(n, path)
        fl = FreedmanLane(df)
        q = quorum_run(path, n, args.rounds)
        q1 = quorum_run(path, n, args.rounds, threads=1)
        rq = q["freedman-lane"]["term_tests_per_s"]
        rq1 = q1["freedman-lane"]["term_tests_per_s"]
        floor = q["floor"]["permutations_per_s"]
        print(f"\nN = {n}: quorum Freedman–Lane {q['freedman-lane']['permutations_per_s']:.0f} permutations/s "
              f"({rq:.0f} term tests/s, B = {q['permutations']}, {q['threads']} threads); floor "
              f"{floor:.0f} permutations/s (in place: {q['floor_in_place']['permutations_per_s']:.0f}); "
              f"quorum p = {[round(p, 4) for p in q['freedman-lane']['p']]}")
        rows = []
        rng = np.random.default_rng(2)
        b, s, counts = timed(lambda b: fl.one_per_call(b, rng), NUMPY_SECONDS, args.rounds)
        rows.append(("numpy, one permutation per call", 3 * b / s, (1 + counts) / (1 + b)))
        batch = max(1, min(256, 4_000_000 // n))
        for how in ("permuted", "argsort"):
            b, s, counts = timed(lambda b: fl.batched(b, rng, batch, how), NUMPY_SECONDS, args.rounds)
            rows.append((f"numpy, batched ({how}, {batch} per block)", 3 * b / s, (1 + counts) / (1 + b)))
        best = max(r[1] for r in rows)
        rows.append(("statsmodels refit loop", statsmodels_rate(df, fl, STATSMODELS_FITS[n]), None))
        for name, rate, p in rows:
            ps = "" if p is None else f"  p = {[round(float(x), 4) for x in p]}"
            print(f"  {name:44s} {rate:12.1f} term tests/s   quorum is {rq / rate:8.1f}×{ps}")
        print(f"  quorum / numpy best = {rq / best:.1f}× ({rq1 / best:.1f}× with one quorum thread); "
              f"quorum / statsmodels = {rq / rows[-1][1]:.0f}×; "
              f"quorum / floor = {q['freedman-lane']['permutations_per_s'] / floor:.2f} (all terms per "
              f"permutation), {rq / floor:.2f} per term")


if __name__ == "__main__":
    main()
