//! `regionkey overlay`: a crosswalk between two boundary layers by polygon
//! overlay, weighted by area or by population.

use std::collections::BTreeSet;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use serde_json::json;

use super::Global;
use crate::core::crosswalk::{Basis, Crosswalk};
use crate::core::fips::CodeForm;
use crate::core::overlay::{
    overlay, prepare, Nesting, Options, OverlayResult, PreparedLayer, Weighting, DEFAULT_MIN_SHARE,
    POPULATION_CHECK_MARGIN,
};
use crate::error::{Error, Result};
use crate::io::crosswalk_file::{is_parquet_path, write_csv, write_parquet, DECIMALS};
use crate::io::geo::{population, read_layer, KeyReading, Layer, LayerRequest, RepeatedKeys};
use crate::io::output::{
    fixed, sidecar_path, Sidecar, SidecarInput, Staged, Target, Written, CAUTION,
};
use crate::io::progress::Progress;

/// What the weights measure.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum WeightBy {
    /// Share of the source's area (WGS84 ellipsoid).
    Area,
    /// Share of the source's population, from --population.
    Population,
}

/// What to do with features that share a key.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Repeated {
    /// Take them together as one unit, with a warning naming the key.
    Merge,
    /// Stop with an error naming the key and its features.
    Refuse,
}

/// Arguments.
#[derive(Debug, clap::Args)]
#[command(after_help = "\
Layers: GeoJSON (.geojson/.json), TopoJSON (.topojson/.json), Shapefile (.shp \
with .dbf/.prj/.cpg beside it, or a .zip holding them), or a built-in layer: \
builtin:counties-2017, builtin:counties-2023 (US counties, key = 5-digit code). \
Coordinates must be longitude/latitude (NAD83/WGS84).

Output columns: from_code,to_code,weight,target_share,basis. A row with an \
empty to_code holds the share of a source outside every target. Metadata \
(inputs and their SHA-256, keys, options, repairs, dropped slivers) goes to \
FILE.json beside the output.

Example:
  regionkey overlay builtin:counties-2017 builtin:counties-2023 --output xw.csv")]
pub struct Args {
    /// The old (source) boundary layer.
    pub from: String,
    /// The new (target) boundary layer.
    pub to: String,
    /// Field holding the source unit code (default: the feature id).
    #[arg(long, value_name = "FIELD")]
    pub from_key: Option<String>,
    /// Field holding the target unit code (default: the feature id).
    #[arg(long, value_name = "FIELD")]
    pub to_key: Option<String>,
    /// TopoJSON object of the source layer (default: the only polygon object).
    #[arg(long, value_name = "NAME")]
    pub from_object: Option<String>,
    /// TopoJSON object of the target layer (default: the only polygon object).
    #[arg(long, value_name = "NAME")]
    pub to_object: Option<String>,
    /// Vintage labels and population weighting.
    #[command(flatten)]
    pub more: Box<More>,
    /// Pieces below this share of both the source and the target are
    /// slivers from boundary misalignment: dropped, and the source's
    /// weights renormalized (the metadata says how much per source).
    #[arg(long, value_name = "F", default_value_t = DEFAULT_MIN_SHARE)]
    pub min_share: f64,
    /// Output file (.csv, or .parquet for Parquet); `-` for standard output
    /// (then no metadata file is written).
    #[arg(long, short, value_name = "FILE")]
    pub output: String,
}

/// Less common options, boxed to keep the command enum small.
#[derive(Debug, clap::Args)]
pub struct More {
    /// Label of the source vintage in the metadata (default: the layer's name).
    #[arg(long, value_name = "LABEL")]
    pub from_label: Option<String>,
    /// Label of the target vintage in the metadata (default: the layer's name).
    #[arg(long, value_name = "LABEL")]
    pub to_label: Option<String>,
    /// Weight pieces by area or by population.
    #[arg(long, value_enum, default_value_t = WeightBy::Area)]
    pub weight: WeightBy,
    /// Several features of a layer with the same key: take them together
    /// as one unit with a warning naming the key (merge), or stop (refuse).
    #[arg(long, value_enum, value_name = "WHAT", default_value_t = Repeated::Merge)]
    pub repeated_keys: Repeated,
    /// Population layer: CSV with lon, lat and a count column; GeoJSON
    /// points; or a polygon layer whose counts are spread by area.
    #[arg(long, value_name = "LAYER")]
    pub population: Option<String>,
    /// The count column or property of the population layer.
    #[arg(long, value_name = "FIELD")]
    pub population_field: Option<String>,
    /// Units nest in parents named by the first N characters of their codes
    /// (2: counties in states; 5: tracts in counties): a piece that crosses
    /// into another parent is a generalization sliver, dropped and the
    /// source renormalized. Default: 2 for the built-in county layers, off
    /// otherwise; 0 turns it off.
    #[arg(long, value_name = "N")]
    pub parent_digits: Option<usize>,
    /// Write a CSV of the items that need a person's eye: population
    /// weights far from area weights ("check"), pieces dropped across
    /// parents, identity rows from the change history, area fallbacks.
    #[arg(long, value_name = "FILE")]
    pub report: Option<String>,
}

