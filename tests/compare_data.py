"""A made-up data file shared by the comparison's tests (not collected: no ``test_`` prefix)."""

from __future__ import annotations

import numpy as np
import pandas as pd


def proofing_cabinet(n: int = 150, seed: int = 3) -> pd.DataFrame:
    """A made-up bakery's proofing cabinet: each row is one dough reading.

    The hidden fermentation phase t winds the CO2 and rise readings round a spiral (a 1-D
    curve in the plane, lifted by temperature), so neighbours along the curve matter.
    """
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(1.0, 3.0 * np.pi, n))
    frame = pd.DataFrame(
        {
            "co2_ppm": t * np.cos(t) + rng.normal(0, 0.05, n),
            "rise_mm": t * np.sin(t) + rng.normal(0, 0.05, n),
            "dough_temp": 0.3 * t + rng.normal(0, 0.05, n),
            "humidity": rng.normal(0.0, 0.05, n),
        }
    )
    frame["stage"] = np.where(t < 4, "early", np.where(t < 7, "mid", "late"))
    return frame
