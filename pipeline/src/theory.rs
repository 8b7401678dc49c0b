//! `xsflow theory MODEL`: a model curve (optical model, Rutherford, hard sphere) at chosen
//! CM angles, for a person (a table) or a script (JSON, CSV).

use std::fmt::Write as _;
use std::path::Path;

use stages::theory::{Curve, ModelConfig};

use crate::cli::TableFormat;
use crate::config::YamlFile;
use crate::error::Diagnostic;

/// Read and check a model file, and evaluate it at the CM angles.
///
/// # Errors
/// Every problem of the file, located.
pub fn curve(path: &Path, angles_deg: &[f64]) -> Result<Curve, Vec<Diagnostic>> {
    let file = YamlFile::read(path).map_err(|d| vec![d])?;
    let model: ModelConfig = file.parse("", &file.value).map_err(|d| vec![d])?;
    model.evaluate(angles_deg).map_err(|problems| problems.iter().map(|p| file.problem(p)).collect())
}

/// The curve in the chosen format.
pub fn render(curve: &Curve, format: TableFormat) -> String {
    match format {
        TableFormat::Json => {
            serde_json::to_string_pretty(curve).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}")) + "\n"
        }
        TableFormat::Csv => {
            let mut s = String::from("theta_cm_deg,dsdo_cm_mb_sr,ratio_rutherford\n");
            for r in &curve.rows {
                let ratio = r.ratio_rutherford.map(|x| x.to_string()).unwrap_or_default();
                let _ = writeln!(s, "{},{},{ratio}", r.theta_cm_deg, r.dsdo_cm_mb_sr);
            }
            s
        }
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
            let _ = writeln!(s, "{:>12}  {:>16}  {:>16}", "theta_cm", "dsdo_cm/(mb/sr)", "ratio_rutherford");
            for r in &curve.rows {
                let ratio = r.ratio_rutherford.map(|x| format!("{x:.6e}")).unwrap_or_else(|| "-".into());
                let _ = writeln!(s, "{:>12.3}  {:>16.6e}  {ratio:>16}", r.theta_cm_deg, r.dsdo_cm_mb_sr);
            }
            s
        }
    }
}
