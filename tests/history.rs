//! Carrying codes across vintages with the built-in change table, and the
//! `regionkey history` command. Expected outcomes follow the Census Bureau's
//! list "Substantial Changes to Counties and County Equivalent Entities:
//! 1970-Present" (the change table's rows cite it; several from memory, as
//! marked there).

mod common;
use common::regionkey;
use regionkey::core::history::{carry, lineage, Carried};
use regionkey::io::builtin::us_counties;

fn to(code: &str) -> Option<String> {
    Some(code.to_string())
}

fn landing(code: &str, year: u16) -> Option<String> {
    match carry(us_counties().unwrap(), code, year) {
        Carried::To { code, .. } => Some(code),
        Carried::Same => Some(code.to_string()),
        _ => None,
    }
}

#[test]
fn renamed_units_carry_forward_one_to_one() {
    // Wade Hampton Census Area became Kusilvak (02270 -> 02158) in 2015.
    assert_eq!(landing("02270", 2023), to("02158"));
    // Shannon County SD became Oglala Lakota (46113 -> 46102) in 2015.
    assert_eq!(landing("46113", 2023), to("46102"));
    // Dade County FL became Miami-Dade with a new code (12025 -> 12086) in 1997.
    assert_eq!(landing("12025", 2023), to("12086"));
}

#[test]
fn renamed_units_carry_back_one_to_one() {
    assert_eq!(landing("02158", 2010), to("02270"));
    assert_eq!(landing("12086", 1990), to("12025"));
}

#[test]
fn an_absorbed_city_lands_in_its_county() {
    // Bedford city VA reverted to a town in Bedford County in 2013.
    assert_eq!(landing("51515", 2023), to("51019"));
    // Before 2013 it is valid as it is.
    assert_eq!(carry(us_counties().unwrap(), "51515", 2010), Carried::Same);
}

#[test]
fn a_split_unit_is_divided_among_its_successors() {
    match carry(us_counties().unwrap(), "02261", 2023) {
        Carried::Divided { successors, .. } => assert_eq!(successors, ["02063", "02066"]),
        other => panic!("Valdez-Cordova should be divided, got {other:?}"),
    }
}

#[test]
fn a_unit_carved_from_one_earlier_unit_maps_back_into_it() {
    // Chugach was carved out of Valdez-Cordova, so in 2010 it lies wholly in 02261.
    assert_eq!(landing("02063", 2010), to("02261"));
}

#[test]
fn connecticut_counties_are_divided_among_planning_regions() {
    match carry(us_counties().unwrap(), "09003", 2023) {
        Carried::Divided { successors, .. } => {
            assert!(successors.contains(&"09110".to_string()), "{successors:?}");
            assert!(
                successors.iter().all(|s| s.starts_with("091")),
                "{successors:?}"
            );
        }
        other => panic!("Hartford County should be divided, got {other:?}"),
    }
    // And a planning region maps back onto several counties.
    assert!(matches!(
        carry(us_counties().unwrap(), "09110", 2020),
        Carried::Divided { .. }
    ));
}

#[test]
fn a_unit_formed_from_several_is_divided_going_back() {
    // Broomfield (2001) was formed from parts of Adams, Boulder, Jefferson and Weld.
    match carry(us_counties().unwrap(), "08014", 1990) {
        Carried::Divided { successors, .. } => {
            assert_eq!(successors, ["08001", "08013", "08059", "08123"])
        }
        other => panic!("Broomfield should be divided in 1990, got {other:?}"),
    }
}

#[test]
fn an_unknown_code_is_unknown() {
    assert_eq!(
        carry(us_counties().unwrap(), "99999", 2023),
        Carried::Unknown
    );
}

#[test]
fn lineage_tells_names_and_changes_in_year_order() {
    let events = lineage(us_counties().unwrap(), "02270");
    assert!(events.len() >= 2, "{events:?}");
    assert_eq!(events[0].event, "era");
    assert!(events[0].text.contains("Wade Hampton"), "{events:?}");
    assert!(events
        .iter()
        .any(|e| e.event == "renamed" && e.text.contains("Kusilvak")));
    assert!(events.windows(2).all(|w| w[0].year <= w[1].year));
}

#[test]
fn history_command_prints_a_units_story_by_code_or_name() {
    let out = regionkey().args(["history", "46113"]).output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("Shannon County"), "{text}");
    assert!(text.contains("Oglala Lakota"), "{text}");

    let out = regionkey()
        .args(["history", "Valdez-Cordova", "--format", "csv"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.starts_with("year,event,code,text,source\n"), "{text}");
    assert!(text.contains("02063") && text.contains("02066"), "{text}");
}

#[test]
fn history_of_an_unknown_name_says_so() {
    let out = regionkey().args(["history", "Atlantis"]).output().unwrap();
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("Atlantis"));
}

#[test]
fn names_are_read_as_the_matcher_reads_them() {
    // Guards: `history "Dona Ana"` failed where `match` finds it. Doña Ana
    // County, NM is 35013 and St. Louis city, MO 29510 (Census Bureau FIPS).
    for (query, code) in [
        ("Dona Ana", "35013"),
        ("DOÑA ANA COUNTY", "35013"),
        ("Saint Louis City", "29510"),
        ("6037.0", "06037"),
    ] {
        let out = regionkey().args(["history", query]).output().unwrap();
        assert!(
            out.status.success(),
            "{query}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let text = String::from_utf8(out.stdout).unwrap();
        assert!(text.starts_with(code), "{query}: {text}");
    }
}
