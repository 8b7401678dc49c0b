//! How each output was made: program version, hashes of the config and of every input file,
//! and the time. The time is `SOURCE_DATE_EPOCH` when that is set (the reproducible-builds
//! convention), so that a rerun can give the same bytes; otherwise the current time.

use std::path::Path;
use std::time::{SystemTime, UNIX_EPOCH};

use serde::Serialize;
use sha2::{Digest, Sha256};

/// SHA-256 of `bytes`, lower-case hex.
pub fn sha256_hex(bytes: &[u8]) -> String {
    Sha256::digest(bytes).iter().map(|b| format!("{b:02x}")).collect()
}

/// One input file and its hash.
#[derive(Debug, Clone, Serialize, serde::Deserialize, PartialEq, Eq)]
pub struct InputFile {
    /// Path relative to the config file's folder (as written in the config chain).
    pub path: String,
    /// SHA-256 of its bytes.
    pub sha256: String,
}

/// What every record of a config's outputs starts with: the program and the config.
#[derive(Debug, Clone, Serialize)]
pub struct MadeWith {
    /// Always `xsflow`.
    pub program: &'static str,
    /// Program version.
    pub version: &'static str,
    /// The config file, relative to the folder `xsflow` ran in, as given.
    pub config_file: String,
    /// SHA-256 of the config file.
    pub config_sha256: String,
}

impl MadeWith {
    /// This program and the config at `config_file` whose bytes hash to `config_sha256`.
    pub fn new(config_file: &Path, config_sha256: String) -> MadeWith {
        MadeWith {
            program: "xsflow",
            version: env!("CARGO_PKG_VERSION"),
            config_file: config_file.to_string_lossy().into_owned(),
            config_sha256,
        }
    }
}

/// The provenance record of one run's outputs.
#[derive(Debug, Clone, Serialize)]
pub struct Provenance {
    /// Program and config.
    #[serde(flatten)]
    pub made_with: MadeWith,
    /// The run.
    pub run: String,
    /// The stages applied, in order.
    pub stages: Vec<String>,
    /// Every input file with its hash.
    pub inputs: Vec<InputFile>,
    /// When the record was made, UTC, RFC 3339.
    pub created_utc: String,
}

/// One run that went into an output made of several runs, with the hashes of its inputs.
#[derive(Debug, Clone, Serialize, serde::Deserialize, PartialEq, Eq)]
pub struct RunInputs {
    /// The run id.
    pub run: String,
    /// Its record and data file with their hashes.
    pub inputs: Vec<InputFile>,
}

impl RunInputs {
    /// The run and its inputs as a run's provenance record (`provenance.json`) gives them.
    ///
    /// # Errors
    /// The file cannot be read (the OS error) or holds no run and inputs.
    pub fn read(path: &Path) -> Result<RunInputs, RecordError> {
        let text = std::fs::read_to_string(path).map_err(RecordError::Read)?;
        serde_json::from_str(&text).map_err(RecordError::NotARecord)
    }
}

