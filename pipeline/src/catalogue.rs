//! The run catalogue of a batch output folder: an embedded SQLite database
//! (`catalogue.sqlite`) with one row per run: its inputs and their hashes, status, error,
//! timing, event tallies, charge, live fraction and warnings. Every write is one
//! transaction taken with `BEGIN IMMEDIATE` and a busy timeout, so that several processes
//! (shards on a shared file system, or a second batch started by mistake) queue instead of
//! corrupting it.

use std::fmt::Write as _;
use std::path::Path;
use std::time::Duration;

use rusqlite::{params, Connection, OptionalExtension};
use serde::Serialize;

use crate::cli::TableFormat;

/// The catalogue's file name in the output folder.
pub const CATALOGUE_FILE: &str = "catalogue.sqlite";

/// The catalogue layout this program writes and reads.
pub const SCHEMA_VERSION: i64 = 1;

/// One run's entry.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RunEntry {
    /// Run id (or the record file name when the record did not load).
    pub run: String,
    /// Record file.
    pub record_file: String,
    /// Data file (yields, events or spectra).
    pub data_file: String,
    /// SHA-256 of the record bytes and the data file's hash.
    pub input_sha256: String,
    /// SHA-256 of the config sections that affect every run.
    pub config_sha256: String,
    /// What the latest batch that saw the run did with it.
    pub status: RunStatus,
    /// The error, for failed runs.
    pub error: String,
    /// When it was processed (UTC, RFC 3339; `SOURCE_DATE_EPOCH` when set).
    pub processed_utc: String,
    /// Seconds spent.
    pub seconds: f64,
    /// Events read (list-mode runs).
    pub events: Option<i64>,
    /// Beam charge in C.
    pub charge_c: Option<f64>,
    /// Mean live fraction of the run's rows.
    pub live_fraction: Option<f64>,
    /// Warnings, one per line.
    pub warnings: String,
}

/// What the latest batch that saw a run did with it (text `ok`, `failed`, `skipped` in the
/// catalogue and in `xsflow runs`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum RunStatus {
    /// Processed; its outputs were written then (`processed_utc`).
    Ok,
    /// Processed, and it failed (`error` says why); it has no outputs in use.
    Failed,
    /// Unchanged since it was processed with success (`processed_utc`); its outputs are
    /// those of then.
    Skipped,
}

impl RunStatus {
    /// The text stored in the catalogue.
    pub fn as_str(self) -> &'static str {
        match self {
            RunStatus::Ok => "ok",
            RunStatus::Failed => "failed",
            RunStatus::Skipped => "skipped",
        }
    }

    /// Whether the run's outputs in the folder are current (ok, or skipped as unchanged).
    pub fn has_outputs(self) -> bool {
        self != RunStatus::Failed
    }
}

impl std::fmt::Display for RunStatus {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

impl rusqlite::types::ToSql for RunStatus {
    fn to_sql(&self) -> rusqlite::Result<rusqlite::types::ToSqlOutput<'_>> {
        Ok(self.as_str().into())
    }
}

impl rusqlite::types::FromSql for RunStatus {
    fn column_result(value: rusqlite::types::ValueRef<'_>) -> rusqlite::types::FromSqlResult<Self> {
        match value.as_str()? {
            "ok" => Ok(RunStatus::Ok),
            "failed" => Ok(RunStatus::Failed),
            "skipped" => Ok(RunStatus::Skipped),
            other => Err(rusqlite::types::FromSqlError::Other(
                format!("run status `{other}`; accepted: ok, failed, skipped").into(),
            )),
        }
    }
}

/// An open catalogue.
pub struct Catalogue {
    conn: Connection,
}

/// Why the catalogue could not be used.
#[derive(Debug, thiserror::Error)]
pub enum CatalogueError {
    /// The database refused a statement, or the file is no SQLite database.
    #[error("catalogue: {0}")]
    Sql(#[from] rusqlite::Error),
    /// A catalogue of a layout newer than this program reads.
    #[error(
        "catalogue {} was written by a newer xsflow (catalogue version {found}; this one reads \
         {SCHEMA_VERSION}): use that version, or another output folder",
        .path.display()
    )]
    Newer {
        /// The catalogue file.
        path: std::path::PathBuf,
        /// Its layout version.
        found: i64,
    },
    /// A thread panicked while it held the catalogue (a defect of xsflow).
    #[error("catalogue: its lock was poisoned by a thread that panicked while it held it")]
    Poisoned,
}

