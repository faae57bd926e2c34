//! `regionkey chain FIRST SECOND --output OUT`: compose two crosswalks
//! (x->y and y->z) into one (x->z). See [`crate::core::chain`] for how
//! weights, target shares and uncovered shares combine.

use std::path::PathBuf;

use super::{say, Global};
use crate::core::chain::compose;
use crate::error::{Error, Result};
use crate::io::crosswalk_file;
use crate::io::data::sha256_file;
use crate::io::output::{write_file, write_to, Target};

/// Arguments.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The first crosswalk (x->y).
    pub first: PathBuf,
    /// The second crosswalk (y->z); its sources are the first one's targets.
    pub second: PathBuf,
    /// Where to write the composed crosswalk (x->z); `-` for standard output (then no sidecar).
    #[arg(long, short)]
    pub output: String,
}

/// Runs the command.
pub fn run(args: Args, global: Global) -> Result<()> {
    let output = Target::parse(&args.output);
    output.check_writable()?;
    let first = crosswalk_file::read_csv(&args.first)?;
    let second = crosswalk_file::read_csv(&args.second)?;
    let composed = compose(&first, &second).map_err(|e| {
        let e = e.to_string();
        let e = e
            .replacen("first:", &format!("{}:", args.first.display()), 1)
            .replacen("second:", &format!("{}:", args.second.display()), 1);
        Error::Usage(e)
    })?;
    write_to(&output, |w| crosswalk_file::write_csv(w, &composed))?;
    if let Target::File(path) = &output {
        let sidecar = crate::cli::apply::sidecar_path(path);
        let json = serde_json::json!({
            "command": "chain",
            "regionkey_version": env!("CARGO_PKG_VERSION"),
            "inputs": [
                {"role": "first", "path": args.first.display().to_string(), "sha256": sha256_file(&args.first)?, "rows": first.rows.len()},
                {"role": "second", "path": args.second.display().to_string(), "sha256": sha256_file(&args.second)?, "rows": second.rows.len()},
            ],
            "rows": composed.rows.len(),
            "method": "weight(x,z) = sum over y of weight(x,y) * weight(y,z); target_share(x,z) = sum over y of target_share(x,y) * target_share(y,z), exact when each y lies wholly in one x or one z; uncovered shares carry through",
            "caution": crate::cli::apply::CAUTION,
        });
        let text = serde_json::to_string_pretty(&json)
            .map_err(|e| Error::Usage(format!("cannot write metadata: {e}")))?
            + "\n";
        write_file(&sidecar, |w| w.write_all(text.as_bytes()))?;
    }
    let sources = composed
        .rows
        .iter()
        .map(|r| &r.from_code)
        .collect::<std::collections::BTreeSet<_>>()
        .len();
    say(
        global,
        format!(
            "regionkey chain: {} rows, {} sources",
            composed.rows.len(),
            sources
        ),
    );
    say(global, format!("  {}", crate::cli::apply::CAUTION));
    Ok(())
}
