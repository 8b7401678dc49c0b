//! A fit's report as `xsflow fit` prints it: for a person, or as JSON or YAML.

use std::fmt::Write as _;

use stages::fit::FitReport;

use crate::cli::ReportFormat;

/// The report in the chosen format.
pub fn render(r: &FitReport, format: ReportFormat) -> String {
    match format {
        ReportFormat::Text => render_text(r),
        ReportFormat::Json => serde_json::to_string_pretty(r).unwrap_or_default() + "\n",
        ReportFormat::Yaml => serde_yaml::to_string(r).unwrap_or_default(),
    }
}

fn opt(v: Option<f64>, prec: usize) -> String {
    v.map_or_else(|| "-".into(), |x| format!("{x:.prec$e}"))
}

/// The report for a person.
pub fn render_text(r: &FitReport) -> String {
    let mut s = format!(
        "model: {}  state: {}  points: {}  converged: {} ({}, {} iterations, {} evaluations)\n",
        r.model, r.state, r.points, r.converged, r.termination, r.iterations, r.evaluations
    );
    let _ = writeln!(
        s,
        "chi2 = {:.4}  ndf = {}  chi2/ndf = {}  p = {}",
        r.chi2,
        r.ndf,
        r.chi2_per_ndf.map_or_else(|| "-".into(), |x| format!("{x:.4}")),
        opt(r.p_value, 3)
    );
    if r.points_poisson > 0 {
        let _ = writeln!(
            s,
            "{} point(s) by the Poisson likelihood ratio on counts (Baker–Cousins), {} by the χ²",
            r.points_poisson, r.points_gaussian
        );
    }
    let _ = writeln!(s, "{:<24} {:>14} {:>12} {:>12}", "parameter", "value", "error", "start");
    for p in &r.parameters {
        let _ = writeln!(
            s,
            "{:<24} {:>14.6e} {:>12} {:>12.4e}{}",
            p.name,
            p.value,
            opt(p.error, 3),
            p.start,
            if p.at_bound { "  at bound" } else { "" }
        );
    }
    if let Some(c) = &r.correlations {
        let _ = writeln!(s, "correlations:");
        for row in c {
            let _ = writeln!(s, "  {}", row.iter().map(|x| format!("{x:>7.3}")).collect::<Vec<_>>().join(" "));
        }
    }
    for m in &r.minima {
        let pars: Vec<String> = m.parameters.iter().map(|(k, v)| format!("{k} = {v:.5}")).collect();
        let _ = writeln!(s, "minimum: chi2 = {:.4} ({}) {}", m.chi2, m.termination, pars.join(", "));
    }
    for p in &r.profiles {
        let _ = writeln!(s, "profile {}: [{}, {}]", p.name, opt(p.lower, 6), opt(p.upper, 6));
    }
    for w in &r.warnings {
        let _ = writeln!(s, "warning: {w}");
    }
    s
}
