"""Write tests/data/golden_v1.json.gz: the single-conversion engine's output for every example and
test plan, so that later releases (the conversion-chain code) can be checked bit for bit.

Run from the repository root:  ``python tools/make_golden.py [--out tests/data/golden_v1.json]``.
The file records the commit it was made at; regenerate it only on purpose (a results change
that review accepted), never to make a failing golden test pass.
"""

from __future__ import annotations

import argparse
import datetime as dt
import gzip
import hashlib
import json
import subprocess
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))
sys.path.insert(0, str(ROOT))

from mixchart.analysis import evaluate  # noqa: E402
from mixchart.plan import plan_from_dict  # noqa: E402


def exact(value):
    """A JSON-safe, exact form of a result value: floats as repr text (inf and nan too)."""
    if isinstance(value, (float, np.floating)):
        return repr(float(value))
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.bool_,)):
        return bool(value)
    if isinstance(value, dict):
        return {str(k): exact(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, np.ndarray)):
        return [exact(v) for v in value]
    return value


def snapshot(evaluation) -> dict:
    """Everything an evaluation states, in exact form."""
    return {
        "summary": exact(dict(evaluation.summary.__dict__)),
        "warnings": list(evaluation.warnings),
        "channels_hz": exact(evaluation.channels_hz),
        "lo_hz": exact(evaluation.lo_hz),
        "f_wanted_out_hz": exact(evaluation.f_wanted_out_hz),
        "inverted": exact(evaluation.inverted),
        "worst_margin_db": exact(evaluation.worst_margin_db),
        "worst_row": exact(evaluation.worst_row.to_dict(orient="list")),
        "worst_by_product": exact(evaluation.worst_by_product.to_dict(orient="list")),
        # the failing rows in full would make the file ~3 MB: kept as a count and a digest
        "hits": digest(exact(evaluation.hits.to_dict(orient="list"))),
    }


def digest(value) -> dict:
    """Row count and SHA-256 of a table's exact JSON form."""
    text = json.dumps(value, sort_keys=True)
    rows = len(next(iter(value.values()))) if value else 0
    return {"n_rows": rows, "sha256": hashlib.sha256(text.encode()).hexdigest()}


def cases() -> list[tuple[str, dict, str | None]]:
    """(name, plan dict, base folder) for every example plan and test plan."""
    import test_analysis  # the test suite's plans, copied into the golden file

    out = []
    for path in sorted((ROOT / "mixchart" / "examples").glob("*.json")):
        out.append((f"example {path.stem}", json.loads(path.read_text()), str(path.parent)))
    for name, data in test_analysis.LEVEL_PLANS.items():
        out.append((f"level plan {name}", data, None))
    for seed in range(12):
        out.append((f"random plan seed {seed}", test_analysis.random_plan(np.random.default_rng(seed)), None))
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", default=str(ROOT / "tests" / "data" / "golden_v1.json.gz"))
    args = parser.parse_args()
    commit = subprocess.run(["git", "rev-parse", "HEAD"], cwd=ROOT, capture_output=True, text=True).stdout.strip()
    records = []
    for name, data, base in cases():
        evaluation = evaluate(plan_from_dict(data), base_dir=base)
        records.append({"name": name, "plan": data, "base": "examples" if base else None,
                        "result": snapshot(evaluation)})
    doc = {
        "provenance": {
            "made_by": "tools/make_golden.py",
            "commit": commit,
            "date": dt.date.today().isoformat(),
            "engine": "mixchart.analysis.evaluate (the single-conversion engine of that commit)",
        },
        "cases": records,
    }
    text = json.dumps(doc, indent=0, sort_keys=True) + "\n"
    with gzip.GzipFile(args.out, "wb", mtime=0) as fh:  # mtime 0: the same results give the same bytes
        fh.write(text.encode())
    print(f"{len(records)} cases written to {args.out} at {commit[:10]}")


if __name__ == "__main__":
    main()