/// A checked overlay configuration: what [`execute`] needs.
#[derive(Debug, Clone)]
pub struct Config {
    /// The source layer.
    pub from: LayerRequest,
    /// The target layer.
    pub to: LayerRequest,
    /// Source vintage label for the metadata.
    pub from_label: String,
    /// Target vintage label for the metadata.
    pub to_label: String,
    /// Population layer and its count field, for population weighting.
    pub population: Option<(String, String)>,
    /// The sliver threshold.
    pub min_share: f64,
    /// `--parent-digits`: `None` for the default (see [`Args`]).
    pub parent_digits: Option<usize>,
    /// What to do with features that share a key.
    pub repeated: RepeatedKeys,
    /// Hide the progress bar.
    pub quiet: bool,
    /// Where the crosswalk goes (its sidecar goes beside a file).
    pub output: Target,
    /// Where the report goes, if asked.
    pub report: Option<PathBuf>,
}

fn check(args: &Args, quiet: bool) -> Result<Config> {
    if !(0.0..0.5).contains(&args.min_share) {
        return Err(Error::Usage(format!(
            "--min-share {} is out of range; give a share from 0 (keep everything) up to below 0.5",
            args.min_share
        )));
    }
    let population = match (
        args.more.weight,
        &args.more.population,
        &args.more.population_field,
    ) {
        (WeightBy::Population, Some(p), Some(f)) => Some((p.clone(), f.clone())),
        (WeightBy::Population, None, _) => {
            return Err(Error::Usage(
                "--weight population needs --population LAYER and --population-field FIELD".into(),
            ))
        }
        (WeightBy::Population, Some(_), None) => {
            return Err(Error::Usage(
                "--population needs --population-field FIELD (the count column)".into(),
            ))
        }
        (WeightBy::Area, Some(_), _) | (WeightBy::Area, _, Some(_)) => {
            return Err(Error::Usage(
                "--population is used only with --weight population".into(),
            ))
        }
        (WeightBy::Area, None, None) => None,
    };
    for spec in [&args.from, &args.to]
        .into_iter()
        .chain(population.as_ref().map(|p| &p.0))
    {
        if !spec.starts_with("builtin:") && !Path::new(spec).exists() {
            return Err(Error::io(
                spec,
                "cannot open layer",
                std::io::Error::new(std::io::ErrorKind::NotFound, "no such file"),
            ));
        }
    }
    let output = Target::parse(&args.output);
    output.check_writable()?;
    let report = match &args.more.report {
        Some(r) => {
            let t = Target::parse(r);
            t.check_writable()?;
            match t {
                Target::File(p) => Some(p),
                Target::Stdout => {
                    return Err(Error::Usage(
                        "--report needs a file name (standard output holds the crosswalk or the summary)"
                            .into(),
                    ))
                }
            }
        }
        None => None,
    };
    let config = Config {
        from: LayerRequest {
            spec: args.from.clone(),
            key: args.from_key.clone(),
            object: args.from_object.clone(),
            key_option: "--from-key",
            object_option: "--from-object",
        },
        to: LayerRequest {
            spec: args.to.clone(),
            key: args.to_key.clone(),
            object: args.to_object.clone(),
            key_option: "--to-key",
            object_option: "--to-object",
        },
        from_label: label(&args.from, &args.more.from_label),
        to_label: label(&args.to, &args.more.to_label),
        population,
        min_share: args.min_share,
        parent_digits: args.more.parent_digits,
        repeated: match args.more.repeated_keys {
            Repeated::Merge => RepeatedKeys::Merge,
            Repeated::Refuse => RepeatedKeys::Refuse,
        },
        quiet,
        output,
        report,
    };
    Ok(config)
}

