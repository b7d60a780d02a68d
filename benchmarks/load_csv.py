"""Time ``lowdim.datasets.load`` on a 200,000 x 50 CSV against ``pandas.read_csv``.

Target: a few seconds for ``load``. It does more than parse (sha256 of the file, delimiter and
header detection, finite / constant / duplicate checks, conversion to float64), so the ratio
to a bare ``pandas.read_csv`` of the same file shows what those checks cost.

    python benchmarks/load_csv.py [--rows 200000] [--columns 50] [--repeat 3]
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from lowdim.datasets import load


def _best_of(repeat: int, fn) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def _write_csv(frame: pd.DataFrame, path: Path) -> None:
    # pyarrow's writer is many times faster than DataFrame.to_csv; its output quotes text.
    try:
        import pyarrow as pa
        import pyarrow.csv as pa_csv
    except ImportError:
        frame.to_csv(path, index=False)
        return
    pa_csv.write_csv(pa.Table.from_pandas(frame, preserve_index=False), path)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=200_000)
    parser.add_argument("--columns", type=int, default=50)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()

    rng = np.random.default_rng(0)
    frame = pd.DataFrame(
        rng.normal(size=(args.rows, args.columns)),
        columns=[f"sensor_{i}" for i in range(args.columns)],
    )
    frame["site"] = rng.choice(["upstream", "weir", "estuary"], size=args.rows)
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "readings.csv"
        start = time.perf_counter()
        _write_csv(frame, path)
        print(f"wrote {path.stat().st_size / 1e6:.1f} MB in {time.perf_counter() - start:.1f} s")
        spec = {"file": str(path), "labels": "site"}
        data = load(spec)
        assert data.X.shape == (args.rows, args.columns)
        ours = _best_of(args.repeat, lambda: load(spec))
        theirs = _best_of(args.repeat, lambda: pd.read_csv(path, engine="c"))
    print(f"lowdim.datasets.load: {ours:.2f} s (best of {args.repeat})")
    print(f"pandas.read_csv:      {theirs:.2f} s (best of {args.repeat})")
    print(f"ratio load / read_csv: {ours / theirs:.2f}")


if __name__ == "__main__":
    main()
