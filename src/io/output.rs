//! One place that writes outputs: `-` means standard output; a path is
//! written to a temporary file beside it and renamed into place, so a
//! failed run never leaves a half-written file.

use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// Where an output goes.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Target {
    /// Standard output.
    Stdout,
    /// A file, written atomically.
    File(PathBuf),
}

impl Target {
    /// `-` is standard output; anything else a file path.
    pub fn parse(text: &str) -> Target {
        if text == "-" {
            Target::Stdout
        } else {
            Target::File(PathBuf::from(text))
        }
    }

    /// The path for messages (`-` for standard output).
    pub fn display_path(&self) -> PathBuf {
        match self {
            Target::Stdout => PathBuf::from("-"),
            Target::File(p) => p.clone(),
        }
    }

    /// Checks before long work starts that the output can be written: the
    /// folder exists and is a folder.
    pub fn check_writable(&self) -> Result<()> {
        if let Target::File(path) = self {
            let dir = parent_dir(path);
            if !dir.is_dir() {
                return Err(Error::io(
                    path,
                    "cannot write output",
                    std::io::Error::new(std::io::ErrorKind::NotFound, "its folder does not exist"),
                ));
            }
            if path.is_dir() {
                return Err(Error::Usage(format!(
                    "{}: is a folder; give a file name for the output",
                    path.display()
                )));
            }
        }
        Ok(())
    }
}

fn parent_dir(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

/// Writes through `fill` to `target`. For a file: a temporary file in the
/// same folder, flushed, then renamed over the destination.
pub fn write_to<F>(target: &Target, fill: F) -> Result<()>
where
    F: FnOnce(&mut dyn Write) -> std::io::Result<()>,
{
    let mut staged = Staged::new();
    staged.stage_target(target, fill)?;
    staged.commit()
}

/// Writes a file atomically (temporary file, then rename).
pub fn write_file<F>(path: &Path, fill: F) -> Result<()>
where
    F: FnOnce(&mut dyn Write) -> std::io::Result<()>,
{
    let mut staged = Staged::new();
    staged.stage(path, fill)?;
    staged.commit()
}

/// What was written to one output: its SHA-256 (lowercase hex) and size.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct Written {
    /// The output as named by the user (`-` for standard output).
    pub path: String,
    /// SHA-256 of the bytes written, lowercase hex.
    pub sha256: String,
    /// Bytes written.
    pub bytes: u64,
}

/// A writer that hashes and counts what passes through it.
struct Hashing<W> {
    inner: W,
    hasher: sha2::Sha256,
    bytes: u64,
}

impl<W: Write> Write for Hashing<W> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        use sha2::Digest;
        let n = self.inner.write(buf)?;
        self.hasher.update(&buf[..n]);
        self.bytes += n as u64;
        Ok(n)
    }
    fn flush(&mut self) -> std::io::Result<()> {
        self.inner.flush()
    }
}

impl<W> Hashing<W> {
    fn new(inner: W) -> Self {
        use sha2::Digest;
        Hashing {
            inner,
            hasher: sha2::Sha256::new(),
            bytes: 0,
        }
    }
    fn finish(self, path: String) -> Written {
        use sha2::Digest;
        Written {
            path,
            sha256: hex(&self.hasher.finalize()),
            bytes: self.bytes,
        }
    }
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// The prefix of every temporary file regionkey writes; the process id
/// follows, so a later run can tell the files of a run that is gone.
const TEMP_PREFIX: &str = ".regionkey-";

/// The outputs of one run, written together: each is written in full to a
/// temporary file beside its destination (named `.regionkey-PID-....tmp`),
/// and [`Staged::commit`] renames them all into place, in the order they
/// were staged, only after every one was written. A run killed before the
/// commit leaves the previous outputs as they were; one killed during it
/// leaves a prefix of the renames, so the file staged last (a sidecar naming
/// the SHA-256 of the file it describes) never describes a file from
/// another run. Temporary files of earlier runs whose process is gone are
/// removed when a run stages a file in the same folder. Dropping a `Staged`
/// without committing removes its temporary files.
#[derive(Default)]
pub struct Staged {
    files: Vec<(tempfile::TempPath, PathBuf)>,
    cleaned: Vec<PathBuf>,
}

impl Staged {
    /// Nothing staged yet.
    pub fn new() -> Staged {
        Staged::default()
    }