impl Catalogue {
    /// Open (or create) the catalogue in `dir`.
    ///
    /// # Errors
    /// A file that is not a catalogue, or one written by a newer version of xsflow.
    pub fn open(dir: &Path) -> Result<Self, CatalogueError> {
        let conn = Connection::open(dir.join(CATALOGUE_FILE))?;
        conn.busy_timeout(Duration::from_secs(60))?;
        conn.execute_batch(
            "BEGIN IMMEDIATE;
             CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
             CREATE TABLE IF NOT EXISTS runs (
                run TEXT PRIMARY KEY, record_file TEXT NOT NULL, data_file TEXT NOT NULL,
                input_sha256 TEXT NOT NULL, config_sha256 TEXT NOT NULL, status TEXT NOT NULL,
                error TEXT NOT NULL, processed_utc TEXT NOT NULL, seconds REAL NOT NULL,
                events INTEGER, charge_c REAL, live_fraction REAL, warnings TEXT NOT NULL);
             INSERT OR IGNORE INTO meta (key, value) VALUES ('schema_version', '1');
             COMMIT;",
        )?;
        let version: String =
            conn.query_row("SELECT value FROM meta WHERE key = 'schema_version'", [], |r| r.get(0))?;
        let v: i64 = version.parse().unwrap_or(i64::MAX);
        if v > SCHEMA_VERSION {
            return Err(CatalogueError::Newer { path: dir.join(CATALOGUE_FILE), found: v });
        }
        Ok(Catalogue { conn })
    }

    /// The entry of a run, if any.
    ///
    /// # Errors
    /// A database error.
    pub fn get(&self, run: &str) -> Result<Option<RunEntry>, CatalogueError> {
        Ok(self.conn.query_row("SELECT * FROM runs WHERE run = ?1", [run], entry).optional()?)
    }

    /// Write a run's entry (replacing the previous one) in one transaction.
    ///
    /// # Errors
    /// A database error (the catalogue is then unchanged).
    pub fn put(&mut self, e: &RunEntry) -> Result<(), CatalogueError> {
        let tx = self.conn.transaction_with_behavior(rusqlite::TransactionBehavior::Immediate)?;
        tx.execute(
            "INSERT OR REPLACE INTO runs VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13)",
            params![
                e.run,
                e.record_file,
                e.data_file,
                e.input_sha256,
                e.config_sha256,
                e.status,
                e.error,
                e.processed_utc,
                e.seconds,
                e.events,
                e.charge_c,
                e.live_fraction,
                e.warnings
            ],
        )?;
        Ok(tx.commit()?)
    }

    /// Record that this batch found `runs` unchanged: those that are `ok` become `skipped`,
    /// in one transaction (nothing is written when there are none).
    ///
    /// # Errors
    /// A database error (the catalogue is then unchanged).
    pub fn mark_skipped(&mut self, runs: &[String]) -> Result<(), CatalogueError> {
        if runs.is_empty() {
            return Ok(());
        }
        let tx = self.conn.transaction_with_behavior(rusqlite::TransactionBehavior::Immediate)?;
        {
            let mut update = tx.prepare("UPDATE runs SET status = 'skipped' WHERE run = ?1 AND status = 'ok'")?;
            for run in runs {
                update.execute([run])?;
            }
        }
        Ok(tx.commit()?)
    }

    /// Every entry in run order, or only the failed ones.
    ///
    /// # Errors
    /// A database error.
    pub fn list(&self, failed_only: bool) -> Result<Vec<RunEntry>, CatalogueError> {
        let q = if failed_only {
            "SELECT * FROM runs WHERE status = 'failed' ORDER BY run"
        } else {
            "SELECT * FROM runs ORDER BY run"
        };
        let mut stmt = self.conn.prepare(q)?;
        let rows = stmt.query_map([], entry)?;
        Ok(rows.collect::<Result<Vec<_>, _>>()?)
    }

    /// A value of the `meta` table.
    ///
    /// # Errors
    /// A database error.
    pub fn meta(&self, key: &str) -> Result<Option<String>, CatalogueError> {
        Ok(self.conn.query_row("SELECT value FROM meta WHERE key = ?1", [key], |r| r.get(0)).optional()?)
    }

