//! `xsflow theory MODEL`: a model curve (optical model, Rutherford, hard sphere) at chosen
//! CM angles, for a person (a table) or a script (JSON, CSV).

use std::fmt::Write as _;
use std::path::Path;

use polars::prelude::{Column, DataFrame, PolarsResult};
use stages::theory::{Curve, ModelConfig};

use crate::cli::TableFormat;
use crate::config::YamlFile;
use crate::error::Diagnostic;
use crate::tables::csv_text;

/// Read and check a model file, and evaluate it at the CM angles.
///
/// # Errors
/// Every problem of the file, located.
pub fn curve(path: &Path, angles_deg: &[f64]) -> Result<Curve, Vec<Diagnostic>> {
    let file = YamlFile::read(path).map_err(|d| vec![d])?;
    let model: ModelConfig = file.parse("", &file.value).map_err(|d| vec![d])?;
    model.evaluate(angles_deg).map_err(|problems| problems.iter().map(|p| file.problem(p)).collect())
}

/// The curve's rows as a table: `theta_cm_deg`, `dsdo_cm_mb_sr`, `ratio_rutherford` (empty
/// for a neutral projectile) and, for a spin-½ beam, `analyzing_power`.
///
/// # Errors
/// The table library's error.
pub fn table(curve: &Curve) -> PolarsResult<DataFrame> {
    let rows = &curve.rows;
    let mut columns = vec![
        Column::new("theta_cm_deg".into(), rows.iter().map(|r| r.theta_cm_deg).collect::<Vec<_>>()),
        Column::new("dsdo_cm_mb_sr".into(), rows.iter().map(|r| r.dsdo_cm_mb_sr).collect::<Vec<_>>()),
        Column::new("ratio_rutherford".into(), rows.iter().map(|r| r.ratio_rutherford).collect::<Vec<_>>()),
    ];
    if rows.iter().any(|r| r.analyzing_power.is_some()) {
        columns.push(Column::new("analyzing_power".into(), rows.iter().map(|r| r.analyzing_power).collect::<Vec<_>>()));
    }
    DataFrame::new_infer_height(columns)
}

/// The curve in the chosen format; CSV through the one CSV writer ([`csv_text`]).
///
/// # Errors
/// The table library's error (CSV only).
pub fn render(curve: &Curve, format: TableFormat) -> PolarsResult<String> {
    Ok(match format {
        TableFormat::Json => {
            serde_json::to_string_pretty(curve).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}")) + "\n"
        }
        TableFormat::Csv => csv_text(&mut table(curve)?)?,
        TableFormat::Table => {
            let mut s = format!(
                "model: {}  k = {:.6} 1/fm  eta = {:.6}  l_max = {}",
                curve.model, curve.k_per_fm, curve.eta, curve.l_max
            );
            if let (Some(h), Some((ra, rb))) = (curve.step_fm, curve.matching_radii_fm) {
                let _ = write!(s, "  step = {h:.5} fm  matching at {ra:.3} and {rb:.3} fm");
            }
            s.push('\n');
            for (name, v) in [
                ("sigma_reaction_mb", curve.sigma_reaction_mb),
                ("sigma_total_mb", curve.sigma_total_mb),
                ("sigma_elastic_mb", curve.sigma_elastic_mb),
            ] {
                if let Some(v) = v {
                    let _ = writeln!(s, "{name} = {v:.6}");
                }
            }
            let polarised = curve.rows.iter().any(|r| r.analyzing_power.is_some());
            let _ = write!(s, "{:>12}  {:>16}  {:>16}", "theta_cm", "dsdo_cm/(mb/sr)", "ratio_rutherford");
            s.push_str(if polarised { "  analyzing_power\n" } else { "\n" });
            for r in &curve.rows {
                let ratio = r.ratio_rutherford.map(|x| format!("{x:.6e}")).unwrap_or_else(|| "-".into());
                let _ = write!(s, "{:>12.3}  {:>16.6e}  {ratio:>16}", r.theta_cm_deg, r.dsdo_cm_mb_sr);
                match r.analyzing_power {
                    Some(a) => {
                        let _ = writeln!(s, "  {a:>15.6}");
                    }
                    None => s.push('\n'),
                }
            }
            s
        }
    })
}

#[cfg(test)]
mod tests {
    use stages::theory::CurveRow;

    use super::*;

    #[test]
    fn csv_goes_through_the_one_writer_with_an_empty_ratio_for_a_neutral_projectile() {
        let curve = |ratio_rutherford| Curve {
            model: "test",
            rows: vec![
                CurveRow { theta_cm_deg: 30.0, dsdo_cm_mb_sr: 1500.0, ratio_rutherford, analyzing_power: None },
                CurveRow { theta_cm_deg: 30.25, dsdo_cm_mb_sr: 0.1 + 0.2, ratio_rutherford, analyzing_power: None },
            ],
            sigma_reaction_mb: None,
            sigma_total_mb: None,
            sigma_elastic_mb: None,
            l_max: 0,
            step_fm: None,
            matching_radii_fm: None,
            k_per_fm: 1.0,
            eta: 0.0,
        };
        // (ratio to Rutherford of every row, the CSV: floats in their shortest round-trip
        // form with a decimal point, a missing ratio as an empty field)
        let cases = [
            (
                Some(0.5),
                "theta_cm_deg,dsdo_cm_mb_sr,ratio_rutherford\n30.0,1500.0,0.5\n30.25,0.30000000000000004,0.5\n",
            ),
            (None, "theta_cm_deg,dsdo_cm_mb_sr,ratio_rutherford\n30.0,1500.0,\n30.25,0.30000000000000004,\n"),
        ];
        for (ratio, want) in cases {
            assert_eq!(render(&curve(ratio), TableFormat::Csv).expect("csv"), want, "{ratio:?}");
        }
    }
}
