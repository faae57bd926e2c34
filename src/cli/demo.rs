//! `regionkey demo`: the whole pipeline, offline, on built-in data.
//!
//! The scenario is our own and its figures are invented: three regional
//! food-bank networks report, per county and year from 2012 to 2023, the
//! households they served, the households eligible, and the meals they
//! handed out. Each network types county names its own way; some years are
//! missing; the geography under them changes (Wade Hampton becomes Kusilvak,
//! Valdez-Cordova splits, Bedford city joins Bedford County, Connecticut
//! trades its counties for planning regions). The demo matches the names
//! year by year (each year against the counties of that year), takes the
//! analyst's decisions on the review list back in, carries every figure onto
//! 2023 counties with its coverage, draws a map of what joined, and writes a
//! plain-text summary of what needs a person's eye.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use super::{say, warn, Global};
use crate::error::{Error, Result};
use crate::io::output::write_file;
use crate::io::table::{read_table, ReadOptions};

/// Arguments.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Folder to write the demo's inputs and outputs into (created if needed).
    #[arg(long, default_value = "regionkey-demo", value_name = "DIR")]
    pub out: PathBuf,
}

/// One county as a network reports it: the names it types in each era.
struct Reported {
    network: &'static str,
    /// State as the network writes it (may be empty: the state is in the name).
    state: &'static str,
    /// (first year, last year, name as typed).
    names: &'static [(u16, u16, &'static str)],
    /// Years with no report at all.
    gaps: &'static [u16],
    /// Typical households eligible (sets the scale of the invented figures).
    size: u32,
}

const NORTHEAST: &str = "North Atlantic Pantry Alliance";
const WEST: &str = "High Plains and Pacific Food Network";
const SOUTH: &str = "River Valley Pantries";

