//! Reading and writing tables: CSV and Parquet by file extension, outputs written
//! atomically (a temporary file in the same folder, synced, then renamed), so that an
//! interrupted run never leaves a half-written file under its final name.

use std::fs::File;
use std::io::Write;
use std::path::Path;

use polars::prelude::*;

/// Table formats by extension.
const ACCEPTED: &str = ".csv, .parquet (or .pq)";

/// Why a table file (or an event file) could not be read. The messages leave out the
/// path: the caller's diagnostic names the file.
#[derive(Debug, thiserror::Error)]
pub enum TableError {
    /// The file cannot be opened.
    #[error("cannot open it: {0}")]
    Open(#[source] std::io::Error),
    /// The reader rejects the file.
    #[error("cannot read it as {format}: {source}")]
    Decode {
        /// `CSV`, `Parquet` or `Arrow IPC`.
        format: &'static str,
        /// The reader's error.
        source: PolarsError,
    },
    /// An extension that names no table format.
    #[error("unknown table format `.{extension}`; accepted: {ACCEPTED}")]
    UnknownFormat {
        /// The extension found (lower case, empty when there is none).
        extension: String,
    },
}

/// Read a whole table from a CSV (with a header line) or Parquet file.
///
/// # Errors
/// Unreadable file, unknown extension, or a file the reader rejects; the message says
/// which.
pub fn read_table(path: &Path) -> Result<DataFrame, TableError> {
    let ext = path.extension().and_then(|e| e.to_str()).unwrap_or("").to_ascii_lowercase();
    match ext.as_str() {
        "csv" => CsvReadOptions::default()
            .with_has_header(true)
            .with_infer_schema_length(None)
            .try_into_reader_with_file_path(Some(path.to_path_buf()))
            .and_then(|r| r.finish())
            .map_err(|source| TableError::Decode { format: "CSV", source }),
        "parquet" | "pq" => {
            let file = File::open(path).map_err(TableError::Open)?;
            ParquetReader::new(file).finish().map_err(|source| TableError::Decode { format: "Parquet", source })
        }
        _ => Err(TableError::UnknownFormat { extension: ext }),
    }
}

/// Whether a table file is CSV (its data row N is on line N + 1, after the header).
pub fn is_csv(path: &Path) -> bool {
    path.extension().and_then(|e| e.to_str()).is_some_and(|e| e.eq_ignore_ascii_case("csv"))
}

/// A table as CSV bytes: header line, comma separated, floats in their shortest
/// round-trip form.
///
/// # Errors
/// The writer's error.
pub fn csv_bytes(table: &mut DataFrame) -> PolarsResult<Vec<u8>> {
    let mut out = Vec::new();
    CsvWriter::new(&mut out).include_header(true).finish(table)?;
    Ok(out)
}

/// A table as CSV text ([`csv_bytes`]), for printing.
///
/// # Errors
/// The writer's error.
pub fn csv_text(table: &mut DataFrame) -> PolarsResult<String> {
    csv_bytes(table).map(|bytes| String::from_utf8_lossy(&bytes).into_owned())
}

/// A table as Parquet bytes with file-level key-value metadata (zstd, no parallel
/// encoding, so the bytes depend only on the data).
///
/// # Errors
/// The writer's error.
pub fn parquet_bytes(table: &mut DataFrame, metadata: Vec<(String, String)>) -> PolarsResult<Vec<u8>> {
    let mut out = Vec::new();
    ParquetWriter::new(&mut out)
        .set_parallel(false)
        .with_key_value_metadata(Some(KeyValueMetadata::from_static(metadata)))
        .finish(table)?;
    Ok(out)
}

/// A file that could not be written, and why.
#[derive(Debug, thiserror::Error)]
#[error("cannot write {}: {error}", .path.display())]
pub struct WriteError {
    /// The file (or folder) being written.
    pub path: std::path::PathBuf,
    /// The I/O error.
    #[source]
    pub error: std::io::Error,
}

impl WriteError {
    /// The error as a diagnostic on the file, with what to check.
    pub fn diagnostic(&self) -> crate::error::Diagnostic {
        crate::error::Diagnostic::new(&self.path, "", format!("cannot write the output: {}", self.error))
            .with_help("check that the output folder is writable and the disk is not full")
    }
}

/// Write `bytes` to `path` atomically (see [`write_all_atomic`]).
///
/// # Errors
/// The I/O error, for the caller to report with the path.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    write_all_atomic(&[(path.to_path_buf(), bytes.to_vec())]).map_err(|e| e.error)
}

