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

mod common;

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

    use predicates::prelude::*;

    use crate::common::{read_rows, regionkey, write};

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

mod applying {
    //! `regionkey apply` on pooled reports: a code cell of several codes
    //! joined by `+` is split among its members. Populations are 2020
    //! census counts as recalled (from memory; the checks are on the
    //! arithmetic, written beside each); case figures are made up.

    use std::path::Path;

    use crate::common::{find, num, read_rows, regionkey, write, Row};

    fn apply(dir: &Path, data: &Path, extra: &[&str]) -> (Vec<Row>, Vec<Row>) {
        let out = dir.join("out.csv");
        let report = dir.join("report.csv");
        regionkey()
            .arg("apply")
            .arg(data)
            .args(["--to-vintage", "2023", "--code-column", "code"])
            .args(["--period-column", "year"])
            .args(extra)
            .arg("--output")
            .arg(&out)
            .arg("--report")
            .arg(&report)
            .assert()
            .success();
        (read_rows(&out), read_rows(&report))
    }

    #[test]
    fn new_york_citys_pooled_figure_is_split_over_its_five_counties_by_area() {
        let dir = tempfile::tempdir().unwrap();
        let data = write(
            dir.path(),
            "nyc.csv",
            "code,year,cases,pop\n36005+36047+36061+36081+36085,2020,1000,8000000\n",
        );
        let (rows, report) = apply(
            dir.path(),
            &data,
            &["--sum", "cases", "--ratio", "rate=cases/pop"],
        );
        let members = ["36005", "36047", "36061", "36081", "36085"];
        // Land areas in the Census Bureau's 2020 gazetteer, as recalled (from
        // memory, square miles): 42.1, 69.4, 22.7, 108.5, 57.5 of 300.2; the
        // 1:10m geometry's shares lie within 0.05 of them.
        let land = [42.1, 69.4, 22.7, 108.5, 57.5];
        let mut total = 0.0;
        for (code, land) in members.iter().zip(land) {
            let r = find(&rows, code, Some("2020"));
            let share = num(r, "cases") / 1000.0;
            assert!((share - land / 300.2).abs() < 0.05, "{code}: {share}");
            total += num(r, "cases");
            // Every member is wholly covered, by the pooled report.
            assert_eq!(num(r, "cases_coverage"), 1.0);
            assert_eq!(r["pooled_from"], "36005+36047+36061+36081+36085 by area");
            // The rate is the pooled rate: 1000 / 8,000,000 = 0.000125.
            assert!((num(r, "rate") - 0.000125).abs() < 1e-15, "{r:?}");
        }
        // The members' figures add up to the pooled figure.
        assert!((total - 1000.0).abs() < 1e-9, "{total}");
        let pooled = report.iter().find(|r| r["kind"] == "pooled").unwrap();
        assert_eq!(pooled["code"], "36005+36047+36061+36081+36085");
        assert!(
            pooled["detail"].contains("by area (estimates)"),
            "{pooled:?}"
        );
    }

    #[test]
    fn a_pooled_alaska_pair_is_split_by_population() {
        let dir = tempfile::tempdir().unwrap();
        // 2020 census (from memory): Bristol Bay Borough 844, Lake and
        // Peninsula Borough 1,476; together 2,320.
        let pop = write(
            dir.path(),
            "pop.csv",
            "code,population\n02060,844\n02164,1476\n",
        );
        let data = write(dir.path(), "ak.csv", "code,year,cases\n2164+2060,2021,46\n");
        let (rows, _) = apply(
            dir.path(),
            &data,
            &[
                "--sum",
                "cases",
                "--split-by",
                "population",
                "--population",
                pop.to_str().unwrap(),
            ],
        );
        // Bristol Bay: 46 · 844 / 2320 = 16.7327586...; Lake and Peninsula:
        // 46 · 1476 / 2320 = 29.2672413...
        let bb = find(&rows, "02060", Some("2021"));
        let lp = find(&rows, "02164", Some("2021"));
        assert!((num(bb, "cases") - 46.0 * 844.0 / 2320.0).abs() < 1e-9);
        assert!((num(lp, "cases") - 46.0 * 1476.0 / 2320.0).abs() < 1e-9);
        assert_eq!(bb["pooled_from"], "02060+02164 by population");
    }