/// The scenario's reporting units. Names are typed the way the networks do;
/// the figures come from [`figures`].
const REPORTED: &[Reported] = &[
    // Connecticut: counties until 2021, planning regions from 2022.
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[
            (2012, 2021, "Hartford County, CT"),
            (2022, 2023, "Capitol Planning Region, CT"),
        ],
        gaps: &[2016],
        size: 42_000,
    },
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[
            (2012, 2021, "New Haven Co., Conn."),
            (2022, 2023, "South Central Connecticut Planning Region, CT"),
        ],
        gaps: &[],
        size: 39_000,
    },
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[
            (2012, 2021, "Fairfield County, CT"),
            (2022, 2023, "Western Connecticut, CT"),
        ],
        gaps: &[],
        size: 35_000,
    },
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[(2022, 2023, "Greater Bridgeport Planning Region, CT")],
        gaps: &[],
        size: 18_000,
    },
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[
            (2012, 2021, "Litchfield County, CT"),
            (2022, 2023, "Northwest Hills, CT"),
        ],
        gaps: &[2019],
        size: 6_500,
    },
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[(2022, 2023, "Naugatuck Valley Planning Region, CT")],
        gaps: &[2023],
        size: 17_000,
    },
    // New York City boroughs by their borough names.
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[(2012, 2023, "Brooklyn, NY")],
        gaps: &[2019],
        size: 310_000,
    },
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[(2012, 2023, "Staten Island, NY")],
        gaps: &[],
        size: 38_000,
    },
    // Maryland and Virginia: independent cities beside counties of the same name.
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[(2012, 2023, "Prince Georges County, MD")],
        gaps: &[],
        size: 64_000,
    },
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[(2012, 2023, "Baltimore City, MD")],
        gaps: &[],
        size: 71_000,
    },
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[(2012, 2023, "Baltimore, MD")],
        gaps: &[2014],
        size: 52_000,
    },
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[(2012, 2023, "Fairfax city, VA")],
        gaps: &[],
        size: 1_500,
    },
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[(2012, 2023, "County of Fairfax, Virginia")],
        gaps: &[],
        size: 48_000,
    },
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[
            (2012, 2012, "Bedford city, VA"),
            (2013, 2023, "Bedford County, VA"),
        ],
        gaps: &[],
        size: 5_200,
    },
    Reported {
        network: NORTHEAST,
        state: "",
        names: &[(2012, 2023, "Richmond, VA")],
        gaps: &[],
        size: 33_000,
    },
    // Alaska, South Dakota, New Mexico, Colorado: state column with postal codes.
    Reported {
        network: WEST,
        state: "AK",
        names: &[(2012, 2014, "Wade Hampton"), (2015, 2023, "Kusilvak")],
        gaps: &[],
        size: 1_400,
    },
    Reported {
        network: WEST,
        state: "AK",
        names: &[(2012, 2018, "Valdez-Cordova")],
        gaps: &[],
        size: 1_700,
    },
    Reported {
        network: WEST,
        state: "AK",
        names: &[(2019, 2023, "Chugach")],
        gaps: &[],
        size: 1_100,
    },
    Reported {
        network: WEST,
        state: "AK",
        names: &[(2019, 2023, "Copper River")],
        gaps: &[2021],
        size: 500,
    },
    Reported {
        network: WEST,
        state: "AK",
        names: &[(2012, 2023, "Mat-Su")],
        gaps: &[],
        size: 9_800,
    },
    Reported {
        network: WEST,
        state: "AK",
        names: &[(2012, 2023, "Municipality of Anchorage")],
        gaps: &[],
        size: 21_000,
    },
    Reported {
        network: WEST,
        state: "SD",
        names: &[(2012, 2014, "Shannon"), (2015, 2023, "Oglala Lakota")],
        gaps: &[],
        size: 2_900,
    },
    Reported {
        network: WEST,
        state: "NM",
        names: &[(2012, 2017, "Dona Ana"), (2018, 2023, "DoÃ±a Ana")],
        gaps: &[],
        size: 23_000,
    },
    Reported {
        network: WEST,
        state: "CO",
        names: &[(2012, 2023, "Broomfield")],
        gaps: &[2012, 2013],
        size: 2_600,
    },
    Reported {
        network: WEST,
        state: "CO",
        names: &[(2012, 2023, "City and County of Denver")],
        gaps: &[],
        size: 44_000,
    },
    // Missouri, Illinois, Georgia, Louisiana: state column as names or FIPS codes.
    Reported {
        network: SOUTH,
        state: "Missouri",
        names: &[(2012, 2023, "St Louis City")],
        gaps: &[],
        size: 31_000,
    },
    Reported {
        network: SOUTH,
        state: "Missouri",
        names: &[(2012, 2023, "Saint Louis Co")],
        gaps: &[],
        size: 47_000,
    },
    Reported {
        network: SOUTH,
        state: "13",
        names: &[(2012, 2023, "Dekalb Co.")],
        gaps: &[],
        size: 39_000,
    },
    Reported {
        network: SOUTH,
        state: "17",
        names: &[(2012, 2023, "De Kalb")],
        gaps: &[],
        size: 4_300,
    },
    Reported {
        network: SOUTH,
        state: "Ill.",
        names: &[(2012, 2023, "Cook")],
        gaps: &[],
        size: 260_000,
    },
    Reported {
        network: SOUTH,
        state: "Ill.",
        names: &[(2012, 2023, "Chicago")],
        gaps: &[],
        size: 1_000,
    },
    Reported {
        network: SOUTH,
        state: "LA",
        names: &[(2012, 2023, "Orleans County")],
        gaps: &[],
        size: 36_000,
    },
    Reported {
        network: SOUTH,
        state: "LA",
        names: &[(2012, 2023, "Jefferson Par.")],
        gaps: &[2020],
        size: 30_000,
    },
    Reported {
        network: SOUTH,
        state: "LA",
        names: &[(2012, 2023, "Statewide")],
        gaps: &[],
        size: 90_000,
    },
    Reported {
        network: SOUTH,
        state: "Georgia",
        names: &[(2012, 2023, "Unknown")],
        gaps: &[],
        size: 800,
    },
    // Two small Alaska boroughs reported together (a pooled report).
    Reported {
        network: WEST,
        state: "AK",
        names: &[(2012, 2023, "Bristol Bay + Lake and Peninsula")],
        gaps: &[],
        size: 900,
    },
];