/// Why a run's provenance record could not be read back. The messages leave out the path:
/// the caller's diagnostic names the file.
#[derive(Debug, thiserror::Error)]
pub enum RecordError {
    /// The file cannot be read.
    #[error("cannot read the run's provenance record: {0}")]
    Read(#[source] std::io::Error),
    /// The file is no such record.
    #[error("found a file that is not a run's provenance record ({0}), expected JSON with `run` and `inputs`")]
    NotARecord(#[source] serde_json::Error),
}

/// The provenance record of an output made of several runs (the combined distribution).
#[derive(Debug, Clone, Serialize)]
pub struct CombinedProvenance {
    /// Program and config; the config file relative to its own folder, like the inputs.
    #[serde(flatten)]
    pub made_with: MadeWith,
    /// The stages applied to every run, in order.
    pub stages: Vec<String>,
    /// Every run that went in, in run order, with the hashes of its inputs.
    pub runs: Vec<RunInputs>,
    /// When the record was made, UTC, RFC 3339.
    pub created_utc: String,
}

impl Provenance {
    /// The run and its inputs, for a record of several runs.
    pub fn run_inputs(&self) -> RunInputs {
        RunInputs { run: self.run.clone(), inputs: self.inputs.clone() }
    }

    /// Hash an input file already read into memory; its path is written relative to `base`.
    pub fn input(base: &Path, path: &Path, bytes: &[u8]) -> InputFile {
        Provenance::input_hashed(base, path, sha256_hex(bytes))
    }

    /// An input file whose hash is known.
    pub fn input_hashed(base: &Path, path: &Path, sha256: String) -> InputFile {
        let rel = path.strip_prefix(base).unwrap_or(path);
        InputFile { path: rel.to_string_lossy().replace('\\', "/"), sha256 }
    }
}

/// SHA-256 of a file, read in pieces (event files can be larger than memory).
///
/// # Errors
/// The I/O error.
pub fn sha256_file(path: &Path) -> std::io::Result<String> {
    use std::io::Read;
    let mut f = std::fs::File::open(path)?;
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    loop {
        let n = f.read(&mut buf)?;
        if n == 0 {
            break;
        }
        h.update(&buf[..n]);
    }
    Ok(h.finalize().iter().map(|b| format!("{b:02x}")).collect())
}

/// What identifies one version of a file without reading it: size, modification time and,
/// on Unix, the inode and the status-change time (which no program can set back). Two
/// equal stamps mean the same version unless the file was rewritten within one tick of
/// the file system's clock after the first stamp was taken; such a stamp is `recent`,
/// and a caller that must be sure hashes the file again (the "racy timestamp" rule of
/// common practice, as in git's index).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FileStamp {
    /// Size in bytes.
    pub len: u64,
    /// Modification time.
    modified: Option<SystemTime>,
    /// Device, inode, status-change time (s, ns); zeros where the platform has none.
    identity: [i64; 4],
    /// Whether the file changed within `RECENT_S` of the stamp.
    recent: bool,
}

/// A file modified less than this many seconds before its stamp was taken may change
/// again without its stamp changing (coarse file-system clocks tick in milliseconds).
const RECENT_S: f64 = 2.0;

impl FileStamp {
    /// The stamp of `path` now.
    ///
    /// # Errors
    /// The file cannot be looked up (not found, no permission).
    pub fn of(path: &Path) -> std::io::Result<FileStamp> {
        let meta = std::fs::metadata(path)?;
        let modified = meta.modified().ok();
        #[cfg(unix)]
        let (identity, changed) = {
            use std::os::unix::fs::MetadataExt;
            let since_epoch = std::time::Duration::new(
                u64::try_from(meta.ctime()).unwrap_or(0),
                u32::try_from(meta.ctime_nsec()).unwrap_or(0),
            );
            ([meta.dev() as i64, meta.ino() as i64, meta.ctime(), meta.ctime_nsec()], Some(UNIX_EPOCH + since_epoch))
        };
        #[cfg(not(unix))]
        let (identity, changed) = ([0; 4], None::<SystemTime>);
        let latest = changed.max(modified);
        let recent =
            latest.is_none_or(|t| SystemTime::now().duration_since(t).map_or(true, |age| age.as_secs_f64() < RECENT_S));
        Ok(FileStamp { len: meta.len(), modified, identity, recent })
    }

    /// Whether the file may have changed since this stamp although a new stamp is equal.
    pub fn recent(&self) -> bool {
        self.recent
    }

    /// Whether `later` is a stamp of the same version (the `recent` flag aside).
    pub fn same_version(&self, later: &FileStamp) -> bool {
        self.len == later.len && self.modified == later.modified && self.identity == later.identity
    }

