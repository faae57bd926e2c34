//! `regionkey overlay`: a crosswalk between two boundary layers by polygon
//! overlay, weighted by area or by population.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use serde_json::json;

use super::Global;
use crate::core::overlay::{
    overlay, prepare, Options, OverlayResult, PreparedLayer, Weighting, DEFAULT_MIN_SHARE,
};
use crate::error::{Error, Result};
use crate::io::crosswalk_file::{
    is_parquet_path, sidecar_path, write_csv, write_parquet, write_sidecar, CAUTION, DECIMALS,
};
use crate::io::geo::{population, read_layer, Layer, LayerRequest, RepeatedKeys};
use crate::io::output::{fixed, write_file, write_to, Target};
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
}

/// The checked configuration.
struct Config {
    from: LayerRequest,
    to: LayerRequest,
    population: Option<(String, String)>,
    min_share: f64,
    output: Target,
}

fn check(args: &Args) -> Result<Config> {
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
    Ok(Config {
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
        population,
        min_share: args.min_share,
        output,
    })
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

/// Runs the command.
pub fn run(args: Args, global: Global) -> Result<()> {
    let config = check(&args)?;
    let from = read_layer(&config.from)?;
    let to = read_layer(&config.to)?;
    let repeated = match args.more.repeated_keys {
        Repeated::Merge => RepeatedKeys::Merge,
        Repeated::Refuse => RepeatedKeys::Refuse,
    };
    for layer in [&from, &to] {
        for note in layer.notes(repeated, Some("--repeated-keys"))? {
            super::warn(note);
        }
    }
    let (weighting, pop_sha) = match &config.population {
        Some((spec, field)) => {
            let (layer, sha) = population::read(spec, field)?;
            (Weighting::Population(layer), Some(sha))
        }
        None => (Weighting::Area, None),
    };
    let from_prep = prepare(&from.features, from.convention);
    let to_prep = prepare(&to.features, to.convention);
    let options = Options {
        min_share: config.min_share,
        weighting,
    };
    let progress = Progress::new(from_prep.units.len() as u64, "overlay", global.quiet);
    let done = AtomicU64::new(0);
    let tick = || {
        // Update the bar in steps so threads do not contend on it.
        if done.fetch_add(1, Ordering::Relaxed) % 64 == 63 {
            progress.inc(64);
        }
    };
    let result = overlay(&from_prep.units, &to_prep.units, &options, &tick);
    progress.finish();

    let mut crosswalk = result.crosswalk.clone();
    crosswalk.sort();
    match &config.output {
        Target::File(path) if is_parquet_path(path) => {
            write_file(path, |w| write_parquet(w, &crosswalk))?
        }
        target => write_to(target, |w| write_csv(w, &crosswalk))?,
    }
    let meta = metadata(&args, &from, &to, &from_prep, &to_prep, &result, pop_sha);
    match &config.output {
        Target::File(path) => {
            let side = sidecar_path(path);
            write_file(&side, |w| write_sidecar(w, &meta))?;
            say_summary(global, &from_prep, &to_prep, &result, Some(&side));
        }
        Target::Stdout => say_summary(global, &from_prep, &to_prep, &result, None),
    }
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

fn layer_json(layer: &Layer, label: String) -> serde_json::Value {
    json!({
        "path": layer.path.display().to_string(),
        "sha256": layer.sha256,
        "format": layer.format,
        "object": layer.object,
        "key": layer.key,
        "vintage": label,
        "features": layer.features.len(),
    })
}

fn round(v: f64) -> f64 {
    fixed(v, DECIMALS).parse().unwrap_or(v)
}

fn metadata(
    args: &Args,
    from: &Layer,
    to: &Layer,
    from_prep: &PreparedLayer,
    to_prep: &PreparedLayer,
    result: &OverlayResult,
    pop_sha: Option<String>,
) -> serde_json::Value {
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
        .filter(|s| s.basis == crate::core::crosswalk::Basis::AreaFallback)
        .map(|s| s.key.as_str())
        .collect();
    json!({
        "tool": format!("regionkey {}", env!("CARGO_PKG_VERSION")),
        "from": layer_json(from, label(&args.from, &args.more.from_label)),
        "to": layer_json(to, label(&args.to, &args.more.to_label)),
        "options": {
            "weight": match args.more.weight { WeightBy::Area => "area", WeightBy::Population => "population" },
            "population": args.more.population.as_ref().map(|p| json!({
                "path": p,
                "field": args.more.population_field,
                "sha256": pop_sha,
            })),
            "min_share": args.min_share,
            "area": "WGS84 ellipsoid, edges straight in longitude/latitude",
        },
        "columns": {
            "from_code": "source unit code",
            "to_code": "target unit code; empty for the share of the source outside every target",
            "weight": "share of the source (by the basis) in the target",
            "target_share": "share of the target made of this piece (area or population)",
            "basis": "area, population, or area-fallback (population weighting asked, source has none)",
        },
        "sliver_rule": "a piece below min_share of both its source and its target is dropped and the source's weights renormalized",
        "dropped_share_by_source": dropped,
        "overlapping_targets_share_by_source": overlaps,
        "area_fallback_sources": fallback,
        "targets_without_source": result.unreached_targets,
        "repairs": { "from": repairs_json(from_prep), "to": repairs_json(to_prep) },
        "caution": CAUTION,
    })
}

fn say_summary(
    global: Global,
    from: &PreparedLayer,
    to: &PreparedLayer,
    result: &OverlayResult,
    sidecar: Option<&Path>,
) {
    let rows = result.crosswalk.rows.len();
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
            super::warn(format!(
                "{side} feature {} ({}) collapsed to nothing: {}",
                r.feature,
                r.key,
                r.problems.join("; ")
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
    if let Some(p) = sidecar {
        super::say(global, format!("  metadata: {}", p.display()));
    }
}
