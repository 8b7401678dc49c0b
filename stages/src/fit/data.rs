//! The data a fit reads: the measured distribution of one state from a reduced (or
//! combined) table, with the Rutherford convention of its ratios, and theory curve tables.

use polars::prelude::{DataFrame, DataType};

use crate::physics::rutherford::Convention;
use crate::table;
use crate::{Problem, StageError};

/// A theory curve: strictly increasing CM angles (deg) and positive dσ/dΩ (mb/sr).
#[derive(Debug, Clone, PartialEq)]
pub struct CurveTable {
    /// Angles.
    pub theta_cm_deg: Vec<f64>,
    /// Cross sections.
    pub dsdo_cm_mb_sr: Vec<f64>,
}

impl CurveTable {
    /// Check the points: at least two, angles strictly increasing and finite, cross sections
    /// positive.
    ///
    /// # Errors
    /// The first bad row (0-based), what was found and what is accepted.
    pub fn new(theta_cm_deg: Vec<f64>, dsdo_cm_mb_sr: Vec<f64>) -> Result<Self, Problem> {
        if theta_cm_deg.len() < 2 {
            return Err(Problem::new("rows", theta_cm_deg.len(), "at least two points"));
        }
        for (i, (t, s)) in theta_cm_deg.iter().zip(&dsdo_cm_mb_sr).enumerate() {
            if !(t.is_finite() && (0.0..=180.0).contains(t)) {
                return Err(Problem::new(format!("row {i}.theta_cm_deg"), t, "an angle in [0, 180] degrees"));
            }
            if !(s.is_finite() && *s > 0.0) {
                return Err(Problem::new(format!("row {i}.dsdo_cm_mb_sr"), s, "a positive cross section"));
            }
            if i > 0 && *t <= theta_cm_deg[i - 1] {
                let what = if (*t - theta_cm_deg[i - 1]).abs() <= 0.0 { "duplicate" } else { "unsorted" };
                return Err(Problem::new(
                    format!("row {i}.theta_cm_deg"),
                    format!("{t} after {} ({what})", theta_cm_deg[i - 1]),
                    "strictly increasing angles",
                ));
            }
        }
        Ok(CurveTable { theta_cm_deg, dsdo_cm_mb_sr })
    }

    /// ln σ interpolated linearly in angle; `None` outside the table.
    pub fn at(&self, theta_deg: f64) -> Option<f64> {
        let t = &self.theta_cm_deg;
        if theta_deg < t[0] || theta_deg > t[t.len() - 1] {
            return None;
        }
        let k = t.partition_point(|x| *x <= theta_deg).clamp(1, t.len() - 1);
        let w = (theta_deg - t[k - 1]) / (t[k] - t[k - 1]);
        let (a, b) = (self.dsdo_cm_mb_sr[k - 1].ln(), self.dsdo_cm_mb_sr[k].ln());
        Some((a + w * (b - a)).exp())
    }
}

/// The measured distribution of one state, sorted by angle.
#[derive(Debug, Clone, PartialEq)]
pub struct FitData {
    /// CM angles, degrees.
    pub theta_cm_deg: Vec<f64>,
    /// dσ/dΩ_cm, mb/sr.
    pub dsdo_cm_mb_sr: Vec<f64>,
    /// Statistical ⊕ point-to-point error, mb/sr.
    pub err_mb_sr: Vec<f64>,
    /// Relative normalisation errors of the rows (all equal for one common normalisation).
    pub norm_rel_err: Vec<f64>,
    /// Row labels `run/detector`.
    pub labels: Vec<String>,
    /// Per row, its counts where the table gives them (per-run reduced tables; a combined
    /// distribution has none); empty: no row has counts.
    pub counts: Vec<Option<RowCounts>>,
    /// The Rutherford cross section the table's `ratio_rutherford` divides by (its
    /// `rutherford_convention` column; relativistic, the default, when it has none): a
    /// Rutherford model and every curve's ratio use the same one.
    pub rutherford_convention: Convention,
}

/// The counts behind one reduced row, for a fit by the Poisson likelihood.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RowCounts {
    /// Gross counts in the peak window.
    pub gross: f64,
    /// Background counts under the peak (0 where the table has none).
    pub background: f64,
    /// dσ/dΩ_cm of one net count, mb/sr.
    pub mb_sr_per_count: f64,
    /// The row's net counts are consistent with zero (`subtract_background`).
    pub upper_limit: bool,
}

/// Columns a fit reads, when present, to fit rows on their counts.
pub const COUNT_COLUMNS: [&str; 4] = ["counts_gross", "counts_background", "dsdo_cm_mb_sr_per_count", "upper_limit"];

/// The counts of every row, or an empty vector when the table lacks `counts_gross` or
/// `dsdo_cm_mb_sr_per_count`; a row whose factor is empty or not positive has none.
///
/// # Errors
/// A count column that is not numeric or holds a value that is not finite.
pub fn row_counts(table: &DataFrame) -> Result<Vec<Option<RowCounts>>, StageError> {
    let (Some(gross), Some(per_count)) = (
        table::optional_f64_values(table, "counts_gross")?,
        table::optional_f64_values(table, "dsdo_cm_mb_sr_per_count")?,
    ) else {
        return Ok(Vec::new());
    };
    let background = table::optional_f64_values(table, "counts_background")?;
    let limited: Vec<bool> = match table.column("upper_limit") {
        Ok(c) => c.cast(&DataType::Boolean)?.bool()?.iter().map(|v| v.unwrap_or(false)).collect(),
        Err(_) => vec![false; table.height()],
    };
    Ok((0..table.height())
        .map(|i| {
            let (g, k) = (gross[i]?, per_count[i]?);
            let b = background.as_ref().and_then(|b| b[i]).unwrap_or(0.0);
            (g >= 0.0 && k > 0.0).then_some(RowCounts {
                gross: g,
                background: b.max(0.0),
                mb_sr_per_count: k,
                upper_limit: limited[i],
            })
        })
        .collect())
}