/// The networks' service areas, made of 2023 counties (part of the
/// scenario): (area code, county code).
const SERVICE_AREAS: &[(&str, &str)] = &[
    ("AK-SOUTHCENTRAL", "02020"),
    ("AK-SOUTHCENTRAL", "02063"),
    ("AK-SOUTHCENTRAL", "02066"),
    ("AK-SOUTHCENTRAL", "02170"),
    ("AK-SOUTHWEST", "02060"),
    ("AK-SOUTHWEST", "02164"),
    ("LA-METRO", "22051"),
    ("LA-METRO", "22071"),
    ("MO-STLOUIS", "29189"),
    ("MO-STLOUIS", "29510"),
];

/// The service areas as a membership list.
pub fn service_areas_csv() -> String {
    let mut text = String::from("unit,group\n");
    for (group, unit) in SERVICE_AREAS {
        let _ = writeln!(text, "{unit},{group}");
    }
    text
}

/// Decisions the analyst made on the first review list (part of the scenario).
const DECISIONS: &[(&str, &str, &str, &str)] = &[
    // (name, state as typed, chosen code, why)
    (
        "Baltimore, MD",
        "",
        "24005",
        "the network means Baltimore County; the city is reported separately",
    ),
    (
        "Richmond, VA",
        "",
        "51760",
        "the network's Richmond pantry serves the independent city",
    ),
    (
        "Chicago",
        "Ill.",
        "none",
        "a city inside Cook County; already counted under Cook",
    ),
    ("Statewide", "LA", "none", "a statewide total, not a county"),
    ("Unknown", "Georgia", "none", "no county given"),
];

