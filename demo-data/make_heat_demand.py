#!/usr/bin/env python3
"""Generate the invented demo table ``heat-demand.csv`` for heldout.

Scenario (fictional)
--------------------
The Nordvik district network is an invented district-heating utility serving
a small coastal town from four substations: Havnegata, Kvernhaug, Stormyra
and Lillebakk. To calibrate its day-ahead demand forecast, the network's
field crew read one customer heat meter per day, on consecutive days, and
noted the day's mean outdoor temperature and wind speed. Each row is one such
reading:

    day         1..n, the survey day
    week        the survey week of the day (days 1-7 are week 1)
    meter_id    the meter read that day ("M0001", ...), unique per row
    substation  the substation that feeds the meter
    outdoor_c   mean outdoor temperature of the day, degrees Celsius
    wind_ms     mean wind speed of the day, metres per second; empty on the
                days the crew's wind gauge was out of service (about 5 %)
    demand_mwh  heat delivered through the meter that day, MWh (the target)

How the numbers are made
------------------------
Every value is invented by this script; nothing is measured. The true demand
is a smooth, clearly nonlinear curve in outdoor temperature: a base load for
hot water, plus space heating that grows as the day gets colder than a
heating cut-off near 15 degrees C and is essentially zero above it (a
"soft hinge"), with a slightly steeper slope in severe cold. Wind raises the
heating part a little (a few percent per m/s). Buildings differ, so each
reading has Gaussian noise large enough that very flexible fits (high
polynomial degree, very few neighbours) chase the noise; a reading is never
below 0.05 MWh (a meter does not run backwards). With about 300 rows,
cross-validated error falls and then rises again as the flexibility grows.

The substation (text, four levels) shifts demand a little (network losses).
On about one day in twenty the wind gauge was out of service and the wind
cell is left empty; the demand still felt that day's wind. Which days lost
their wind reading is drawn from a second random stream, so every other
value is the same as without the gaps.

The temperature follows a seasonal cycle over the survey days plus day-to-day
weather and occasional cold snaps, clipped to [-15, 25] degrees C. Severe cold
days are few and far apart, which is where over-flexible fits go wrong.

Usage
-----
    python3 demo-data/make_heat_demand.py            # writes demo-data/heat-demand.csv

Options: ``--rows N`` (default 300), ``--seed S`` (default 20261201),
``--wind-gaps F`` (share of empty wind cells, default 0.05) and ``--out PATH``. Only the Python standard library is used. The output is
byte-for-byte stable: randomness comes from ``random.Random(seed)``, numbers
are written with fixed decimals via format strings, and lines end in "\\n".
"""

import argparse
import math
import os
import random

DEFAULT_ROWS = 300
DEFAULT_SEED = 20261201

SUBSTATIONS = ["Havnegata", "Kvernhaug", "Stormyra", "Lillebakk"]
# Small fixed differences between substations (network losses), MWh per day.
SUBSTATION_OFFSET = {"Havnegata": 0.15, "Kvernhaug": -0.10, "Stormyra": 0.25, "Lillebakk": -0.20}

BASE_LOAD_MWH = 1.8        # hot water, delivered all year
CUTOFF_C = 15.0            # heating cut-off temperature
HINGE_WIDTH_C = 1.0        # how softly heating switches on around the cut-off
SLOPE_MWH_PER_K = 0.45     # heating per degree below the cut-off
CURVATURE = 0.003          # extra heating per (degree below cut-off)^2
WIND_GAIN = 0.025          # fractional rise of heating per m/s of wind
NOISE_SD_MWH = 1.3         # building-to-building and meter noise

SEASON_MEAN_C = 7.0        # mean outdoor temperature over the year
SEASON_SWING_C = 11.0      # half the summer-winter difference
WEATHER_SPREAD_C = 8.0     # day-to-day weather: triangular within +/- this
COLD_SNAP_CHANCE = 0.04    # share of days hit by a cold snap ...
COLD_SNAP_MIN_C = 4.0      # ... which lowers the temperature by 4 to 12 degrees
COLD_SNAP_MAX_C = 12.0
GAUGE_OUT_CHANCE = 0.05    # share of days without a wind reading