    #[test]
    fn a_district_reported_pooled_one_year_and_by_member_the_next_with_one_missing() {
        let dir = tempfile::tempdir().unwrap();
        // Brown (20013) 9,508 and Nemaha (20131) 10,273 people (2020 census,
        // from memory); together 19,781.
        let pop = write(
            dir.path(),
            "pop.csv",
            "code,population\n20013,9508\n20131,10273\n",
        );
        let data = write(
            dir.path(),
            "ks.csv",
            "code,year,cases\n20013+20131,2021,40\n20013,2022,12\n",
        );
        let (rows, report) = apply(
            dir.path(),
            &data,
            &[
                "--sum",
                "cases",
                "--split-by",
                "population",
                "--population",
                pop.to_str().unwrap(),
            ],
        );
        // 2021, pooled: Brown 40 · 9508 / 19781 = 19.226530; Nemaha
        // 40 · 10273 / 19781 = 20.773470; both covered, from the pooled report.
        let brown = find(&rows, "20013", Some("2021"));
        let nemaha = find(&rows, "20131", Some("2021"));
        assert!((num(brown, "cases") - 19.226530).abs() < 1e-6);
        assert!((num(nemaha, "cases") - 20.773470).abs() < 1e-6);
        assert_eq!(num(nemaha, "cases_coverage"), 1.0);
        assert_eq!(nemaha["pooled_from"], "20013+20131 by population");
        // 2022, by member: Brown 12 (its own row, not pooled); Nemaha has
        // no row: no figure, coverage 0 (missing is not zero).
        let brown = find(&rows, "20013", Some("2022"));
        assert_eq!(num(brown, "cases"), 12.0);
        assert_eq!(brown["pooled_from"], "");
        let nemaha = find(&rows, "20131", Some("2022"));
        assert_eq!(nemaha["cases"], "");
        assert_eq!(num(nemaha, "cases_coverage"), 0.0);
        // Nemaha is absent in 2022 only: 2021 came from the pooled report.
        let absent: Vec<&Row> = report
            .iter()
            .filter(|r| r["kind"] == "absent-source" && r["code"] == "20131")
            .collect();
        assert_eq!(absent.len(), 1, "{absent:?}");
        assert_eq!(absent[0]["period"], "2022");
    }

    #[test]
    fn a_member_reported_twice_in_a_period_and_a_member_without_size_are_reported() {
        let dir = tempfile::tempdir().unwrap();
        let data = write(
            dir.path(),
            "d.csv",
            "code,year,cases\n25007+25019,2020,7\n25019,2020,2\n51610+51059,2020,5\n",
        );
        let (rows, report) = apply(dir.path(), &data, &["--sum", "cases"]);
        let overlap = report
            .iter()
            .find(|r| r["kind"] == "pooled-overlap")
            .unwrap();
        assert_eq!(
            (overlap["code"].as_str(), overlap["period"].as_str()),
            ("25019", "2020")
        );
        // Falls Church city (51610) has no area in the 1:10m geometry: that
        // pooled report cannot be split by area; its row is reported, not
        // allocated.
        let left = report
            .iter()
            .find(|r| r["kind"] == "pooled-left-out")
            .unwrap();
        assert_eq!(left["code"], "51059+51610");
        assert_eq!(left["rows"], "1");
        // Fairfax County is written without a figure: no data reached it.
        let fairfax = find(&rows, "51059", Some("2020"));
        assert_eq!(fairfax["cases"], "");
        assert_eq!(num(fairfax, "cases_coverage"), 0.0);
        // Dukes and Nantucket: 7 split by area, plus Nantucket's own 2.
        let dukes = num(find(&rows, "25007", Some("2020")), "cases");
        let nantucket = num(find(&rows, "25019", Some("2020")), "cases");
        assert!((dukes + nantucket - 9.0).abs() < 1e-9);
    }
}