fn label(spec: &str, given: &Option<String>) -> String {
    if let Some(l) = given {
        return l.clone();
    }
    if let Some(b) = spec.strip_prefix("builtin:") {
        return b.to_string();
    }
    let p = PathBuf::from(spec);
    let name = p
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    name.split('.').next().unwrap_or(&name).to_string()
}

/// The built-in county layers and their vintage years.
const BUILTIN_COUNTY_YEARS: [(&str, u16); 2] = [
    ("builtin:counties-2017", 2017),
    ("builtin:counties-2023", 2023),
];

fn builtin_year(spec: &str) -> Option<u16> {
    BUILTIN_COUNTY_YEARS
        .iter()
        .find(|(s, _)| *s == spec)
        .map(|&(_, y)| y)
}

/// Codes valid in both years with no change in between (the change
/// history of the built-in reference).
fn unchanged_codes(from_year: u16, to_year: u16) -> Result<BTreeSet<String>> {
    let reference = crate::io::builtin::us_counties()?;
    let (lo, hi) = (from_year.min(to_year), from_year.max(to_year));
    Ok(reference
        .units_in(lo)
        .filter(|u| reference.unit(&u.code, hi).is_some())
        .filter(|u| {
            reference
                .changes_of(&u.code)
                .iter()
                .all(|c| c.year <= lo || c.year > hi)
        })
        .map(|u| u.code.clone())
        .collect())
}

/// A layer as described in the metadata (its features are not kept).
#[derive(Debug, Clone)]
pub struct LayerInfo {
    /// The path, or `builtin:NAME`.
    pub path: PathBuf,
    /// SHA-256 of its bytes.
    pub sha256: String,
    /// The format read.
    pub format: &'static str,
    /// The TopoJSON object, if any.
    pub object: Option<String>,
    /// The key as used.
    pub key: String,
    /// Number of features.
    pub features: usize,
    /// How the keys were read.
    pub keys: KeyReading,
}

impl LayerInfo {
    fn of(l: &Layer, keys: KeyReading) -> LayerInfo {
        LayerInfo {
            path: l.path.clone(),
            sha256: l.sha256.clone(),
            format: l.format,
            object: l.object.clone(),
            key: l.key.clone(),
            features: l.features.len(),
            keys,
        }
    }
}

fn form_name(form: CodeForm) -> String {
    match form {
        CodeForm::County => "5-digit county codes".into(),
        CodeForm::State => "2-digit state codes".into(),
        CodeForm::Digits(w) => format!("{w}-digit codes"),
        CodeForm::Plain => "keys as written".into(),
    }
}

/// One line of the overlay's report file.
#[derive(Debug, Clone, PartialEq)]
pub struct ReportItem {
    /// `check`, `cross-parent`, `not-nested`, `history`, `area-fallback`,
    /// `collapsed`.
    pub item: &'static str,
    /// Source code.
    pub from_code: String,
    /// Target code (empty where none).
    pub to_code: String,
    /// The share concerned (empty where none).
    pub share: Option<f64>,
    /// In words.
    pub note: String,
}

/// What [`execute`] produced.
#[derive(Debug, Clone)]
pub struct Report {
    /// The crosswalk, sorted.
    pub crosswalk: Crosswalk,
    /// The overlay's own account (per-source summaries and more).
    pub result: OverlayResult,
    /// The source layer.
    pub from: LayerInfo,
    /// The target layer.
    pub to: LayerInfo,
    /// Repairs of the source layer.
    pub from_prep: PreparedLayer,
    /// Repairs of the target layer.
    pub to_prep: PreparedLayer,
    /// SHA-256 of the population layer, if any.
    pub population_sha256: Option<String>,
    /// The nesting rule applied.
    pub nesting: Nesting,
    /// Items that need a person's eye.
    pub items: Vec<ReportItem>,
    /// Warnings about the input layers (repeated keys and the like).
    pub warnings: Vec<String>,
    /// The crosswalk as written (path, SHA-256, bytes).
    pub output: Written,
    /// The sidecar written beside a crosswalk file.
    pub sidecar: Option<PathBuf>,
}

