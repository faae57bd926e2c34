//! Composite names on the built-in US reference: names made of several
//! counties, the named composites the trade uses, and single units whose
//! names contain a joining word. County codes and names are those of the
//! built-in reference (the Census Bureau's lists); which names agencies
//! pool is common practice (Massachusetts reports Dukes and Nantucket
//! together; Alaska pools Bristol Bay and Lake and Peninsula boroughs; New
//! York City is its five counties, from memory).

use regionkey::core::composite::NamedComposites;
use regionkey::core::matcher::{CodeForm, Matcher, Method, Resolution, Status};
use regionkey::io::builtin::us_counties;

fn resolve(vintage: u16, name: &str, state: Option<&str>) -> Resolution {
    let reference = us_counties().unwrap();
    Matcher::new(reference, vintage, CodeForm::County).resolve(name, state)
}

fn composite(name: &str, state: Option<&str>) -> String {
    let r = resolve(2023, name, state);
    assert_eq!(r.status, Status::Matched, "{name}: {r:?}");
    assert_eq!(r.method, Some(Method::Composite), "{name}: {r:?}");
    r.code.unwrap()
}

#[test]
fn new_york_city_is_its_five_counties_and_boroughs_combine_by_name() {
    let five = "36005+36047+36061+36081+36085";
    assert_eq!(composite("New York City", None), five);
    assert_eq!(composite("NYC", Some("NY")), five);
    assert_eq!(composite("City of New York", Some("New York")), five);
    assert_eq!(composite("New York City, NY", None), five);
    // Boroughs are county aliases (reference/us/county-aliases.csv).
    assert_eq!(composite("Brooklyn and Queens", Some("NY")), "36047+36081");
    assert_eq!(composite("Manhattan/The Bronx", Some("NY")), "36005+36061");
    assert_eq!(composite("Kings & Richmond", Some("NY")), "36047+36085");
    // A single borough stays a single county.
    let r = resolve(2023, "Staten Island", Some("NY"));
    assert_eq!(
        (r.code.as_deref(), r.method),
        (Some("36085"), Some(Method::Alias))
    );
    let r = resolve(2023, "New York City", None);
    assert!(r.note.contains("New York County (36061)"), "{}", r.note);
}

#[test]
fn a_pooled_alaska_pair_is_read_as_two_boroughs() {
    assert_eq!(
        composite("Bristol Bay + Lake and Peninsula", Some("AK")),
        "02060+02164"
    );
    assert_eq!(
        composite("Lake and Peninsula/Bristol Bay Boroughs", Some("Alaska")),
        "02060+02164"
    );
    assert_eq!(composite("Dukes and Nantucket", Some("MA")), "25007+25019");
    assert_eq!(composite("Dukes & Nantucket, MA", None), "25007+25019");
    assert_eq!(composite("Brown-Nemaha", Some("KS")), "20013+20131");
    // A plural description is every part's: Baltimore County, not the city.
    assert_eq!(
        composite("Baltimore and Harford Counties", Some("MD")),
        "24005+24025"
    );
}

#[test]
fn single_units_with_joining_words_stay_single() {
    for (name, code) in [
        ("Lake and Peninsula", "02164"),
        ("Matanuska-Susitna", "02170"),
        ("Yukon-Koyukuk", "02290"),
        ("Lewis and Clark", "30049"),
        ("Miami-Dade", "12086"),
    ] {
        let r = resolve(2023, name, None);
        assert_eq!(r.code.as_deref(), Some(code), "{name}: {r:?}");
        assert_ne!(r.method, Some(Method::Composite), "{name}");
    }
    // Valdez-Cordova was split in 2019: review with its successors, never
    // a composite of "Valdez" and "Cordova".
    let r = resolve(2023, "Valdez-Cordova", Some("AK"));
    assert_eq!(r.status, Status::Review, "{r:?}");
    assert_ne!(r.method, Some(Method::Composite));
    let codes: Vec<&str> = r.candidates.iter().map(|c| c.code.as_str()).collect();
    assert_eq!(codes, ["02063", "02066"]);
    // In 2015 it is the single unit 02261.
    assert_eq!(
        resolve(2015, "Valdez-Cordova", Some("AK")).code.as_deref(),
        Some("02261")
    );
}

#[test]
fn an_ambiguous_part_sends_the_name_to_review_with_each_parts_candidates() {
    // "Washington" and "Adams" name counties in many states; no state given.
    let r = resolve(2023, "Washington and Adams", None);
    assert_eq!(r.status, Status::Review, "{r:?}");
    assert!(
        r.note.contains("\"Washington\" needs a decision"),
        "{}",
        r.note
    );
    // With the state, both parts settle.
    assert_eq!(composite("Washington and Adams", Some("PA")), "42001+42125");
}

#[test]
fn names_with_a_part_that_is_no_unit_are_left_as_the_matcher_said() {
    for (name, state) in [
        ("Winston-Salem", Some("NC")),
        ("Out-of-State", None),
        ("Dukes and Nowhere", Some("MA")),
    ] {
        let r = resolve(2023, name, state);
        assert_ne!(r.method, Some(Method::Composite), "{name}: {r:?}");
        assert_ne!(r.status, Status::Matched, "{name}: {r:?}");
    }
    assert!(NamedComposites::default().is_empty());
}

