"""Make a demo data file: sensor readings from a made-up wind turbine's hub.

Each row is one ten-minute snapshot of five channels: two bending gauges on the hub
(``bend_x``, ``bend_y``, kN m), the ambient temperature (``temp_c``) and two vibration
channels that carry only noise. Two hidden quantities drive them: the wind speed and the
ambient temperature. As the wind rises, the load grows and the yaw controller turns its
direction, so the two gauges trace a spiral; the temperature varies on its own. The readings
therefore lie near a rolled-up sheet (the wind along the roll, the temperature across it),
which a linear projection folds onto itself. The column ``regime`` names the wind regime
(calm, working, gusty), and ``reading_id`` is a counter to drop before any comparison.

Usage::

    python examples/make_turbine_readings.py --out turbine_readings.csv --rows 600 --seed 0
"""

from __future__ import annotations

import argparse
import os
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd


def turbine_readings(rows: int = 600, seed: int = 0, noise: float = 0.3) -> pd.DataFrame:
    """The readings as a data frame: ``reading_id``, five channels and ``regime``."""
    rng = np.random.default_rng(seed)
    wind = rng.uniform(3.0, 15.0, rows)
    # The load's direction turns 1.5 times round as the wind goes from 3 to 15 m/s.
    turn = 1.5 * np.pi * (1.0 + 2.0 * (wind - 3.0) / 12.0)
    frame = pd.DataFrame(
        {
            "bend_x": turn * np.cos(turn),
            "bend_y": turn * np.sin(turn),
            "temp_c": rng.uniform(-5.0, 25.0, rows),
            "vibration_1": np.zeros(rows),
            "vibration_2": np.zeros(rows),
        }
    )
    frame += rng.normal(0.0, noise, frame.shape)
    frame.insert(0, "reading_id", np.arange(1, rows + 1))
    frame["regime"] = np.select([wind < 6.0, wind < 11.0], ["calm", "working"], "gusty")
    return frame


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--out", default="turbine_readings.csv", help="the CSV to write")
    parser.add_argument("--rows", type=int, default=600, help="number of snapshots")
    parser.add_argument("--seed", type=int, default=0, help="random seed")
    args = parser.parse_args()
    out = Path(args.out)
    frame = turbine_readings(args.rows, args.seed)
    fd, tmp = tempfile.mkstemp(dir=out.parent if str(out.parent) else ".", suffix=".tmp")
    with os.fdopen(fd, "w") as fh:
        frame.to_csv(fh, index=False, float_format="%.5f")
    os.replace(tmp, out)
    print(f"wrote {len(frame)} readings to {out}")


if __name__ == "__main__":
    main()