/// Builds the crosswalk: reads both layers (and the population layer),
/// repairs them, overlays, and writes the crosswalk, the report file (if
/// asked) and the sidecar together (staged, renamed into place at the end,
/// sidecar last).
pub fn execute(config: &Config) -> Result<Report> {
    let mut warnings = Vec::new();
    // Both layers at once (a TopoJSON's arcs are read straight into
    // numbers, so a document costs little more than its polygons); when
    // both fail, the source layer's error is the one shown.
    let (from_read, to_read) = rayon::join(
        || read_prepared(&config.from, config.repeated),
        || read_prepared(&config.to, config.repeated),
    );
    let (from_prep, from, from_warnings) = from_read?;
    let (to_prep, to, to_warnings) = to_read?;
    warnings.extend(from_warnings);
    warnings.extend(to_warnings);
    let (weighting, population_sha256) = match &config.population {
        Some((spec, field)) => {
            let (layer, sha) = population::read(spec, field)?;
            (Weighting::Population(layer), Some(sha))
        }
        None => (Weighting::Area, None),
    };
    let years = (
        builtin_year(&config.from.spec),
        builtin_year(&config.to.spec),
    );
    let nesting = match (config.parent_digits, years) {
        (Some(0), _) => Nesting::None,
        (Some(n), _) => Nesting::CodePrefix(n),
        (None, (Some(_), Some(_))) => Nesting::CodePrefix(2),
        (None, _) => Nesting::None,
    };
    let unchanged = match years {
        (Some(a), Some(b)) => unchanged_codes(a, b)?,
        _ => BTreeSet::new(),
    };
    let options = Options {
        min_share: config.min_share,
        weighting,
        nesting,
        unchanged,
    };
    let progress = Progress::new(from_prep.units.len() as u64, "overlay", config.quiet);
    let done = AtomicU64::new(0);
    let pieces = AtomicU64::new(0);
    let tick = |made: usize| {
        let p = pieces.fetch_add(made as u64, Ordering::Relaxed) + made as u64;
        // Update the bar in steps so threads do not contend on it.
        if done.fetch_add(1, Ordering::Relaxed) % 64 == 63 {
            progress.inc(64);
            progress.set_message(format!("{p} pieces"));
        }
    };
    let result = overlay(&from_prep.units, &to_prep.units, &options, &tick);
    progress.finish();
    let items = report_items(&result, &from_prep, &to_prep);
    let crosswalk = result.crosswalk.clone();
    let mut staged = Staged::new();
    let parquet = matches!(&config.output, Target::File(p) if is_parquet_path(p));
    let output = staged.stage_target(&config.output, |w| {
        if parquet {
            write_parquet(w, &crosswalk)
        } else {
            write_csv(w, &crosswalk)
        }
    })?;
    if let Some(path) = &config.report {
        staged.stage(path, |w| write_report(w, &items))?;
    }
    let mut report = Report {
        crosswalk,
        result,
        from,
        to,
        from_prep,
        to_prep,
        population_sha256,
        nesting,
        items,
        warnings,
        output,
        sidecar: None,
    };
    if let Target::File(path) = &config.output {
        let side = sidecar_path(path);
        let meta = sidecar(config, &report);
        staged.stage(&side, |w| meta.write(w))?;
        report.sidecar = Some(side);
    }
    staged.commit()?;
    Ok(report)
}

/// Reads a layer and repairs it; the raw features are dropped here, so only
/// the prepared units stay in memory.
fn read_prepared(
    req: &LayerRequest,
    repeated: RepeatedKeys,
) -> Result<(PreparedLayer, LayerInfo, Vec<String>)> {
    let mut warnings = Vec::new();
    let mut layer = read_layer(req)?;
    let keys = layer.normalize_keys()?;
    if keys.repaired > 0 {
        warnings.push(format!(
            "{}: {} keys of field {:?} had lost their leading zeros (read as {}); restored",
            layer.path.display(),
            keys.repaired,
            layer.key,
            form_name(keys.form)
        ));
    }
    warnings.extend(layer.notes(repeated, Some("--repeated-keys"))?);
    let info = LayerInfo::of(&layer, keys);
    let prepared = prepare(&layer.features, layer.convention);
    Ok((prepared, info, warnings))
}

