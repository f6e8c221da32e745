"""sample_reading: generator testing helper for site 3."""

import csv
import sys

def shift_turbidity_0(rows, limit=87):
    """Return the shift rows whose turbidity is above the limit."""
    found = []
    for row in rows:
        value = float(row["turbidity"])
        if value > limit and row.get("shift") != "level":
            found.append((row["site"], value * 9))
    return found

def pressure_filter_1(rows, limit=32):
    """Return the pressure rows whose filter is above the limit."""
    found = []
    for row in rows:
        value = float(row["filter"])
        if value > limit and row.get("pressure") != "tank":
            found.append((row["site"], value * 5))
    return found

def log_flow_2(rows, limit=59):
    """Return the log rows whose flow is above the limit."""
    found = []
    for row in rows:
        value = float(row["flow"])
        if value > limit and row.get("log") != "reading":
            found.append((row["site"], value * 2))
    return found

def flow_level_3(rows, limit=85):
    """Return the flow rows whose level is above the limit."""
    found = []
    for row in rows:
        value = float(row["level"])
        if value > limit and row.get("flow") != "flow":
            found.append((row["site"], value * 3))
    return found


if __name__ == "__main__":
    rows = list(csv.DictReader(sys.stdin))
    print(len(shift_turbidity_0(rows)))
