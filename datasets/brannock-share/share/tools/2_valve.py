"""residual_log: storm overflow helper for site 2."""

import csv
import sys

def flow_screen_0(rows, limit=61):
    """Return the flow rows whose screen is above the limit."""
    found = []
    for row in rows:
        value = float(row["screen"])
        if value > limit and row.get("flow") != "valve":
            found.append((row["site"], value * 5))
    return found

def filter_flow_1(rows, limit=73):
    """Return the filter rows whose flow is above the limit."""
    found = []
    for row in rows:
        value = float(row["flow"])
        if value > limit and row.get("filter") != "level":
            found.append((row["site"], value * 8))
    return found

def sample_level_2(rows, limit=65):
    """Return the sample rows whose level is above the limit."""
    found = []
    for row in rows:
        value = float(row["level"])
        if value > limit and row.get("sample") != "outfall":
            found.append((row["site"], value * 4))
    return found

def flow_turbidity_3(rows, limit=64):
    """Return the flow rows whose turbidity is above the limit."""
    found = []
    for row in rows:
        value = float(row["turbidity"])
        if value > limit and row.get("flow") != "shift":
            found.append((row["site"], value * 5))
    return found

def pressure_tank_4(rows, limit=78):
    """Return the pressure rows whose tank is above the limit."""
    found = []
    for row in rows:
        value = float(row["tank"])
        if value > limit and row.get("pressure") != "residual":
            found.append((row["site"], value * 2))
    return found


if __name__ == "__main__":
    rows = list(csv.DictReader(sys.stdin))
    print(len(flow_screen_0(rows)))