/// Columns the fit reads from the reduced table.
pub const FIT_COLUMNS: [&str; 6] =
    ["state", "theta_cm_deg", "dsdo_cm_mb_sr", "stat_err_mb_sr", "sys_err_mb_sr", "norm_rel_err"];

/// The column naming the Rutherford convention of `ratio_rutherford`; read by the fit when
/// present.
pub const RUTHERFORD_CONVENTION: &str = "rutherford_convention";

/// The Rutherford convention named in a reduced table's `rutherford_convention` column, or
/// the default (relativistic) when it has none.
///
/// # Errors
/// A name that is not a convention, or two conventions in one table (row numbers 1-based).
fn table_convention(table: &DataFrame) -> Result<Convention, StageError> {
    if table.column(RUTHERFORD_CONVENTION).is_err() {
        return Ok(Convention::default());
    }
    let names = table::str_values(table, RUTHERFORD_CONVENTION)?;
    let mut found: Option<Convention> = None;
    for (i, name) in names.iter().enumerate() {
        let bad = |expected: String| StageError::BadValue {
            row: i + 1,
            column: RUTHERFORD_CONVENTION.into(),
            value: name.clone(),
            expected,
        };
        let c = Convention::from_name(name).ok_or_else(|| bad(Convention::ALL.map(Convention::name).join(" or ")))?;
        if let Some(first) = found.filter(|f| *f != c) {
            return Err(bad(format!(
                "{} as in the rows before (one `rutherford` setting for every run)",
                first.name()
            )));
        }
        found = Some(c);
    }
    Ok(found.unwrap_or_default())
}

impl FitData {
    /// The rows of `state` from a reduced table (several runs may be stacked).
    ///
    /// # Errors
    /// A missing column, a row with a non-finite value or a non-positive error, no rows of
    /// the state (the states found are named).
    pub fn from_table(table: &DataFrame, state: &str) -> Result<Self, StageError> {
        let states = table::str_values(table, "state")?;
        let col = |name| table::f64_values(table, name);
        let (theta, y, stat, sys, norm) = (
            col("theta_cm_deg")?,
            col("dsdo_cm_mb_sr")?,
            col("stat_err_mb_sr")?,
            col("sys_err_mb_sr")?,
            col("norm_rel_err")?,
        );
        let label_of = |name: &str| table::str_values(table, name).ok();
        let (runs, detectors, members) = (label_of("run"), label_of("detector"), label_of("members"));
        let counts = row_counts(table)?;
        let mut rows = Vec::new();
        for (i, s) in states.iter().enumerate() {
            if s != state {
                continue;
            }
            let err = stat[i].hypot(sys[i]);
            for (name, v, ok) in [
                ("theta_cm_deg", theta[i], theta[i].is_finite() && theta[i] > 0.0 && theta[i] < 180.0),
                ("dsdo_cm_mb_sr", y[i], y[i].is_finite()),
                ("stat_err_mb_sr", stat[i], stat[i].is_finite() && stat[i] >= 0.0),
                ("sys_err_mb_sr", sys[i], sys[i].is_finite() && sys[i] >= 0.0),
                ("norm_rel_err", norm[i], norm[i].is_finite() && norm[i] >= 0.0),
            ] {
                if !ok {
                    return Err(StageError::BadValue {
                        row: i,
                        column: name.into(),
                        value: v.to_string(),
                        expected: "a finite value (angles inside (0, 180) degrees, errors ≥ 0)".into(),
                    });
                }
            }
            if err <= 0.0 {
                return Err(StageError::BadValue {
                    row: i,
                    column: "stat_err_mb_sr".into(),
                    value: "0 (and sys_err_mb_sr 0)".into(),
                    expected: "a point with a non-zero error (a χ² needs one)".into(),
                });
            }
            let label = match (&runs, &detectors, &members) {
                (Some(r), Some(d), _) => format!("{}/{}", r[i], d[i]),
                (_, _, Some(m)) => m[i].clone(),
                _ => format!("row {i}"),
            };
            rows.push((theta[i], y[i], err, norm[i], label, counts.get(i).copied().flatten()));
        }
        if rows.is_empty() {
            let mut known: Vec<&String> = states.iter().collect();
            known.sort();
            known.dedup();
            return Err(StageError::BadValue {
                row: 0,
                column: "state".into(),
                value: format!("no rows of state `{state}`"),
                expected: format!(
                    "a state present in the table ({})",
                    known.iter().map(|s| s.as_str()).collect::<Vec<_>>().join(", ")
                ),
            });
        }
        rows.sort_by(|a, b| a.0.total_cmp(&b.0));
        Ok(FitData {
            theta_cm_deg: rows.iter().map(|r| r.0).collect(),
            dsdo_cm_mb_sr: rows.iter().map(|r| r.1).collect(),
            err_mb_sr: rows.iter().map(|r| r.2).collect(),
            norm_rel_err: rows.iter().map(|r| r.3).collect(),
            counts: if counts.is_empty() { Vec::new() } else { rows.iter().map(|r| r.5).collect() },
            labels: rows.into_iter().map(|r| r.4).collect(),
            rutherford_convention: table_convention(table)?,
        })
    }
}