    /// Writes `fill` into a temporary file beside `path`, to be renamed
    /// onto `path` by [`Staged::commit`]; returns what was written.
    pub fn stage<F>(&mut self, path: &Path, fill: F) -> Result<Written>
    where
        F: FnOnce(&mut dyn Write) -> std::io::Result<()>,
    {
        let dir = parent_dir(path).to_path_buf();
        if !self.cleaned.contains(&dir) {
            remove_stale_temp_files(&dir);
            self.cleaned.push(dir.clone());
        }
        let tmp = tempfile::Builder::new()
            .prefix(&format!("{TEMP_PREFIX}{}-", std::process::id()))
            .suffix(".tmp")
            .tempfile_in(&dir)
            .map_err(|e| Error::io(path, "cannot create a temporary file beside", e))?;
        let written = {
            let mut w = BufWriter::with_capacity(1 << 16, Hashing::new(tmp.as_file()));
            fill(&mut w)
                .and_then(|_| w.flush())
                .map_err(|e| Error::io(path, "cannot write", e))?;
            let hashing = w
                .into_inner()
                .map_err(|e| Error::io(path, "cannot write", e.into_error()))?;
            hashing.finish(path.display().to_string())
        };
        // No fsync: the rename makes the output appear whole or not at all to
        // readers and after a failed run; syncing large outputs costs seconds
        // and guards only against power loss.
        // Temporary files are created private (0600); an output is an ordinary
        // file, readable by others like any file the user writes, or keeps the
        // permissions of the file it replaces.
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            let mode = std::fs::metadata(path).map_or(0o644, |m| m.permissions().mode() & 0o7777);
            std::fs::set_permissions(tmp.path(), std::fs::Permissions::from_mode(mode))
                .map_err(|e| Error::io(path, "cannot set permissions of", e))?;
        }
        self.files.push((tmp.into_temp_path(), path.to_path_buf()));
        Ok(written)
    }

    /// Like [`Staged::stage`] for a [`Target`]: standard output is written
    /// at once (nothing to rename).
    pub fn stage_target<F>(&mut self, target: &Target, fill: F) -> Result<Written>
    where
        F: FnOnce(&mut dyn Write) -> std::io::Result<()>,
    {
        match target {
            Target::Stdout => {
                let stdout = std::io::stdout();
                let mut w = BufWriter::with_capacity(1 << 16, Hashing::new(stdout.lock()));
                fill(&mut w)
                    .and_then(|_| w.flush())
                    .map_err(|e| Error::io("-", "cannot write to standard output", e))?;
                let hashing = w.into_inner().map_err(|e| {
                    Error::io("-", "cannot write to standard output", e.into_error())
                })?;
                Ok(hashing.finish("-".into()))
            }
            Target::File(path) => self.stage(path, fill),
        }
    }

    /// Renames every staged file into place, in the order staged.
    pub fn commit(mut self) -> Result<()> {
        for (tmp, dest) in std::mem::take(&mut self.files) {
            tmp.persist(&dest)
                .map_err(|e| Error::io(&dest, "cannot move into place", e.error))?;
        }
        Ok(())
    }
}

/// True when a process with this id is running (Linux: `/proc/PID`); on
/// other systems every process is taken as running, so nothing is removed.
fn process_is_running(pid: u32) -> bool {
    if cfg!(target_os = "linux") {
        Path::new("/proc").join(pid.to_string()).exists()
    } else {
        true
    }
}

/// Removes temporary files (`.regionkey-PID-....tmp`) in `dir` left by
/// runs that are no longer running (killed before they could rename or
/// remove them). Files of running processes, of this one, and names that
/// do not carry a process id are left alone; failures are ignored (the
/// files are only litter).
pub fn remove_stale_temp_files(dir: &Path) {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    let me = std::process::id();
    for entry in entries.flatten() {
        let name = entry.file_name();
        let Some(name) = name.to_str() else { continue };
        let Some(rest) = name.strip_prefix(TEMP_PREFIX) else {
            continue;
        };
        if !name.ends_with(".tmp") {
            continue;
        }
        let Some(Ok(pid)) = rest.split_once('-').map(|(p, _)| p.parse::<u32>()) else {
            continue;
        };
        if pid != me && !process_is_running(pid) {
            let _ = std::fs::remove_file(entry.path());
        }
    }
}

/// The caution every output of allocated figures carries (sidecars,
/// summaries).
pub const CAUTION: &str = "Allocated figures are estimates: they assume a value is spread evenly (by area or by population) within each source unit. For legal or funding uses, official relationship files and local practice prevail.";

