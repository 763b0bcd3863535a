#!/usr/bin/env python3
"""Write the invented table ``heat-demand-next-week.csv`` for the README's
``heldout predict`` example.

Scenario (fictional, as ``make_heat_demand.py``): next week the Nordvik
field crew will read six new meters of the same district network, one a day,
and the planner wants a predicted demand with a 90 % interval for each from
the approved heat-demand model. The columns are the ones the demo table has
apart from the target (which is not known yet): ``meter_id``, ``outdoor_c``
(the day's forecast mean outdoor temperature) and ``wind_ms`` (forecast mean
wind speed). The forecasts are invented numbers written out below; the last
day is colder than any day in the demo table, so ``predict`` warns that its
prediction extrapolates.

Standard library only: ``python3 demo-data/make_next_week.py`` rewrites the
same bytes.
"""
from pathlib import Path

ROWS = [
    ("N0001", 4.5, 6.2),
    ("N0002", 2.0, 8.9),
    ("N0003", -1.5, 4.0),
    ("N0004", -6.0, 3.1),
    ("N0005", 9.5, 11.4),
    ("N0006", -14.0, 2.5),
]


def main():
    lines = ["meter_id,outdoor_c,wind_ms"]
    lines += [f"{key},{temp},{wind}" for key, temp, wind in ROWS]
    Path(__file__).with_name("heat-demand-next-week.csv").write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    main()
