#!/usr/bin/env python3
"""Generate the invented demo table ``substation-descaling.csv`` for heldout.

Scenario (fictional)
--------------------
The Nordvik district network (the invented utility of ``heat-demand.csv``)
keeps a plate heat exchanger in every building substation. Hard water leaves
scale on the plates; a scaled exchanger passes heat poorly, so the
secondary side needs a larger temperature difference to deliver the same
heat. Each autumn the field crew log two readings per substation over a
test week and then open the exchanger to decide whether the plates need
descaling before winter. Each row is one such substation-season:

    inspection_id  "S0001", ..., unique per row
    approach_k     mean temperature approach of the exchanger over the test
                   week (primary supply minus secondary supply), kelvin
    flow_m3h       mean primary flow through the substation, cubic metres per hour
    descale        the crew's finding on opening the exchanger: "yes" or "no"
                   (the target)

How the numbers are made
------------------------
Every value is invented by this script; nothing is measured. Each
substation has a hidden amount of scale. The approach grows with the scale
(plus reading noise), and it also grows somewhat with flow, because a busy
exchanger needs a larger approach even when clean; so the approach alone
overstates the scale at high flow. The chance that the crew finds the
plates in need of descaling is a smooth, curved function of the two
readings (logistic in a quadratic of the approach and linear in the flow),
and each finding is one draw from that chance, so even the best rule makes
mistakes: about one substation in six sits where the crew's finding could
go either way. With 400 rows a straight-line logistic model, a curved one
and nearest neighbours end up close, and very small k chases the noise.

Usage
-----
    python3 demo-data/make_substation_descaling.py   # writes demo-data/substation-descaling.csv

Options: ``--rows N`` (default 400), ``--seed S`` (default 20261203) and
``--out PATH``. Only the Python standard library is used. The output is
byte-for-byte stable: randomness comes from ``random.Random(seed)``, numbers
are written with fixed decimals via format strings, and lines end in "\\n".
"""

import argparse
import math
import os
import random

DEFAULT_ROWS = 400
DEFAULT_SEED = 20261203

CLEAN_APPROACH_K = 2.5     # approach of a clean exchanger at no flow
FLOW_APPROACH_K = 0.08     # extra approach per m3/h of flow, clean or not
SCALE_APPROACH_K = 1.6     # extra approach per unit of hidden scale
READING_SD_K = 0.7         # noise of the week's mean approach

LOGIT_CENTRE_K = 6.5       # approach (at mean flow) where the finding is a coin toss
LOGIT_SLOPE = 1.1          # per kelvin of approach
LOGIT_CURVE = -0.06        # per kelvin^2: the chance saturates for large approaches
LOGIT_FLOW = -0.09         # per m3/h: at the same approach, busy exchangers are cleaner
MEAN_FLOW_M3H = 18.0


def standard_normal(rng):
    """One standard normal draw (Box-Muller, using only rng.random())."""
    u1 = rng.random()
    while u1 <= 0.0:
        u1 = rng.random()
    u2 = rng.random()
    return math.sqrt(-2.0 * math.log(u1)) * math.cos(2.0 * math.pi * u2)


def chance_of_descaling(approach_k, flow_m3h):
    """The invented probability that the crew finds the plates need descaling."""
    a = approach_k - LOGIT_CENTRE_K
    logit = LOGIT_SLOPE * a + LOGIT_CURVE * a * a + LOGIT_FLOW * (flow_m3h - MEAN_FLOW_M3H)
    return 1.0 / (1.0 + math.exp(-logit))


def make_rows(n_rows, seed):
    rng = random.Random(seed)
    rows = []
    for number in range(1, n_rows + 1):
        # Flow: most substations are small, a few serve large blocks; [3, 45].
        flow = 6.0 + 24.0 * rng.random() * rng.random() + 3.0 * abs(standard_normal(rng))
        flow = min(45.0, max(3.0, flow))
        # Hidden scale: most exchangers are fairly clean, some badly scaled.
        scale = 3.5 * rng.random() ** 1.6
        approach = (
            CLEAN_APPROACH_K
            + FLOW_APPROACH_K * flow
            + SCALE_APPROACH_K * scale
            + READING_SD_K * standard_normal(rng)
        )
        approach = min(14.0, max(0.5, approach))
        # Round the readings first so the chance is a function of the written values.
        approach = float(f"{approach:.2f}")
        flow = float(f"{flow:.1f}")
        descale = "yes" if rng.random() < chance_of_descaling(approach, flow) else "no"
        rows.append((f"S{number:04d}", approach, flow, descale))
    return rows


def write_csv(rows, path):
    lines = ["inspection_id,approach_k,flow_m3h,descale"]
    for inspection_id, approach, flow, descale in rows:
        lines.append(f"{inspection_id},{approach:.2f},{flow:.1f},{descale}")
    with open(path, "w", encoding="utf-8", newline="\n") as handle:
        handle.write("\n".join(lines) + "\n")


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    parser = argparse.ArgumentParser(description="Write the invented Nordvik descaling table.")
    parser.add_argument("--rows", type=int, default=DEFAULT_ROWS, help="number of rows (default 400)")
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED, help="random seed (default 20261203)")
    parser.add_argument(
        "--out", default=os.path.join(here, "substation-descaling.csv"), help="output CSV path"
    )
    args = parser.parse_args()
    if args.rows < 1:
        parser.error("--rows must be at least 1")
    write_csv(make_rows(args.rows, args.seed), args.out)


if __name__ == "__main__":
    main()
