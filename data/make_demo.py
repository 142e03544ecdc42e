"""Generate the invented demo data set ``coating_thickness.csv`` (run once; output is committed).

Scenario (invented for this project): a powder-coating line sprays steel panels through
four nozzles over two shifts, with paint from three lots. Film thickness is measured in
micrometres on each panel. Nozzles N2 and N3 come from the same supplier and behave
alike; two readings are suspect (a gauge slip and a panel recoated by mistake).
"""

from pathlib import Path

import numpy as np
import pandas as pd


def make(seed: int = 5) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    nozzle_mean = {"N1": 62.5, "N2": 63.1, "N3": 63.3, "N4": 62.3}
    shift_effect = {"day": 0.0, "night": 0.8}
    lot_effect = {"L1": 0.0, "L2": 0.5, "L3": -0.4}
    rows = []
    panel = 1001
    for nozzle, mu in nozzle_mean.items():
        for shift, s_eff in shift_effect.items():
            n = 15 if nozzle != "N4" else 12
            for _ in range(n):
                lot = rng.choice(list(lot_effect))
                y = mu + s_eff + lot_effect[lot] + rng.normal(0, 1.9)
                rows.append((f"P{panel}", nozzle, shift, lot, round(float(y), 1)))
                panel += 1
    df = pd.DataFrame(rows, columns=["panel", "nozzle", "shift", "paint_lot", "thickness_um"])
    # Two suspect readings: a gauge slip (far too thin) and a panel that was coated twice.
    df.loc[df.panel == "P1007", "thickness_um"] = 48.9
    df.loc[df.panel == "P1071", "thickness_um"] = 71.8
    return df


if __name__ == "__main__":
    out = Path(__file__).with_name("coating_thickness.csv")
    make().to_csv(out, index=False)
    print(f"wrote {out} ({len(make())} rows)")