/// A small deterministic generator (SplitMix64), so the demo is the same
/// bytes on every run.
fn splitmix(mut x: u64) -> u64 {
    x = x.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = x;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

fn unit_random(seed: u64) -> f64 {
    (splitmix(seed) >> 11) as f64 / (1u64 << 53) as f64
}

/// Invented figures for one unit and year: (eligible, served, meals), with
/// a few fields left empty or written as "n/a" as real reports do.
fn figures(unit: usize, year: u16, size: u32) -> (String, String, String) {
    let seed = (unit as u64) << 16 | year as u64;
    let trend = 1.0 + 0.015 * f64::from(year - 2012);
    let eligible = (f64::from(size) * trend * (0.95 + 0.1 * unit_random(seed))).round();
    let share = 0.35 + 0.3 * unit_random(seed ^ 0xABCD);
    let served = (eligible * share).round();
    let meals = (served * (38.0 + 12.0 * unit_random(seed ^ 0x1234))).round();
    let r = unit_random(seed ^ 0x7777);
    let served_text = if r < 0.02 {
        "n/a".to_string()
    } else {
        format!("{served}")
    };
    let meals_text = if r > 0.97 {
        String::new()
    } else {
        format!("{meals}")
    };
    (format!("{eligible}"), served_text, meals_text)
}

/// The scenario's input table as CSV text.
pub fn reports_csv() -> String {
    let mut text =
        String::from("network,year,county,state,households_eligible,households_served,meals\n");
    for year in 2012..=2023u16 {
        for (i, r) in REPORTED.iter().enumerate() {
            if r.gaps.contains(&year) {
                continue;
            }
            let Some(&(_, _, name)) = r.names.iter().find(|(a, b, _)| (*a..=*b).contains(&year))
            else {
                continue;
            };
            let (eligible, served, meals) = figures(i, year, r.size);
            let quoted = if name.contains(',') {
                format!("\"{name}\"")
            } else {
                name.to_string()
            };
            let _ = writeln!(
                text,
                "{},{year},{quoted},{},{eligible},{served},{meals}",
                r.network, r.state
            );
        }
    }
    text
}

fn decisions_csv() -> String {
    let mut text = String::from("name,state,chosen_code,why\n");
    for (name, state, code, why) in DECISIONS {
        let _ = writeln!(text, "\"{name}\",{state},{code},\"{why}\"");
    }
    text
}

fn write_text(path: &Path, text: &str) -> Result<()> {
    write_file(path, |w| w.write_all(text.as_bytes()))
}

fn arg(path: &Path) -> String {
    path.display().to_string()
}

/// Runs the command.
pub fn run(args: Args, global: Global) -> Result<()> {
    let dir = &args.out;
    std::fs::create_dir_all(dir.join("input"))
        .map_err(|e| Error::io(dir, "cannot create the demo folder", e))?;
    let reports = dir.join("input/food-bank-reports.csv");
    let decisions = dir.join("input/decisions.csv");
    let areas = dir.join("input/service-areas.csv");
    write_text(&reports, &reports_csv())?;
    write_text(&decisions, &decisions_csv())?;
    write_text(&areas, &service_areas_csv())?;
    say(
        global,
        format!(
            "demo: invented reports of three food-bank networks, 2012-2023, written to {}",
            reports.display()
        ),
    );

    // 1. Match names, each year against the counties of that year, first
    //    without and then with the analyst's decisions.
    let first_review = dir.join("review-first-pass.csv");
    let matched = dir.join("matched.csv");
    let review = dir.join("review.csv");
    let first = super::match_names::configure(
        &match_args(
            &reports,
            None,
            &dir.join("matched-first-pass.csv"),
            &first_review,
        ),
        Global { quiet: true },
    )?;
    super::match_names::execute(&first)?;
    say(global, "\n== 1. match names to county codes (each year against its own vintage), with the analyst's decisions");
    let second = super::match_names::configure(
        &match_args(&reports, Some(&decisions), &matched, &review),
        global,
    )?;
    let done = super::match_names::execute(&second)?;
    for w in &done.warnings {
        warn(w);
    }
    for line in super::match_names::summary_lines(&done) {
        say(global, line);
    }

    // 2. Carry everything onto 2023 counties, with coverage.
    say(
        global,
        "\n== 2. carry the figures onto 2023 counties, with coverage",
    );
    let harmonized = dir.join("harmonized-2023.csv");
    let apply_report = dir.join("harmonized-2023-report.csv");
    let apply = super::apply::Args {
        data: matched.clone(),
        crosswalk: None,
        to_vintage: Some(2023),
        code_column: "code".into(),
        state_column: None,
        period_column: Some("year".into()),
        sums: vec![
            "households_eligible".into(),
            "households_served".into(),
            "meals".into(),
        ],
        ratios: vec!["served_share=households_served/households_eligible".into()],
        means: Vec::new(),
        min_coverage: 0.0,
        decimals: None,
        separator: None,
        missing: Vec::new(),
        allow_name: Vec::new(),
        all_units: false,
        skip_unweighted: false,
        output: arg(&harmonized),
        report: Some(apply_report.clone()),
        emit_sql: None,
        sql_tables: "data,crosswalk".into(),
        split_by: super::group::WeightBy::Area,
        population: None,
    };
    let config = super::apply::Config::from_args(&apply)?;
    let done = super::apply::execute(&config)?;
    for line in super::apply::summary_lines(&config, &done) {
        say(global, line);
    }

    // 2b. Gather the county figures into the networks' service areas.
    say(
        global,
        "\n== 2b. gather the 2023 county figures into the networks' service areas",
    );
    let to_areas = dir.join("service-areas-from-counties.csv");
    super::group::run(
        super::group::Args {
            members: areas.clone(),
            to_groups: Some(to_areas.clone()),
            to_units: Some(dir.join("counties-from-service-areas.csv")),
            unit_column: "unit".into(),
            group_column: "group".into(),
            share_column: "share".into(),
            vintage: 2023,
            weight: super::group::WeightBy::Area,
            population: None,
            population_code_column: "code".into(),
            population_column: "population".into(),
        },
        global,
    )?;
    let by_area = dir.join("service-areas.csv");
    let group_apply = super::apply::Args {
        data: harmonized.clone(),
        crosswalk: Some(to_areas.clone()),
        to_vintage: None,
        sums: vec!["households_eligible".into(), "households_served".into()],
        ratios: vec!["served_share=households_served/households_eligible".into()],
        output: arg(&by_area),
        report: Some(dir.join("service-areas-report.csv")),
        ..apply.clone()
    };
    let config = super::apply::Config::from_args(&group_apply)?;
    let done = super::apply::execute(&config)?;
    for line in super::apply::summary_lines(&config, &done) {
        say(global, line);
    }

    // 3. A map of what joined.
    say(global, "\n== 3. map what joined");
    let map = dir.join("map-2023.svg");
    super::map::run(
        super::map::Args {
            data: harmonized.clone(),
            code_column: "code".into(),
            coverage_column: Some("households_served_coverage".into()),
            layer: "builtin:counties-2023".into(),
            key: None,
            object: None,
            title: Some(
                "Food-bank reports on 2023 counties: coverage of households served (invented data)"
                    .into(),
            ),
            output: arg(&map),
            states_in_data_only: true,
            ..Default::default()
        },
        global,
    )?;

    // 4. A plain-text summary of what happened and what needs a person's eye.
    let summary = summarize(
        dir,
        &reports,
        &first_review,
        &matched,
        &review,
        &harmonized,
        &apply_report,
    )?;
    let summary_path = dir.join("SUMMARY.txt");
    write_text(&summary_path, &summary)?;
    say(global, format!("\n{summary}"));
    say(global, format!("demo: outputs are in {}", dir.display()));
    Ok(())
}

/// The match step's arguments, as a user would give them on the command
/// line (names in "county", states in "state", each row matched against
/// the counties of its "year").
fn match_args(
    input: &Path,
    decisions: Option<&Path>,
    output: &Path,
    review: &Path,
) -> super::match_names::Args {
    super::match_names::Args {
        input: input.to_path_buf(),
        name_column: "county".into(),
        state_column: Some("state".into()),
        vintage: None,
        vintage_column: Some("year".into()),
        level: None,
        reference: None,
        composites: None,
        decisions: decisions.map(Path::to_path_buf),
        output: arg(output),
        review: Some(arg(review)),
        distinct_keys: None,
        delimiter: None,
    }
}

fn count_by(path: &Path, column: &str) -> Result<BTreeMap<String, usize>> {
    let t = read_table(path, ReadOptions::default())?;
    let c = t.column(column)?;
    let mut m = BTreeMap::new();
    for r in &t.records {
        *m.entry(r[c].to_string()).or_insert(0) += 1;
    }
    Ok(m)
}

fn summarize(
    dir: &Path,
    reports: &Path,
    first_review: &Path,
    matched: &Path,
    review: &Path,
    harmonized: &Path,
    apply_report: &Path,
) -> Result<String> {
    let by_area = &dir.join("service-areas.csv");
    let rows = read_table(reports, ReadOptions::default())?.len();
    let first = read_table(first_review, ReadOptions::default())?.len();
    let status = count_by(matched, "match_status")?;
    let method = count_by(matched, "match_method")?;
    let remaining = read_table(review, ReadOptions::default())?;
    let out = read_table(harmonized, ReadOptions::default())?;
    let cov = out.column("households_served_coverage")?;
    let code = out.column("code")?;
    let period = out.column("year")?;
    let mut partial: Vec<String> = Vec::new();
    for r in &out.records {
        let c: f64 = r[cov].parse().unwrap_or(0.0);
        if c < 1.0 - 1e-9 {
            partial.push(format!("{} {} ({:.3})", &r[code], &r[period], c));
        }
    }
    let report = count_by(apply_report, "kind")?;

    let mut s = String::new();
    let _ = writeln!(
        s,
        "regionkey demo: what happened (invented figures on real county geography)"
    );
    let _ = writeln!(
        s,
        "====================================================================="
    );
    let _ = writeln!(
        s,
        "Input: {rows} rows from three food-bank networks, 2012-2023 ({}).",
        reports.display()
    );
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "1. Matching names to county codes, each year against that year's counties"
    );
    let _ = writeln!(
        s,
        "   First pass: {first} distinct names needed a person's decision (review-first-pass.csv)."
    );
    let _ = writeln!(s, "   With the analyst's decisions (input/decisions.csv):");
    for (k, v) in &status {
        let _ = writeln!(s, "     {k:<10} {v:>5} rows");
    }
    let methods: Vec<String> = method
        .iter()
        .filter(|(k, _)| !k.is_empty())
        .map(|(k, v)| format!("{k} {v}"))
        .collect();
    let _ = writeln!(s, "   By method: {}.", methods.join(", "));
    // The review file keeps decided names with their decision, so a later
    // run can take it back as is; only names without a `chosen_code` are open.
    let chosen = remaining.column("chosen_code")?;
    let open = remaining
        .records
        .iter()
        .filter(|r| r[chosen].trim().is_empty())
        .count();
    let _ = writeln!(
        s,
        "   Review list (review.csv): {} names, {} decided (chosen_code), {open} still open.",
        remaining.len(),
        remaining.len() - open
    );
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "2. Carrying figures onto 2023 counties (harmonized-2023.csv)"
    );
    let _ = writeln!(s, "   {} rows of (county, year) estimates.", out.len());
    for (k, v) in &report {
        let _ = writeln!(s, "   reported: {k}: {v}");
    }
    let _ = writeln!(
        s,
        "   {} estimates of households served cover less than all of their county (coverage < 1):",
        partial.len()
    );
    for p in partial.iter().take(25) {
        let _ = writeln!(s, "     {p}");
    }
    if partial.len() > 25 {
        let _ = writeln!(
            s,
            "     ... and {} more (see harmonized-2023.csv)",
            partial.len() - 25
        );
    }
    let _ = writeln!(s);
    // The pooled report and the service areas.
    let pooled_col = out.column("pooled_from").ok();
    let mut pooled: BTreeMap<String, Vec<String>> = BTreeMap::new();
    if let Some(pc) = pooled_col {
        for r in &out.records {
            if !r[pc].is_empty() {
                pooled
                    .entry(r[pc].to_string())
                    .or_default()
                    .push(r[code].to_string());
            }
        }
    }
    for (from, codes) in &pooled {
        let mut members = codes.clone();
        members.sort();
        members.dedup();
        let _ = writeln!(
            s,
            "   Pooled report {from}: split among {} ({} estimates; pooled_from says so beside each).",
            members.join(", "),
            codes.len()
        );
    }
    let areas = read_table(by_area, ReadOptions::default())?;
    let (acode, ayear, acov) = (
        areas.column("code")?,
        areas.column("year")?,
        areas.column("households_served_coverage")?,
    );
    let mut thin: Vec<String> = Vec::new();
    for r in &areas.records {
        let c: f64 = r[acov].parse().unwrap_or(0.0);
        if c < 1.0 - 1e-9 {
            thin.push(format!("{} {} ({:.3})", &r[acode], &r[ayear], c));
        }
    }
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "2b. Service areas (input/service-areas.csv, counties -> areas by area: service-areas.csv)"
    );
    let _ = writeln!(
        s,
        "   {} rows of (service area, year) figures: the sum of the counties with figures; coverage is",
        areas.len()
    );
    let _ = writeln!(
        s,
        "   the part of the area (by land area) whose counties had a figure. Below 1: {}.",
        if thin.is_empty() {
            "none".to_string()
        } else {
            thin.join(", ")
        }
    );
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "3. Map: map-2023.svg shows which 2023 counties joined and how fully."
    );
    let _ = writeln!(s);
    let _ = writeln!(s, "Needs a person's eye:");
    let _ = writeln!(
        s,
        "  - review.csv: names left unmatched on purpose or still undecided."
    );
    let _ = writeln!(
        s,
        "  - estimates with coverage below 1: a part of the county had no report that year;"
    );
    let _ = writeln!(
        s,
        "    the figure is the sum of what was reported, not a guess for the rest."
    );
    let _ = writeln!(
        s,
        "  - harmonized-2023-report.csv: codes carried through the change history and gaps."
    );
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "Caution: allocated figures are estimates. They assume each value is spread evenly by area within\n\
         its source unit (Connecticut's counties onto planning regions, Valdez-Cordova onto Chugach and\n\
         Copper River). Where figures feed legal or funding decisions, use official relationship files and\n\
         local practice."
    );
    let _ = writeln!(s, "Folder: {}", dir.display());
    Ok(s)
}