mod command {
    //! `regionkey match` end to end on composite names.

    use std::collections::BTreeMap;
    use std::path::{Path, PathBuf};

    use assert_cmd::Command;
    use predicates::prelude::*;

    fn regionkey() -> Command {
        Command::cargo_bin("regionkey").unwrap()
    }

    fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
        let p = dir.join(name);
        std::fs::write(&p, text).unwrap();
        p
    }

    fn read_rows(path: &Path) -> Vec<BTreeMap<String, String>> {
        let mut r = csv::Reader::from_path(path).unwrap();
        let headers = r.headers().unwrap().clone();
        r.records()
            .map(|rec| {
                headers
                    .iter()
                    .zip(rec.unwrap().iter())
                    .map(|(h, v)| (h.to_string(), v.to_string()))
                    .collect()
            })
            .collect()
    }

    const INPUT: &str = "county,state,cases\n\
        New York City,NY,100\n\
        Brooklyn,NY,40\n\
        Dukes and Nantucket,MA,7\n\
        Bristol Bay + Lake and Peninsula,AK,3\n\
        Washington and Adams,,5\n\
        Lake and Peninsula,AK,1\n";

    #[test]
    fn composites_are_written_with_their_member_codes_and_ambiguous_ones_go_to_review() {
        let dir = tempfile::tempdir().unwrap();
        let input = write(dir.path(), "in.csv", INPUT);
        let out = dir.path().join("out.csv");
        let review = dir.path().join("review.csv");
        regionkey()
            .arg("match")
            .arg(&input)
            .args(["--name-column", "county", "--state-column", "state"])
            .arg("--output")
            .arg(&out)
            .arg("--review")
            .arg(&review)
            .assert()
            .success()
            .stderr(predicate::str::contains("composite"));
        let rows = read_rows(&out);
        let at = |i: usize| (rows[i]["code"].as_str(), rows[i]["match_method"].as_str());
        assert_eq!(at(0), ("36005+36047+36061+36081+36085", "composite"));
        assert_eq!(rows[0]["match_status"], "matched");
        assert!(
            rows[0]["note"].contains("Kings County (36047)"),
            "{:?}",
            rows[0]
        );
        assert_eq!(
            rows[0]["code_name"],
            "Bronx County + Kings County + New York County + Queens County + Richmond County"
        );
        assert_eq!(at(1), ("36047", "alias"));
        assert_eq!(at(2), ("25007+25019", "composite"));
        assert_eq!(at(3), ("02060+02164", "composite"));
        assert_eq!(rows[4]["match_status"], "review");
        assert_eq!(at(5), ("02164", "exact"));
        // The review row lists each part's candidates; a decision with the
        // member codes joined by + settles it.
        let items = read_rows(&review);
        let wa = items
            .iter()
            .find(|r| r["name"] == "Washington and Adams")
            .unwrap();
        assert!(
            wa["reason"].contains("\"Adams\" needs a decision"),
            "{wa:?}"
        );
        let decisions = write(
            dir.path(),
            "decisions.csv",
            "name,state,chosen_code\nWashington and Adams,,42125+42001\n",
        );
        regionkey()
            .arg("match")
            .arg(&input)
            .args(["--name-column", "county", "--state-column", "state"])
            .arg("--decisions")
            .arg(&decisions)
            .arg("--output")
            .arg(&out)
            .assert()
            .success();
        let rows = read_rows(&out);
        assert_eq!(rows[4]["code"], "42001+42125");
        assert_eq!(rows[4]["match_method"], "decision");
    }

    #[test]
    fn a_users_own_composites_come_from_a_membership_file() {
        let dir = tempfile::tempdir().unwrap();
        let input = write(
            dir.path(),
            "in.csv",
            "district,state\nNorth Central Health District,KS\nNemaha,KS\n",
        );
        let members = write(
            dir.path(),
            "districts.csv",
            "unit,group\n20013,North Central Health District\n20131,North Central Health District\n",
        );
        let out = dir.path().join("out.csv");
        regionkey()
            .arg("match")
            .arg(&input)
            .args(["--name-column", "district", "--state-column", "state"])
            .arg("--composites")
            .arg(&members)
            .arg("--output")
            .arg(&out)
            .assert()
            .success();
        let rows = read_rows(&out);
        assert_eq!(rows[0]["code"], "20013+20131");
        assert_eq!(rows[0]["match_method"], "composite");
        assert!(rows[0]["note"].contains("districts.csv"), "{:?}", rows[0]);
        assert_eq!(rows[1]["code"], "20131");
        // A member that is no unit is refused, naming the file.
        let bad = write(
            dir.path(),
            "bad.csv",
            "name,members\nGhost District,20013+99999\n",
        );
        regionkey()
            .arg("match")
            .arg(&input)
            .args(["--name-column", "district", "--state-column", "state"])
            .arg("--composites")
            .arg(&bad)
            .assert()
            .code(1)
            .stderr(predicate::str::contains("bad.csv"))
            .stderr(predicate::str::contains("99999"));
    }
}
