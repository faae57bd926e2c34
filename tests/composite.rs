//! Composite names on the built-in US reference: names made of several
//! counties, the named composites the trade uses, and single units whose
//! names contain a joining word. County codes and names are those of the
//! built-in reference (the Census Bureau's lists); which names agencies
//! pool is common practice (Massachusetts reports Dukes and Nantucket
//! together; Alaska pools Bristol Bay and Lake and Peninsula boroughs; New
//! York City is its five counties, from memory).

use regionkey::core::composite::{read, NamedComposites};
use regionkey::core::matcher::{CodeForm, Matcher, Method, Resolution, Status};
use regionkey::io::builtin::us_counties;
use regionkey::io::composites::builtin_composites;

fn resolve(vintage: u16, name: &str, state: Option<&str>) -> Resolution {
    let reference = us_counties().unwrap();
    let m = Matcher::new(reference, vintage, CodeForm::County);
    let named = builtin_composites().unwrap();
    let whole = m.resolve(name, state);
    read(&m, &named, name, state, &whole).unwrap_or(whole)
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
