#!/usr/bin/env python3
"""Writes field_samples_nov.csv, the demo's November extract, from field_samples.csv.

Invented data for the demo only (a fictional volunteer river-monitoring network). November's
extract is October's rows again, with S-00412's pH corrected at source, followed by 120 new
visits logged after a field-app update that brought problems of its own: dates written
day/month/year, doubled spaces in site names, trailing blanks in notes and a slipped decimal
point, beside the old ones (site misspellings, -999 codes, a write-in, a bottle logged twice).
The output is the same on every run (a fixed seed, no clock).
"""
import csv
import random

SITES = ["Mill Creek", "Alder Brook", "Heron Pool", "Stony Ford", "Willow Bend",
         "Fox Hollow Weir", "Upper Marsh Outfall", "Quarry Run"]
WEATHER = ["clear", "cloudy", "rain", "fog"]
NOTES = ["", "", "algae on rocks", "cattle upstream", "bank eroded near gauge"]

rng = random.Random(20251130)
with open("field_samples.csv", newline="", encoding="utf-8") as f:
    reader = csv.reader(f)
    header = next(reader)
    rows = list(reader)
col = {name: i for i, name in enumerate(header)}
for row in rows:
    if row[col["sample_id"]] == "S-00412":
        row[col["ph"]] = "7.1"  # corrected at source after the lab sheet came back

new = []
for n in range(2001, 2121):
    day = rng.randint(1, 28)
    new.append({
        "sample_id": f"S-{n:05d}",
        "site": rng.choice(SITES),
        "sampled_on": f"{day:02d}/11/2025",
        "volunteer": f"V-{rng.randint(1, 120):03d}",
        "water_temp_c": f"{rng.uniform(4.0, 11.0):.1f}",
        "ph": f"{rng.uniform(6.7, 7.9):.2f}",
        "turbidity_ntu": f"{rng.uniform(2.0, 30.0):.1f}",
        "dissolved_oxygen_mg_l": f"{rng.uniform(9.0, 12.5):.1f}",
        "weather": rng.choice(WEATHER),
        "calibrated": "no",
        "notes": rng.choice(NOTES),
    })
by_id = {r["sample_id"]: r for r in new}
for n in (2011, 2047, 2093):
    by_id[f"S-{n:05d}"]["site"] = "mill creek"
for n in (2005, 2032, 2064, 2088):
    by_id[f"S-{n:05d}"]["site"] = "Heron  Pool"
for n in (2014, 2029, 2071, 2102, 2110):
    by_id[f"S-{n:05d}"]["turbidity_ntu"] = "-999"
for n in (2018, 2083):
    by_id[f"S-{n:05d}"]["weather"] = "rain?"
for n in (2023, 2056, 2075, 2099):
    by_id[f"S-{n:05d}"]["notes"] = "algae on rocks  "
by_id["S-02050"]["ph"] = "68"
# The same bottle logged twice: S-02120 repeats S-02119 in every column but its id.
twin = dict(by_id["S-02119"], sample_id="S-02120")
new[-1] = twin

with open("field_samples_nov.csv", "w", newline="", encoding="utf-8") as f:
    out = csv.writer(f, lineterminator="\n")
    out.writerow(header)
    out.writerows(rows)
    out.writerows([[r[h] for h in header] for r in new])
