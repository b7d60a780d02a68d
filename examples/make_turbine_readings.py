"""Make a demo data file: sensor readings from a made-up wind turbine's hub.

Each row is one snapshot of eight channels: four strain gauges round the hub, three
accelerometer axes and the nacelle temperature. Two hidden quantities drive them: the rotor's
angle (a circle) and the wind speed. The readings therefore lie near a curved two-dimensional
sheet (a cylinder, bent) inside the eight-dimensional space, which linear methods flatten
badly. The column ``regime`` names the wind regime (calm, working, gusty), and
``reading_id`` is a counter that should be dropped before any comparison.

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


def turbine_readings(rows: int = 600, seed: int = 0, noise: float = 0.03) -> pd.DataFrame:
    """The readings as a data frame: ``reading_id``, eight channels and ``regime``."""
    rng = np.random.default_rng(seed)
    angle = rng.uniform(0.0, 2.0 * np.pi, rows)
    wind = rng.uniform(3.0, 15.0, rows)
    load = wind / 15.0
    channels = {f"strain_{i + 1}": load * np.cos(angle + i * np.pi / 2.0) for i in range(4)}
    channels["accel_x"] = 0.6 * load * np.sin(2.0 * angle)
    channels["accel_y"] = 0.6 * load * np.cos(2.0 * angle)
    channels["accel_z"] = 0.8 * load**2
    channels["temp_c"] = 1.0 - 0.5 * load
    frame = pd.DataFrame(channels)
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