/// One input of a run, as a sidecar records it.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct SidecarInput {
    /// What the input is to the command (`data`, `crosswalk`, `first`, `from`, ...).
    pub role: String,
    /// The path as given.
    pub path: String,
    /// SHA-256 of the file, lowercase hex (empty for built-in data).
    pub sha256: String,
    /// Rows or features read, if counted.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub rows: Option<u64>,
    /// Anything else the command records about the input.
    #[serde(flatten)]
    pub more: serde_json::Map<String, serde_json::Value>,
}

impl SidecarInput {
    /// An input file, hashed now.
    pub fn file(role: &str, path: &Path, rows: Option<u64>) -> Result<SidecarInput> {
        Ok(SidecarInput {
            role: role.into(),
            path: path.display().to_string(),
            sha256: sha256_file(path)?,
            rows,
            more: serde_json::Map::new(),
        })
    }
}

/// The metadata written beside an output (`OUTPUT.json`): which command
/// wrote which file (with its SHA-256, so a sidecar never passes for the
/// sidecar of another run's file), from which inputs, with which options,
/// the command's own figures, and the caution. Keys are written in a fixed
/// order and maps sorted, so the bytes are stable.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Sidecar {
    /// The command (`apply`, `chain`, `overlay`).
    pub command: String,
    /// `regionkey VERSION`.
    pub tool: String,
    /// The file described.
    pub output: Written,
    /// The inputs, in order.
    pub inputs: Vec<SidecarInput>,
    /// Options as they took effect.
    pub options: serde_json::Value,
    /// The command's own figures (counts, coverage, repairs, ...).
    #[serde(flatten)]
    pub details: serde_json::Map<String, serde_json::Value>,
    /// [`CAUTION`].
    pub caution: String,
}

impl Sidecar {
    /// A sidecar for `command` describing `output`.
    pub fn new(command: &str, output: Written) -> Sidecar {
        Sidecar {
            command: command.into(),
            tool: format!("regionkey {}", env!("CARGO_PKG_VERSION")),
            output,
            inputs: Vec::new(),
            options: serde_json::Value::Object(Default::default()),
            details: serde_json::Map::new(),
            caution: CAUTION.into(),
        }
    }

    /// Writes the sidecar as pretty JSON with a final newline.
    pub fn write(&self, w: &mut dyn Write) -> std::io::Result<()> {
        serde_json::to_writer_pretty(&mut *w, self).map_err(std::io::Error::other)?;
        writeln!(w)
    }
}

/// The sidecar path of an output: the output path with `.json` appended.
pub fn sidecar_path(path: &Path) -> PathBuf {
    let mut s = path.as_os_str().to_owned();
    s.push(".json");
    PathBuf::from(s)
}

/// SHA-256 of a file, as lowercase hex.
pub fn sha256_file(path: &Path) -> Result<String> {
    use sha2::{Digest, Sha256};
    let mut file =
        std::fs::File::open(path).map_err(|e| Error::io(path, "cannot open input", e))?;
    let mut hasher = Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    loop {
        let n = std::io::Read::read(&mut file, &mut buf)
            .map_err(|e| Error::io(path, "cannot read", e))?;
        if n == 0 {
            break;
        }
        hasher.update(&buf[..n]);
    }
    Ok(hex(&hasher.finalize()))
}

/// The one CSV quoting rule: a field holding a comma, a quote or a line
/// break is quoted, its quotes doubled (RFC 4180); others are written as
/// they are.
pub fn csv_field(text: &str) -> std::borrow::Cow<'_, str> {
    if text.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", text.replace('"', "\"\"")).into()
    } else {
        text.into()
    }
}

/// Writes one CSV record (fields quoted where needed, comma-separated,
/// `\n`-terminated).
pub fn write_csv_record<S: AsRef<str>>(w: &mut dyn Write, fields: &[S]) -> std::io::Result<()> {
    for (i, f) in fields.iter().enumerate() {
        if i > 0 {
            w.write_all(b",")?;
        }
        w.write_all(csv_field(f.as_ref()).as_bytes())?;
    }
    w.write_all(b"\n")
}

/// How figures are written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NumberFormat {
    /// At most this many significant digits, trailing zeros dropped, never
    /// in exponent form. With 15 (the default, [`SIGNIFICANT_DIGITS`]) a
    /// number keeps every digit a 64-bit float holds reliably: 0.0010547
    /// stays 0.0010547, a whole number has no decimals (315, not
    /// 315.000000), and the last-bit noise of arithmetic (1.7999999999999998
    /// for 1.8) is not written.
    Significant(usize),
    /// A fixed number of decimals (rounded).
    Fixed(usize),
}

/// The default number of significant digits: 15, the most that every
/// decimal number survives a round trip through a 64-bit float with
/// (IEEE 754 binary64, `DBL_DIG` in C's `float.h`).
pub const SIGNIFICANT_DIGITS: usize = 15;