fn report_items(
    result: &OverlayResult,
    from: &PreparedLayer,
    to: &PreparedLayer,
) -> Vec<ReportItem> {
    let mut items = Vec::new();
    for s in &result.sources {
        for c in &s.checks {
            items.push(ReportItem {
                item: "check",
                from_code: s.key.clone(),
                to_code: c.to.clone(),
                share: Some(c.population_weight),
                note: format!(
                    "population weight {} but area weight {}: check the population layer here",
                    fixed(c.population_weight, 4),
                    fixed(c.area_weight, 4)
                ),
            });
        }
        for (t, w) in &s.cross_parent {
            items.push(ReportItem {
                item: "cross-parent",
                from_code: s.key.clone(),
                to_code: t.clone(),
                share: Some(*w),
                note:
                    "piece in another parent unit (units nest): dropped and the source renormalized"
                        .into(),
            });
        }
        if s.not_nested {
            items.push(ReportItem {
                item: "not-nested",
                from_code: s.key.clone(),
                to_code: String::new(),
                share: None,
                note: "half the source or more lies in other parents: pieces kept; the layers do not nest here"
                    .into(),
            });
        }
        if s.basis == Basis::AreaFallback {
            items.push(ReportItem {
                item: "area-fallback",
                from_code: s.key.clone(),
                to_code: String::new(),
                share: None,
                note: "no population inside the source: weighted by area".into(),
            });
        }
    }
    for code in &result.history_rows {
        items.push(ReportItem {
            item: "history",
            from_code: code.clone(),
            to_code: code.clone(),
            share: Some(1.0),
            note: "collapsed to nothing in both layers; the change history says it continued unchanged: identity row"
                .into(),
        });
    }
    for (side, p) in [("source", from), ("target", to)] {
        for r in p.repairs.iter().filter(|r| r.collapsed) {
            if result.history_rows.contains(&r.key) {
                continue;
            }
            items.push(ReportItem {
                item: "collapsed",
                from_code: if side == "source" {
                    r.key.clone()
                } else {
                    String::new()
                },
                to_code: if side == "target" {
                    r.key.clone()
                } else {
                    String::new()
                },
                share: None,
                note: format!("{side} feature {} collapsed to nothing: no rows", r.feature),
            });
        }
    }
    items
}

fn write_report(w: &mut dyn Write, items: &[ReportItem]) -> std::io::Result<()> {
    writeln!(w, "item,from_code,to_code,share,note")?;
    for i in items {
        writeln!(
            w,
            "{},{},{},{},\"{}\"",
            i.item,
            i.from_code,
            i.to_code,
            i.share.map_or(String::new(), |s| fixed(s, DECIMALS)),
            i.note.replace('"', "\"\"")
        )?;
    }
    Ok(())
}

/// Runs the command: arguments, checked configuration, [`execute`].
pub fn run(args: Args, global: Global) -> Result<()> {
    let config = check(&args, global.quiet)?;
    let report = execute(&config)?;
    for w in &report.warnings {
        super::warn(w);
    }
    say_summary(global, &report, config.report.as_deref());
    Ok(())
}

fn repairs_json(p: &PreparedLayer) -> serde_json::Value {
    p.repairs
        .iter()
        .map(|r| {
            json!({
                "feature": r.feature,
                "code": r.key,
                "problems": r.problems,
                "area_change": fixed(r.area_change, DECIMALS).parse::<f64>().unwrap_or(0.0),
                "collapsed": r.collapsed,
            })
        })
        .collect()
}

fn layer_input(role: &str, layer: &LayerInfo, label: &str) -> SidecarInput {
    let more = json!({
        "format": layer.format,
        "object": layer.object,
        "key": layer.key,
        "key_form": form_name(layer.keys.form),
        "keys_with_leading_zeros_restored": layer.keys.repaired,
        "vintage": label,
    });
    SidecarInput {
        role: role.into(),
        path: layer.path.display().to_string(),
        sha256: layer.sha256.clone(),
        rows: Some(layer.features as u64),
        more: more.as_object().cloned().unwrap_or_default(),
    }
}

fn round(v: f64) -> f64 {
    fixed(v, DECIMALS).parse().unwrap_or(v)
}

