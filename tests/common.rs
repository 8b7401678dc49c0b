//! Shared helpers: run the `xsflow` binary, copy the demo into a scratch folder, read
//! fixture CSV files.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use polars::prelude::*;

/// The repository root (the workspace folder).
pub fn repo_root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).parent().expect("the pipeline crate sits in the workspace root").to_path_buf()
}

/// The demo experiment folder.
pub fn demo_dir() -> PathBuf {
    repo_root().join("sample-runs/alpha-ni58")
}

/// Run `xsflow` with `args` in `dir`, with a fixed record time so outputs are reproducible.
pub fn xsflow(dir: &Path, args: &[&str]) -> Output {
    xsflow_with_env(dir, args, &[])
}

/// [`xsflow`] with extra environment variables.
pub fn xsflow_with_env(dir: &Path, args: &[&str], env: &[(&str, &str)]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_xsflow"))
        .args(args)
        .current_dir(dir)
        .env("SOURCE_DATE_EPOCH", "1764633600")
        .env_remove("RUST_LOG")
        .envs(env.iter().copied())
        .output()
        .expect("the xsflow binary runs")
}

/// Everything the command printed, stdout then stderr.
pub fn text(out: &Output) -> String {
    format!("{}{}", String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr))
}

/// A scratch copy of the demo: `experiment.yaml` and `runs/` (no outputs).
pub fn demo_copy() -> tempfile::TempDir {
    let tmp = tempfile::tempdir().expect("a scratch folder");
    let src = demo_dir();
    std::fs::copy(src.join("experiment.yaml"), tmp.path().join("experiment.yaml")).expect("copy config");
    for folder in ["runs", "fits"] {
        std::fs::create_dir(tmp.path().join(folder)).expect("folder");
        for entry in std::fs::read_dir(src.join(folder)).expect("demo folder") {
            let path = entry.expect("entry").path();
            std::fs::copy(&path, tmp.path().join(folder).join(path.file_name().expect("file name")))
                .expect("copy demo file");
        }
    }
    tmp
}

/// Replace the first occurrence of `from` by `to` in a file; panics if absent, so a test
/// cannot silently stop planting its mistake.
pub fn edit(path: &Path, from: &str, to: &str) {
    let text = std::fs::read_to_string(path).expect("readable");
    assert!(text.contains(from), "{} does not contain {from:?}", path.display());
    std::fs::write(path, text.replacen(from, to, 1)).expect("writable");
}

/// Rows of a fixture CSV (lines starting with `#` skipped), as maps from column name to text.
pub fn fixture_rows(name: &str) -> Vec<std::collections::HashMap<String, String>> {
    csv_rows(&repo_root().join("tests/reference/fixtures").join(name))
}

/// The rows of a CSV file (lines starting with `#` skipped), as maps from column name to
/// text.
pub fn csv_rows(path: &Path) -> Vec<std::collections::HashMap<String, String>> {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    let header: Vec<String> = lines.next().expect("a header line").split(',').map(str::to_string).collect();
    lines.map(|l| header.iter().cloned().zip(l.split(',').map(str::to_string)).collect()).collect()
}

/// A numeric field of a fixture row.
pub fn num(row: &std::collections::HashMap<String, String>, key: &str) -> f64 {
    row.get(key)
        .unwrap_or_else(|| panic!("fixture has no column {key}"))
        .parse()
        .unwrap_or_else(|e| panic!("{key}: {e}"))
}

/// Files below `dir`, recursively (empty if it does not exist).
pub fn files_below(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    if let Ok(entries) = std::fs::read_dir(dir) {
        for e in entries.flatten() {
            let p = e.path();
            if p.is_dir() {
                out.extend(files_below(&p));
            } else {
                out.push(p);
            }
        }
    }
    out.sort();
    out
}

/// `xsflow kinematics` for the demo's reaction (24 MeV 4He on 58Ni) at `angles`
/// (`FROM:TO:STEP`), printed as JSON.
pub fn demo_kinematics(angles: &str) -> Output {
    let args = ["kinematics", "--beam", "4He", "--target", "58Ni", "--energy-mev", "24", "--angles", angles];
    xsflow(&repo_root(), &[&args[..], &["--format", "json"]].concat())
}

/// A Parquet file as a table.
pub fn parquet(path: &Path) -> DataFrame {
    ParquetReader::new(std::fs::File::open(path).expect("parquet file")).finish().expect("parquet")
}

/// A column as text.
pub fn strings(df: &DataFrame, name: &str) -> Vec<String> {
    let c = df.column(name).expect("column").cast(&DataType::String).expect("as text");
    c.str().expect("text").iter().map(|v| v.unwrap_or_default().to_string()).collect()
}

/// A column as numbers (NaN where null).
pub fn numbers(df: &DataFrame, name: &str) -> Vec<f64> {
    let c = df.column(name).expect("column").cast(&DataType::Float64).expect("as numbers");
    c.f64().expect("numbers").iter().map(|v| v.unwrap_or(f64::NAN)).collect()
}