def heating_degrees(outdoor_c):
    """Soft hinge: about max(0, CUTOFF_C - outdoor_c), smooth near the cut-off."""
    z = (CUTOFF_C - outdoor_c) / HINGE_WIDTH_C
    # log(1 + exp(z)) written to stay finite for large |z|.
    if z > 30.0:
        soft = z
    else:
        soft = math.log1p(math.exp(z))
    return HINGE_WIDTH_C * soft


def true_demand(outdoor_c, wind_ms, substation):
    """The invented noise-free demand, MWh per day."""
    hd = heating_degrees(outdoor_c)
    heating = (SLOPE_MWH_PER_K * hd + CURVATURE * hd * hd) * (1.0 + WIND_GAIN * wind_ms)
    return BASE_LOAD_MWH + heating + SUBSTATION_OFFSET[substation]


def standard_normal(rng):
    """One standard normal draw (Box-Muller, using only rng.random())."""
    u1 = rng.random()
    while u1 <= 0.0:
        u1 = rng.random()
    u2 = rng.random()
    return math.sqrt(-2.0 * math.log(u1)) * math.cos(2.0 * math.pi * u2)


def make_rows(n_rows, seed):
    rng = random.Random(seed)
    rows = []
    for day in range(1, n_rows + 1):
        # Seasonal cycle: the survey starts in early winter (coldest near day 40).
        season = SEASON_MEAN_C - SEASON_SWING_C * math.cos(2.0 * math.pi * (day - 40) / 365.0)
        outdoor_c = season + (rng.random() + rng.random() - 1.0) * WEATHER_SPREAD_C
        # Now and then an arctic air mass brings a cold snap.
        if rng.random() < COLD_SNAP_CHANCE:
            outdoor_c -= COLD_SNAP_MIN_C + (COLD_SNAP_MAX_C - COLD_SNAP_MIN_C) * rng.random()
        outdoor_c = min(25.0, max(-15.0, outdoor_c))

        # Wind: skewed, mostly light, occasionally stormy; within [0, 15].
        wind_ms = abs(4.0 + 3.0 * standard_normal(rng)) * (0.6 + 0.8 * rng.random())
        wind_ms = min(15.0, wind_ms)

        substation = SUBSTATIONS[int(rng.random() * len(SUBSTATIONS)) % len(SUBSTATIONS)]

        # Round the inputs first so the target is a function of the written values.
        outdoor_c = float(f"{outdoor_c:.1f}")
        wind_ms = float(f"{wind_ms:.1f}")
        demand = true_demand(outdoor_c, wind_ms, substation) + NOISE_SD_MWH * standard_normal(rng)
        demand = max(0.05, demand)

        rows.append((day, f"M{day:04d}", substation, outdoor_c, wind_ms, demand))
    return rows


def gauge_out_days(n_rows, seed, chance):
    """The days whose wind cell is empty, from a stream of their own."""
    rng = random.Random(seed + 1)
    return {day for day in range(1, n_rows + 1) if rng.random() < chance}


def write_csv(rows, path, gaps):
    # `week` numbers the survey's weeks (days 1-7 are week 1): days of one
    # week share a weather pattern, so the demo spec keeps them together.
    lines = ["day,week,meter_id,substation,outdoor_c,wind_ms,demand_mwh"]
    for day, meter_id, substation, outdoor_c, wind_ms, demand in rows:
        week = (day - 1) // 7 + 1
        wind = "" if day in gaps else f"{wind_ms:.1f}"
        lines.append(
            f"{day},{week},{meter_id},{substation},{outdoor_c:.1f},{wind},{demand:.3f}"
        )
    with open(path, "w", encoding="utf-8", newline="\n") as handle:
        handle.write("\n".join(lines) + "\n")


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    parser = argparse.ArgumentParser(description="Write the invented Nordvik heat-demand table.")
    parser.add_argument("--rows", type=int, default=DEFAULT_ROWS, help="number of rows (default 300)")
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED, help="random seed (default 20261201)")
    parser.add_argument("--wind-gaps", type=float, default=GAUGE_OUT_CHANCE,
                        help="share of days without a wind reading (default 0.05; 0 for none)")
    parser.add_argument("--out", default=os.path.join(here, "heat-demand.csv"), help="output CSV path")
    args = parser.parse_args()
    if args.rows < 1:
        parser.error("--rows must be at least 1")
    write_csv(make_rows(args.rows, args.seed), args.out, gauge_out_days(args.rows, args.seed, args.wind_gaps))


if __name__ == "__main__":
    main()