fn sidecar(config: &Config, report: &Report) -> Sidecar {
    let result = &report.result;
    let dropped: serde_json::Map<String, serde_json::Value> = result
        .sources
        .iter()
        .filter(|s| s.dropped_share > 0.0)
        .map(|s| (s.key.clone(), json!(round(s.dropped_share))))
        .collect();
    let overlaps: serde_json::Map<String, serde_json::Value> = result
        .sources
        .iter()
        .filter(|s| s.overlap_share > 0.0)
        .map(|s| (s.key.clone(), json!(round(s.overlap_share))))
        .collect();
    let fallback: Vec<&str> = result
        .sources
        .iter()
        .filter(|s| s.basis == Basis::AreaFallback)
        .map(|s| s.key.as_str())
        .collect();
    let cross: serde_json::Map<String, serde_json::Value> = result
        .sources
        .iter()
        .filter(|s| !s.cross_parent.is_empty())
        .map(|s| {
            let m: serde_json::Map<String, serde_json::Value> = s
                .cross_parent
                .iter()
                .map(|(t, w)| (t.clone(), json!(round(*w))))
                .collect();
            (s.key.clone(), serde_json::Value::Object(m))
        })
        .collect();
    let not_nested: Vec<&str> = result
        .sources
        .iter()
        .filter(|s| s.not_nested)
        .map(|s| s.key.as_str())
        .collect();
    let mut meta = Sidecar::new("overlay", report.output.clone());
    meta.inputs
        .push(layer_input("from", &report.from, &config.from_label));
    meta.inputs
        .push(layer_input("to", &report.to, &config.to_label));
    if let Some((p, f)) = &config.population {
        let mut more = serde_json::Map::new();
        more.insert("field".into(), json!(f));
        meta.inputs.push(SidecarInput {
            role: "population".into(),
            path: p.clone(),
            sha256: report.population_sha256.clone().unwrap_or_default(),
            rows: None,
            more,
        });
    }
    meta.options = json!({
        "weight": if config.population.is_some() { "population" } else { "area" },
        "min_share": config.min_share,
        "parent_digits": match report.nesting { Nesting::None => 0, Nesting::CodePrefix(n) => n },
        "repeated_keys": match config.repeated { RepeatedKeys::Merge => "merge", RepeatedKeys::Refuse => "refuse" },
        "area": "WGS84 ellipsoid, edges straight in longitude/latitude",
    });
    let details = json!({
        "columns": {
            "from_code": "source unit code",
            "to_code": "target unit code; empty for the share of the source outside every target",
            "weight": "share of the source (by the basis) in the target",
            "target_share": "share of the target made of this piece (area or population)",
            "basis": "area, population, area-fallback (population weighting asked, source has none), or history (identity row from the change history)",
        },
        "rows": report.crosswalk.rows.len(),
        "sliver_rule": "a piece below min_share of both its source and its target is dropped and the source's weights renormalized",
        "dropped_share_by_source": dropped,
        "overlapping_targets_share_by_source": overlaps,
        "area_fallback_sources": fallback,
        "targets_without_source": result.unreached_targets,
        "repairs": { "from": repairs_json(&report.from_prep), "to": repairs_json(&report.to_prep) },
    });
    let mut meta_details = details.as_object().cloned().unwrap_or_default();
    if let Nesting::CodePrefix(n) = report.nesting {
        meta_details.insert("nesting".into(), json!({
            "rule": format!(
                "units nest in parents named by the first {n} characters of their codes; a piece in another parent is a sliver of generalized boundaries: dropped and the source renormalized"
            ),
            "dropped_by_source": cross,
            "not_nested_sources": not_nested,
        }));
    }
    if !result.history_rows.is_empty() {
        meta_details.insert("history_rows".into(), json!({
            "rule": "a unit that collapses to nothing in both layers but that the change history says continued unchanged gets an identity row with basis history",
            "codes": result.history_rows,
        }));
    }
    if config.population.is_some() {
        let checks = report.items.iter().filter(|i| i.item == "check").count();
        meta_details.insert("population_checks".into(), json!({
            "margin": POPULATION_CHECK_MARGIN,
            "rule": "a piece whose population weight departs from its area weight by more than the margin is listed as check in the report",
            "pieces_flagged": checks,
            "points_outside_every_source": result.points_outside.map(|p| p.0),
            "count_outside_every_source": result.points_outside.map(|p| round(p.1)),
        }));
    }
    meta.details = meta_details;
    meta
}

