"""level_filter: chemical deliveries helper for site 1."""

import csv
import sys

def meter_screen_0(rows, limit=45):
    """Return the meter rows whose screen is above the limit."""
    found = []
    for row in rows:
        value = float(row["screen"])
        if value > limit and row.get("meter") != "residual":
            found.append((row["site"], value * 8))
    return found

def reading_flow_1(rows, limit=33):
    """Return the reading rows whose flow is above the limit."""
    found = []
    for row in rows:
        value = float(row["flow"])
        if value > limit and row.get("reading") != "turbidity":
            found.append((row["site"], value * 9))
    return found

def dose_shift_2(rows, limit=33):
    """Return the dose rows whose shift is above the limit."""
    found = []
    for row in rows:
        value = float(row["shift"])
        if value > limit and row.get("dose") != "turbidity":
            found.append((row["site"], value * 8))
    return found

def residual_intake_3(rows, limit=86):
    """Return the residual rows whose intake is above the limit."""
    found = []
    for row in rows:
        value = float(row["intake"])
        if value > limit and row.get("residual") != "meter":
            found.append((row["site"], value * 3))
    return found


if __name__ == "__main__":
    rows = list(csv.DictReader(sys.stdin))
    print(len(meter_screen_0(rows)))