impl Default for NumberFormat {
    fn default() -> Self {
        NumberFormat::Significant(SIGNIFICANT_DIGITS)
    }
}

impl NumberFormat {
    /// The text of `value`; `-0` is written as `0`.
    pub fn format(self, value: f64) -> String {
        match self {
            NumberFormat::Significant(digits) => significant(value, digits),
            NumberFormat::Fixed(d) => fixed(value, d),
        }
    }
}

/// `value` rounded to `digits` significant digits (half away from zero,
/// on the shortest decimal that reads back as `value`), trailing zeros
/// dropped, without exponent.
pub fn significant(value: f64, digits: usize) -> String {
    if value == 0.0 {
        return "0".into();
    }
    // Rust writes the shortest round-trip decimal, without exponent.
    let shortest = format!("{}", value.abs());
    if !value.is_finite() {
        return shortest;
    }
    let (int, frac) = shortest.split_once('.').unwrap_or((&shortest, ""));
    let mut d: Vec<u8> = int.bytes().chain(frac.bytes()).collect();
    let mut point = int.len();
    let first = d.iter().position(|&b| b != b'0').unwrap_or(0);
    let digits = digits.max(1);
    if d.len() - first > digits {
        let cut = first + digits;
        let up = d[cut] >= b'5';
        d.truncate(cut);
        if up {
            let mut i = cut;
            loop {
                if i == 0 {
                    d.insert(0, b'1');
                    point += 1;
                    break;
                }
                i -= 1;
                if d[i] == b'9' {
                    d[i] = b'0';
                } else {
                    d[i] += 1;
                    break;
                }
            }
        }
    }
    while d.len() < point {
        d.push(b'0');
    }
    let (int, frac) = d.split_at(point);
    let int = {
        let nz = int.iter().position(|&b| b != b'0').unwrap_or(int.len());
        if nz == int.len() {
            "0"
        } else {
            std::str::from_utf8(&int[nz..]).unwrap_or("0")
        }
    };
    let frac = std::str::from_utf8(frac)
        .unwrap_or("")
        .trim_end_matches('0');
    let mut out = String::with_capacity(int.len() + frac.len() + 2);
    if value < 0.0 && (int != "0" || !frac.is_empty()) {
        out.push('-');
    }
    out.push_str(int);
    if !frac.is_empty() {
        out.push('.');
        out.push_str(frac);
    }
    out
}

