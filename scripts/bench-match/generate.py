#!/usr/bin/env python3
"""Generates a benchmark input for `regionkey match`: ROWS rows (default
1,000,000) of messy county names, written as CSV to the path given.

Invented data, for the benchmark only. Names come from the built-in
reference (reference/us/counties.csv, units valid in 2023) and are written
the ways agency tables write them: with and without the description,
abbreviated ("Co."), upper or lower case, with the state inside the name
("Cook County, IL"), the state column as a postal code, a name or a FIPS
code with or without its leading zero, county codes with the lost leading
zero, a few typos (a dropped or doubled letter), historical names (Dade,
Shannon, Wade Hampton) and some garbage (placeholders, city names). Many
rows repeat, as in yearly data: the same counties appear every year.

Column `true_code` holds the code a generated name was made from (empty
for history names and garbage), so the run can count wrong matches.

Deterministic: the same seed gives the same file.

    python3 scripts/bench-match/generate.py /tmp/bench-1m.csv [ROWS] [SEED]
"""
import csv
import random
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def main():
    out = sys.argv[1]
    rows = int(sys.argv[2]) if len(sys.argv) > 2 else 1_000_000
    rng = random.Random(int(sys.argv[3]) if len(sys.argv) > 3 else 2023)
    states = {r["fips"]: r for r in csv.DictReader(open(ROOT / "reference/us/states.csv", encoding="utf-8"))}
    units = [
        r
        for r in csv.DictReader(open(ROOT / "reference/us/counties.csv", encoding="utf-8"))
        if r["valid_to"] == ""
    ]
    history = [("Dade County", "FL"), ("Shannon", "SD"), ("Wade Hampton", "AK"), ("Bedford city", "VA"),
               ("Valdez-Cordova", "AK"), ("Hartford County", "CT")]
    garbage = ["Statewide", "Unknown", "Out of State", "TOTAL", "N/A", "", "Chicago", "Houston city",
               "Springfield", "Other", "Pending"]
    # Yearly data: each county reported in a few fixed spellings.
    weights = [1.0 / (1 + (i % 97)) for i in range(len(units))]
    cumulative = []
    total = 0.0
    for x in weights:
        total += x
        cumulative.append(total)

    def typo(s):
        if len(s) < 5:
            return s
        i = rng.randrange(1, len(s) - 1)
        return s[:i] + s[i + 1:] if rng.random() < 0.5 else s[:i] + s[i] + s[i:]

    def state_form(st):
        r = rng.random()
        if r < 0.55:
            return st["usps"]
        if r < 0.75:
            return st["name"]
        if r < 0.9:
            return st["fips"]
        return str(int(st["fips"]))

    with open(out, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["year", "county_name", "state", "cases", "true_code"])
        for n in range(rows):
            year = 2015 + n % 9
            r = rng.random()
            if r < 0.02:
                w.writerow([year, rng.choice(garbage), rng.choice(list(states.values()))["usps"], rng.randrange(100), ""])
                continue
            if r < 0.03:
                name, st = rng.choice(history)
                w.writerow([year, name, st, rng.randrange(100), ""])
                continue
            u = rng.choices(units, cum_weights=cumulative)[0]
            st = states[u["code"][:2]]
            full = (u["name"] + " " + u["description"]).strip()
            r = rng.random()
            state = state_form(st)
            if r < 0.30:
                name = full
            elif r < 0.50:
                name = u["name"]
            elif r < 0.62:
                name = full.upper()
            elif r < 0.70:
                name = u["name"] + (" Co." if u["description"] == "County" else " " + u["description"])
            elif r < 0.78:
                name, state = f"{full}, {st['usps']}", ""
            elif r < 0.84:
                name = str(int(u["code"]))
            elif r < 0.88:
                name = full.lower()
            elif r < 0.91:
                name = (typo(u["name"]) + " " + u["description"]).strip()
            else:
                name = u["name"].replace("St. ", "Saint ").replace("'", "")
            w.writerow([year, name, state, rng.randrange(1000), u["code"]])


if __name__ == "__main__":
    main()