fn say_summary(global: Global, report: &Report, report_file: Option<&Path>) {
    let result = &report.result;
    let (from, to) = (&report.from_prep, &report.to_prep);
    let rows = report.crosswalk.rows.len();
    super::say(
        global,
        format!(
            "overlay: {} sources, {} targets, {rows} rows",
            from.units.len(),
            to.units.len()
        ),
    );
    for (side, p) in [("source", from), ("target", to)] {
        let collapsed = p.repairs.iter().filter(|r| r.collapsed).count();
        if !p.repairs.is_empty() {
            super::say(
                global,
                format!(
                    "  {} {side} features repaired ({collapsed} collapsed to nothing)",
                    p.repairs.len()
                ),
            );
        }
        for r in p.repairs.iter().filter(|r| r.collapsed) {
            let fate = if result.history_rows.contains(&r.key) {
                format!(
                    "the change history says {} continued unchanged, so it gets the identity row {} -> {} (basis history)",
                    r.key, r.key, r.key
                )
            } else {
                "it gets no crosswalk rows".to_string()
            };
            super::warn(format!(
                "{side} feature {} ({}) collapsed to nothing: {}; {fate}",
                r.feature,
                r.key,
                r.problems
                    .iter()
                    .filter(|p| !p.starts_with("nothing is left"))
                    .cloned()
                    .collect::<Vec<_>>()
                    .join("; ")
            ));
        }
    }
    let dropped: Vec<_> = result
        .sources
        .iter()
        .filter(|s| s.dropped_share > 0.0)
        .collect();
    if !dropped.is_empty() {
        let total: f64 = dropped.iter().map(|s| s.dropped_share).sum();
        let max = dropped.iter().map(|s| s.dropped_share).fold(0.0, f64::max);
        super::say(
            global,
            format!(
                "  slivers dropped in {} sources (largest {:.4}%, mean {:.6}%)",
                dropped.len(),
                max * 100.0,
                total / dropped.len() as f64 * 100.0
            ),
        );
    }
    let cross: Vec<_> = result
        .sources
        .iter()
        .filter(|s| !s.cross_parent.is_empty())
        .collect();
    if !cross.is_empty() {
        let pieces: usize = cross.iter().map(|s| s.cross_parent.len()).sum();
        let max = cross
            .iter()
            .flat_map(|s| s.cross_parent.iter().map(|c| c.1))
            .fold(0.0, f64::max);
        super::say(
            global,
            format!(
                "  {pieces} pieces in {} sources crossed into another parent unit and were dropped (largest {:.4}%)",
                cross.len(),
                max * 100.0
            ),
        );
    }
    let not_nested = result.sources.iter().filter(|s| s.not_nested).count();
    if not_nested > 0 {
        super::warn(format!(
            "{not_nested} sources lie half or more in other parent units: their pieces were kept; do the layers nest as --parent-digits says?"
        ));
    }
    let partly = result
        .sources
        .iter()
        .filter(|s| s.uncovered_share > 0.0)
        .count();
    if partly > 0 {
        super::say(
            global,
            format!("  {partly} sources partly outside every target (rows with empty to_code)"),
        );
    }
    if !result.unreached_targets.is_empty() {
        super::say(
            global,
            format!(
                "  {} targets reached by no source",
                result.unreached_targets.len()
            ),
        );
    }
    if let Some((n, count)) = result.points_outside {
        if n > 0 {
            super::warn(format!(
                "{n} population points (count {}) lie outside every source polygon and weight nothing",
                fixed(count, 2).trim_end_matches('0').trim_end_matches('.')
            ));
        }
    }
    if report.population_sha256.is_some() {
        let fallback = result
            .sources
            .iter()
            .filter(|s| s.basis == Basis::AreaFallback)
            .count();
        let checks = report.items.iter().filter(|i| i.item == "check").count();
        super::say(
            global,
            format!(
                "  {fallback} sources have no population and fell back to area; {checks} pieces flagged check (population and area weights differ by more than {POPULATION_CHECK_MARGIN})"
            ),
        );
    }
    if let Some(p) = &report.sidecar {
        super::say(global, format!("  metadata: {}", p.display()));
    }
    super::say(global, format!("  {CAUTION}"));
    if let Some(p) = report_file {
        super::say(global, format!("  report: {}", p.display()));
    }
}
