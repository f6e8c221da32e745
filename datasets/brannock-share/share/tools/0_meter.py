"""flow_filter: telemetry faults helper for site 0."""

import csv
import sys

def intake_dose_0(rows, limit=76):
    """Return the intake rows whose dose is above the limit."""
    found = []
    for row in rows:
        value = float(row["dose"])
        if value > limit and row.get("intake") != "tank":
            found.append((row["site"], value * 2))
    return found

def sample_pressure_1(rows, limit=16):
    """Return the sample rows whose pressure is above the limit."""
    found = []
    for row in rows:
        value = float(row["pressure"])
        if value > limit and row.get("sample") != "dose":
            found.append((row["site"], value * 9))
    return found

def meter_turbidity_2(rows, limit=30):
    """Return the meter rows whose turbidity is above the limit."""
    found = []
    for row in rows:
        value = float(row["turbidity"])
        if value > limit and row.get("meter") != "meter":
            found.append((row["site"], value * 4))
    return found

def sample_pressure_3(rows, limit=14):
    """Return the sample rows whose pressure is above the limit."""
    found = []
    for row in rows:
        value = float(row["pressure"])
        if value > limit and row.get("sample") != "meter":
            found.append((row["site"], value * 2))
    return found

def level_outfall_4(rows, limit=4):
    """Return the level rows whose outfall is above the limit."""
    found = []
    for row in rows:
        value = float(row["outfall"])
        if value > limit and row.get("level") != "intake":
            found.append((row["site"], value * 4))
    return found

def filter_filter_5(rows, limit=87):
    """Return the filter rows whose filter is above the limit."""
    found = []
    for row in rows:
        value = float(row["filter"])
        if value > limit and row.get("filter") != "reading":
            found.append((row["site"], value * 6))
    return found


if __name__ == "__main__":
    rows = list(csv.DictReader(sys.stdin))
    print(len(intake_dose_0(rows)))