    /// What differs between this stamp and a later one, for a message.
    pub fn difference(&self, later: &FileStamp) -> String {
        if self.len != later.len {
            format!("size {} -> {} bytes", self.len, later.len)
        } else if self.modified != later.modified {
            "same size, new modification time".into()
        } else {
            "same size and modification time, but rewritten or replaced".into()
        }
    }
}

/// SHA-256 of a file together with the stamp of the version that was hashed.
///
/// # Errors
/// The I/O error; a file that changed while it was read is an error naming what changed.
pub fn sha256_file_stamped(path: &Path) -> std::io::Result<(String, FileStamp)> {
    let before = FileStamp::of(path)?;
    let sha = sha256_file(path)?;
    let after = FileStamp::of(path)?;
    if !before.same_version(&after) {
        return Err(std::io::Error::other(format!(
            "the file changed while it was being hashed ({})",
            before.difference(&after)
        )));
    }
    Ok((sha, before))
}

/// How the file at `path` differs from the version hashed as `sha256` with `stamp`, or
/// `None` when it is that version: a different stamp is a change; an equal stamp of a
/// recent version is checked by hashing the file again.
///
/// # Errors
/// The file cannot be looked up or read (it disappeared, say).
pub fn change_since(path: &Path, sha256: &str, stamp: &FileStamp) -> std::io::Result<Option<String>> {
    let now = FileStamp::of(path)?;
    if !stamp.same_version(&now) {
        return Ok(Some(stamp.difference(&now)));
    }
    if stamp.recent() && sha256_file(path)? != sha256 {
        return Ok(Some("same size and times, different content".into()));
    }
    Ok(None)
}

/// Seconds since 1970 for the record: `SOURCE_DATE_EPOCH` if set and valid, else now.
pub fn record_time_s() -> i64 {
    std::env::var("SOURCE_DATE_EPOCH").ok().and_then(|s| s.trim().parse::<i64>().ok()).unwrap_or_else(|| {
        SystemTime::now().duration_since(UNIX_EPOCH).map_or(0, |d| i64::try_from(d.as_secs()).unwrap_or(i64::MAX))
    })
}

/// RFC 3339 UTC text of a Unix time, by the days-to-civil algorithm of H. Hinnant,
/// "chrono-Compatible Low-Level Date Algorithms" (2013), `civil_from_days`.
pub fn rfc3339_utc(unix_s: i64) -> String {
    let days = unix_s.div_euclid(86_400);
    let secs = unix_s.rem_euclid(86_400);
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!("{year:04}-{month:02}-{day:02}T{:02}:{:02}:{:02}Z", secs / 3600, secs % 3600 / 60, secs % 60)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rfc3339_of_known_instants() {
        // Unix epoch, a leap day and the end of a century year (values from the calendar).
        assert_eq!(rfc3339_utc(0), "1970-01-01T00:00:00Z");
        assert_eq!(rfc3339_utc(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(rfc3339_utc(1_798_761_599), "2026-12-31T23:59:59Z");
    }

    #[test]
    fn sha256_of_abc() {
        // FIPS 180-2, appendix B.1 test vector.
        assert_eq!(sha256_hex(b"abc"), "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    }

    #[test]
    fn a_file_is_the_version_hashed_until_it_changes_and_a_recent_one_is_hashed_again() {
        let dir = tempfile::tempdir().expect("scratch");
        let path = dir.path().join("yields.csv");
        std::fs::write(&path, "detector,state\nD01,elastic\n").expect("write");
        let (sha, stamp) = sha256_file_stamped(&path).expect("hash");
        assert_eq!(sha, sha256_hex(b"detector,state\nD01,elastic\n"));
        assert!(stamp.recent(), "just written");
        assert_eq!(change_since(&path, &sha, &stamp).expect("stat"), None);
        // Same stamp, other content (what a rewrite within one clock tick looks like): only
        // the second hash of a recent file sees it; an old file's stamp is trusted.
        assert_eq!(
            change_since(&path, "0", &stamp).expect("stat").as_deref(),
            Some("same size and times, different content")
        );
        let old = FileStamp { recent: false, ..stamp.clone() };
        assert_eq!(change_since(&path, "0", &old).expect("stat"), None);
        std::fs::write(&path, "detector,state\nD01,elastic\nD02,elastic\n").expect("write");
        assert_eq!(change_since(&path, &sha, &stamp).expect("stat").as_deref(), Some("size 27 -> 39 bytes"));
        std::fs::remove_file(&path).expect("remove");
        assert!(change_since(&path, &sha, &stamp).is_err_and(|e| e.kind() == std::io::ErrorKind::NotFound));
    }
}