    /// Set a value of the `meta` table (nothing is written when it already has that value,
    /// so that a batch with nothing to do writes nothing).
    ///
    /// # Errors
    /// A database error.
    pub fn set_meta(&self, key: &str, value: &str) -> Result<(), CatalogueError> {
        if self.meta(key)?.as_deref() == Some(value) {
            return Ok(());
        }
        self.conn.execute("INSERT OR REPLACE INTO meta (key, value) VALUES (?1, ?2)", [key, value])?;
        Ok(())
    }

    /// Set the catalogue version (tests of the refusal of newer catalogues).
    ///
    /// # Errors
    /// A database error.
    pub fn set_version(&self, v: i64) -> Result<(), CatalogueError> {
        self.conn.execute("UPDATE meta SET value = ?1 WHERE key = 'schema_version'", [v.to_string()])?;
        Ok(())
    }
}

fn entry(r: &rusqlite::Row<'_>) -> rusqlite::Result<RunEntry> {
    Ok(RunEntry {
        run: r.get(0)?,
        record_file: r.get(1)?,
        data_file: r.get(2)?,
        input_sha256: r.get(3)?,
        config_sha256: r.get(4)?,
        status: r.get(5)?,
        error: r.get(6)?,
        processed_utc: r.get(7)?,
        seconds: r.get(8)?,
        events: r.get(9)?,
        charge_c: r.get(10)?,
        live_fraction: r.get(11)?,
        warnings: r.get(12)?,
    })
}

/// The run list as a table (`xsflow runs --format csv`): run, status, seconds, events,
/// charge_c, live_fraction, processed_utc, error, written by the one CSV writer
/// ([`crate::tables::csv_bytes`]), which quotes errors that hold commas, quotes or lines.
///
/// # Errors
/// The table library's error.
pub fn entries_table(entries: &[RunEntry]) -> polars::prelude::PolarsResult<polars::prelude::DataFrame> {
    use polars::prelude::{Column, DataFrame};
    let text = |f: &dyn Fn(&RunEntry) -> String| entries.iter().map(f).collect::<Vec<_>>();
    DataFrame::new_infer_height(vec![
        Column::new("run".into(), text(&|e| e.run.clone())),
        Column::new("status".into(), text(&|e| e.status.as_str().to_string())),
        Column::new("seconds".into(), entries.iter().map(|e| e.seconds).collect::<Vec<_>>()),
        Column::new("events".into(), entries.iter().map(|e| e.events).collect::<Vec<_>>()),
        Column::new("charge_c".into(), entries.iter().map(|e| e.charge_c).collect::<Vec<_>>()),
        Column::new("live_fraction".into(), entries.iter().map(|e| e.live_fraction).collect::<Vec<_>>()),
        Column::new("processed_utc".into(), text(&|e| e.processed_utc.clone())),
        Column::new("error".into(), text(&|e| e.error.clone())),
    ])
}

/// The run list as `xsflow runs` prints it: a JSON array, CSV ([`entries_table`]), or
/// aligned columns with the first line of each error.
///
/// # Errors
/// The table library's error (CSV only).
pub fn render(entries: &[RunEntry], format: TableFormat) -> polars::prelude::PolarsResult<String> {
    Ok(match format {
        TableFormat::Json => serde_json::to_string_pretty(entries).unwrap_or_default() + "\n",
        TableFormat::Csv => entries_table(entries).and_then(|mut t| crate::tables::csv_text(&mut t))?,
        TableFormat::Table => {
            let mut s = format!(
                "{:<12} {:<7} {:>9} {:>12} {:>12} {:>8}  error\n",
                "run", "status", "seconds", "events", "charge_c", "live"
            );
            for e in entries {
                let _ = writeln!(
                    s,
                    "{:<12} {:<7} {:>9.3} {:>12} {:>12} {:>8}  {}",
                    e.run,
                    e.status,
                    e.seconds,
                    e.events.map(|x| x.to_string()).unwrap_or_else(|| "-".into()),
                    e.charge_c.map(|x| format!("{x:.4e}")).unwrap_or_else(|| "-".into()),
                    e.live_fraction.map(|x| format!("{x:.4}")).unwrap_or_else(|| "-".into()),
                    e.error.lines().next().unwrap_or("")
                );
            }
            s
        }
    })
}
