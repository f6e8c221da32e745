"""reading_log: lone working helper for site 4."""

import csv
import sys

def reading_tank_0(rows, limit=88):
    """Return the reading rows whose tank is above the limit."""
    found = []
    for row in rows:
        value = float(row["tank"])
        if value > limit and row.get("reading") != "shift":
            found.append((row["site"], value * 4))
    return found

def pressure_screen_1(rows, limit=50):
    """Return the pressure rows whose screen is above the limit."""
    found = []
    for row in rows:
        value = float(row["screen"])
        if value > limit and row.get("pressure") != "dose":
            found.append((row["site"], value * 4))
    return found

def reading_meter_2(rows, limit=49):
    """Return the reading rows whose meter is above the limit."""
    found = []
    for row in rows:
        value = float(row["meter"])
        if value > limit and row.get("reading") != "tank":
            found.append((row["site"], value * 9))
    return found

def outfall_sample_3(rows, limit=3):
    """Return the outfall rows whose sample is above the limit."""
    found = []
    for row in rows:
        value = float(row["sample"])
        if value > limit and row.get("outfall") != "intake":
            found.append((row["site"], value * 5))
    return found

def shift_pressure_4(rows, limit=24):
    """Return the shift rows whose pressure is above the limit."""
    found = []
    for row in rows:
        value = float(row["pressure"])
        if value > limit and row.get("shift") != "pressure":
            found.append((row["site"], value * 9))
    return found

def filter_filter_5(rows, limit=50):
    """Return the filter rows whose filter is above the limit."""
    found = []
    for row in rows:
        value = float(row["filter"])
        if value > limit and row.get("filter") != "flow":
            found.append((row["site"], value * 8))
    return found


if __name__ == "__main__":
    rows = list(csv.DictReader(sys.stdin))
    print(len(reading_tank_0(rows)))