/// Formats a float with a fixed number of decimals, so outputs are the same
/// bytes on every run; `-0` is written as `0`.
pub fn fixed(value: f64, decimals: usize) -> String {
    let s = format!("{value:.decimals$}");
    if s.starts_with('-') && s[1..].bytes().all(|b| b == b'0' || b == b'.') {
        s[1..].to_string()
    } else {
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_failed_write_leaves_no_file_behind() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.csv");
        let r = write_file(&path, |w| {
            w.write_all(b"partial")?;
            Err(std::io::Error::other("boom"))
        });
        assert!(r.is_err());
        assert!(!path.exists());
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
    }

    #[test]
    fn a_file_is_replaced_whole() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.csv");
        write_file(&path, |w| w.write_all(b"one")).unwrap();
        write_file(&path, |w| w.write_all(b"two")).unwrap();
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "two");
    }

    #[cfg(unix)]
    #[test]
    fn a_new_output_is_readable_by_others_like_any_file() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.csv");
        write_file(&path, |w| w.write_all(b"x")).unwrap();
        let mode = std::fs::metadata(&path).unwrap().permissions().mode() & 0o777;
        assert_eq!(mode, 0o644);
    }

    #[test]
    fn staged_outputs_appear_only_when_committed() {
        let dir = tempfile::tempdir().unwrap();
        let (a, b) = (dir.path().join("a.csv"), dir.path().join("a.csv.json"));
        std::fs::write(&a, "old").unwrap();
        let mut staged = Staged::new();
        let w = staged.stage(&a, |w| w.write_all(b"new")).unwrap();
        staged.stage(&b, |w| w.write_all(b"{}")).unwrap();
        // SHA-256 of "new": computed independently with `printf new | sha256sum`.
        assert_eq!(
            w.sha256,
            "11507a0e2f5e69d5dfa40a62a1bd7b6ee57e6bcd85c67c9b8431b36fff21c437"
        );
        assert_eq!(w.bytes, 3);
        assert_eq!(std::fs::read_to_string(&a).unwrap(), "old");
        assert!(!b.exists());
        staged.commit().unwrap();
        assert_eq!(std::fs::read_to_string(&a).unwrap(), "new");
        assert_eq!(std::fs::read_to_string(&b).unwrap(), "{}");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 2);
    }

    #[test]
    fn dropped_staged_outputs_leave_the_old_files_and_no_litter() {
        let dir = tempfile::tempdir().unwrap();
        let a = dir.path().join("a.csv");
        std::fs::write(&a, "old").unwrap();
        {
            let mut staged = Staged::new();
            staged.stage(&a, |w| w.write_all(b"new")).unwrap();
        }
        assert_eq!(std::fs::read_to_string(&a).unwrap(), "old");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    #[cfg(target_os = "linux")]
    #[test]
    fn temporary_files_of_runs_that_are_gone_are_removed() {
        let dir = tempfile::tempdir().unwrap();
        // A process id above the kernel's maximum (4194304) is never running.
        let stale = dir.path().join(".regionkey-4999999-abc.tmp");
        let mine = dir
            .path()
            .join(format!(".regionkey-{}-abc.tmp", std::process::id()));
        let foreign = dir.path().join(".regionkey-abc.tmp");
        for p in [&stale, &mine, &foreign] {
            std::fs::write(p, "x").unwrap();
        }
        write_file(&dir.path().join("out.csv"), |w| w.write_all(b"x")).unwrap();
        assert!(!stale.exists());
        assert!(mine.exists() && foreign.exists());
    }

    #[test]
    fn fields_with_commas_quotes_or_line_breaks_are_quoted() {
        assert_eq!(csv_field("a,b"), "\"a,b\"");
        assert_eq!(csv_field("say \"hi\""), "\"say \"\"hi\"\"\"");
        assert_eq!(csv_field("two\nlines"), "\"two\nlines\"");
        assert_eq!(csv_field("plain"), "plain");
        let mut out = Vec::new();
        write_csv_record(&mut out, &["a", "b,c", ""]).unwrap();
        assert_eq!(out, b"a,\"b,c\",\n");
    }

    #[test]
    fn numbers_keep_fifteen_significant_digits_and_whole_numbers_have_no_decimals() {
        let f = NumberFormat::default();
        assert_eq!(f.format(315.0), "315");
        assert_eq!(f.format(0.0010547), "0.0010547");
        assert_eq!(f.format(-0.0), "0");
        assert_eq!(f.format(1e-7), "0.0000001");
        assert_eq!(f.format(0.1 + 0.2), "0.3");
        assert_eq!(f.format(1.7999999999999998), "1.8");
        assert_eq!(f.format(-2.5), "-2.5");
        assert_eq!(f.format(1.0 - f64::EPSILON / 2.0), "1");
        assert_eq!(f.format(1e23), "100000000000000000000000");
        assert_eq!(f.format(123456789012345680.0), "123456789012346000");
        assert_eq!(f.format(1.0 / 3.0), "0.333333333333333");
        assert_eq!(f.format(-2.0 / 3.0), "-0.666666666666667");
        assert_eq!(significant(0.00123456, 3), "0.00123");
        assert_eq!(significant(0.0009996, 3), "0.001");
        assert_eq!(NumberFormat::Fixed(2).format(0.0010547), "0.00");
    }

    proptest::proptest! {
        /// Any decimal of at most 15 significant digits is written back as
        /// itself once read into a float (the guarantee of DBL_DIG).
        #[test]
        fn decimals_of_fifteen_digits_survive_the_round_trip(m in 1i64..999_999_999_999_999, e in -20i32..10) {
            let exact = format!("{m}e{e}");
            let v: f64 = exact.parse().unwrap();
            let back: f64 = NumberFormat::default().format(v).parse().unwrap();
            proptest::prop_assert_eq!(back, v);
        }

        /// Fifteen significant digits are within half a unit of the 15th
        /// digit of the value.
        #[test]
        fn the_written_number_is_within_half_a_unit_of_the_fifteenth_digit(v in -1e12f64..1e12) {
            proptest::prop_assume!(v != 0.0);
            let back: f64 = NumberFormat::default().format(v).parse().unwrap();
            let unit = 10f64.powi(v.abs().log10().floor() as i32 - 14);
            proptest::prop_assert!((back - v).abs() <= 0.5 * unit + 4.0 * f64::EPSILON * v.abs(), "{v} -> {back}");
        }
    }

    #[test]
    fn negative_zero_is_written_as_zero() {
        assert_eq!(fixed(-0.0, 3), "0.000");
        assert_eq!(fixed(-1e-12, 6), "0.000000");
        assert_eq!(fixed(-0.5, 1), "-0.5");
    }
}