/// Write a set of files that belong together (one run's tables and provenance): each to a
/// temporary file beside its final name, flushed to disk; only when every one is written,
/// all are renamed over their final names. A full disk or an unwritable folder therefore
/// leaves every final name as it was (old set or none), and the temporary files are
/// removed. Folders are created as needed.
///
/// # Errors
/// The first file or folder that could not be written, with the I/O error.
pub fn write_all_atomic(files: &[(std::path::PathBuf, Vec<u8>)]) -> Result<(), WriteError> {
    let temporary = |path: &Path| {
        let dir = path.parent().unwrap_or(Path::new("."));
        let name = path.file_name().map_or_else(|| "out".into(), |n| n.to_string_lossy().into_owned());
        dir.join(format!(".{name}.tmp-{}", std::process::id()))
    };
    let mut written = Vec::new();
    let mut result = Ok(());
    for (path, bytes) in files {
        let tmp = temporary(path);
        let attempt = (|| {
            if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
                std::fs::create_dir_all(dir)?;
            }
            let mut f = File::create(&tmp)?;
            written.push(tmp.clone());
            f.write_all(bytes)?;
            f.sync_all()
        })();
        if let Err(error) = attempt {
            result = Err(WriteError { path: path.clone(), error });
            break;
        }
    }
    if result.is_ok() {
        for (path, _) in files {
            if let Err(error) = std::fs::rename(temporary(path), path) {
                result = Err(WriteError { path: path.clone(), error });
                break;
            }
        }
    }
    if result.is_err() {
        for tmp in written {
            // Already renamed, or never created: nothing else to undo.
            let _ = std::fs::remove_file(tmp);
        }
    }
    result
}

/// The file-level key-value metadata of a Parquet file (where xsflow keeps provenance).
///
/// # Errors
/// An unreadable file or one that is not Parquet.
pub fn parquet_metadata(path: &Path) -> Result<Vec<(String, String)>, TableError> {
    let file = File::open(path).map_err(TableError::Open)?;
    let mut reader = ParquetReader::new(file);
    let meta = reader.get_metadata().map_err(|source| TableError::Decode { format: "Parquet", source })?;
    Ok(meta
        .key_value_metadata()
        .iter()
        .flatten()
        .map(|kv| (kv.key.clone(), kv.value.clone().unwrap_or_default()))
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_table_that_cannot_be_read_says_why_without_the_path() {
        let tmp = tempfile::tempdir().expect("scratch");
        let garbage = tmp.path().join("garbage.parquet");
        std::fs::write(&garbage, "not parquet").expect("write");
        // (file, the start of the message: the caller's diagnostic names the file)
        let cases = [
            (tmp.path().join("yields.txt"), "unknown table format `.txt`; accepted: .csv, .parquet (or .pq)"),
            (tmp.path().join("yields"), "unknown table format `.`; accepted"),
            (tmp.path().join("missing.parquet"), "cannot open it: No such file or directory"),
            (garbage, "cannot read it as Parquet: "),
        ];
        for (path, start) in cases {
            let msg = read_table(&path).expect_err("unreadable").to_string();
            assert!(msg.starts_with(start), "{}: {msg}", path.display());
            assert!(!msg.contains(&tmp.path().display().to_string()), "{msg}");
        }
    }
}
