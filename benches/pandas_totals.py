#!/usr/bin/env python3
"""Baseline for benches/fleet.sh: read an hourly CSV with pandas and compute
each unit's yearly totals by the 40 CFR 75 App. F equations, for a
bituminous coal boiler with an O2 diluent, all readings as the generator
writes them (SO2 ppm wet, NOx ppm dry, O2 % dry, CO2 % wet, flow scfh wet,
H2O %).

  SO2 lb/hr     = 1.660e-7 * ppm_wet * scfh_wet                     (Eq. F-1)
  heat input    = scfh_wet * (100 - H2O)/100 / Fd * (20.9 - O2d)/20.9 (Eq. F-17),
                  at least 1.0 MMBtu/hr in an operating hour
  NOx lb/MMBtu  = 1.194e-7 * ppm_dry * Fd * 20.9 / (20.9 - O2d)      (Eq. F-5)
  CO2 tons/hr   = 5.7e-7 * pct_wet * scfh_wet                       (Eq. F-11)
  hourly mass   = rate * op_time; NOx mass = rate * heat input * op_time (Eq. F-24)

Fd = 9,780 dscf/MMBtu (App. F Table 1, bituminous). It does no missing-data
substitution: a blank reading leaves that hour out of the sums it feeds. On a
file without blanks its totals are the tool's; with blanks they differ by the
substituted hours. It only reads and sums: no validation, no storage.

usage: pandas_totals.py HOURLY.csv OUT.json
"""

import json
import sys

import pandas as pd

FD = 9780.0
O2_AMBIENT = 20.9


def main() -> None:
    src, out = sys.argv[1], sys.argv[2]
    df = pd.read_csv(src)
    op = df["op_time"]
    running = op > 0
    flow = df["flow_scfh_wet"]
    o2 = df["o2_pct_dry"]
    so2_lb = 1.660e-7 * df["so2_ppm_wet"] * flow * op
    hi_rate = flow * (100.0 - df["h2o_pct"]) / 100.0 / FD * (O2_AMBIENT - o2) / O2_AMBIENT
    hi_rate = hi_rate.where(~(running & (hi_rate < 1.0)), 1.0)
    hi = hi_rate * op
    nox_rate = 1.194e-7 * df["nox_ppm_dry"] * FD * O2_AMBIENT / (O2_AMBIENT - o2)
    nox_lb = nox_rate * hi
    co2_tons = 5.7e-7 * df["co2_pct_wet"] * flow * op
    frame = pd.DataFrame(
        {
            "unit": df["unit"],
            "operating_hours": op,
            "heat_input_mmbtu": hi,
            "so2_tons": so2_lb / 2000.0,
            "nox_tons": nox_lb / 2000.0,
            "co2_tons": co2_tons,
        }
    )
    sums = frame.groupby("unit", sort=True).sum()
    units = {
        unit: {k: float(v) for k, v in row.items()} for unit, row in sums.iterrows()
    }
    totals = {k: float(v) for k, v in sums.sum().items()}
    with open(out, "w") as f:
        json.dump({"rows": int(len(df)), "units": units, "totals": totals}, f, indent=1)


if __name__ == "__main__":
    main()
