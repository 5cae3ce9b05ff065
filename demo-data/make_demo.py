#!/usr/bin/env python3
"""Regenerates quorum's invented demo datasets (numpy only; fixed seeds).

Every value is invented: no real trial or study stands behind these files.
    python3 demo-data/make_demo.py
"""
import pathlib

import numpy as np

HERE = pathlib.Path(__file__).resolve().parent


def field_trial():
    rng = np.random.default_rng(20261202)
    irrigation = ["daily", "every-2-days", "weekly"]
    mulch = ["bark", "straw"]
    # Median yield (kg per plot) and log-scale spread per cell: weekly plots are drier and
    # more variable; straw keeps moisture and helps most when watering is sparse.
    median = {("daily", "bark"): 11.0, ("daily", "straw"): 11.6,
              ("every-2-days", "bark"): 10.2, ("every-2-days", "straw"): 11.3,
              ("weekly", "bark"): 7.4, ("weekly", "straw"): 9.6}
    spread = {"daily": 0.12, "every-2-days": 0.16, "weekly": 0.30}
    sizes = {("daily", "bark"): 10, ("daily", "straw"): 9, ("every-2-days", "bark"): 11,
             ("every-2-days", "straw"): 8, ("weekly", "bark"): 10, ("weekly", "straw"): 12}
    rows = []
    for i in irrigation:
        for m in mulch:
            values = median[(i, m)] * np.exp(rng.normal(0.0, spread[i], sizes[(i, m)]))
            rows += [[i, m, f"{v:.2f}"] for v in values]
    order = rng.permutation(len(rows))
    rows = [rows[k] for k in order]
    # Two gross outliers (a plot next to a leaking pipe; a plot counted twice) and three
    # plots with no harvest record.
    rows[5][2] = "24.80"
    rows[31][2] = "21.95"
    for k in (12, 40, 57):
        rows[k][2] = "NA"
    lines = ["plot,irrigation,mulch,yield_kg"]
    lines += [f"P{n + 1:03d},{r[0]},{r[1]},{r[2]}" for n, r in enumerate(rows)]
    (HERE / "field-trial.csv").write_text("\n".join(lines) + "\n")


def usability_study():
    rng = np.random.default_rng(7041)
    layouts = ["grid", "list"]
    onboarding = ["none", "tour"]
    devices = ["laptop", "phone", "tablet"]
    rows = []
    pid = 100
    for lay in layouts:
        for onb in onboarding:
            for dev in devices:
                n = int(rng.integers(8, 13))
                latent = 4.6 + (0.5 if lay == "list" else 0.0) + (0.7 if onb == "tour" else 0.0) \
                    + {"laptop": 0.4, "phone": -0.5, "tablet": 0.0}[dev] \
                    + (0.6 if (lay == "list" and dev == "phone") else 0.0)
                for _ in range(n):
                    person = latent + rng.normal(0.0, 0.9)
                    items = np.clip(np.rint(person + rng.normal(0.0, 0.7, 4)), 1, 7)
                    pid += 1
                    rows.append([f"U{pid}", lay, onb, dev, f"{items.mean():.2f}"])
    order = rng.permutation(len(rows))
    rows = [rows[k] for k in order]
    rows[17][4] = ""
    lines = ["participant\tlayout\tonboarding\tdevice\tsatisfaction"]
    lines += ["\t".join(r) for r in rows]
    (HERE / "usability-study.tsv").write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    field_trial()
    usability_study()
