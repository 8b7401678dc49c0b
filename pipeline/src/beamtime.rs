//! `xsflow beamtime CONFIG --truth MODEL --current-na I --precision P`: the beam time an
//! experiment needs. Reads the config and the true cross sections as `xsflow simulate`
//! does; the rates and times come from `stages::simulate::beamtime`. The settings are the
//! config's detectors at their angles (`nominal`) and every other arm setting its run
//! records name (`arm_theta_lab_deg`).

use std::fmt::Write as _;
use std::path::PathBuf;

use stages::simulate::beamtime::{plan, BackgroundShare, Beamtime, BeamtimeOptions};
use stages::simulate::{self, DeadTimeModel};

use crate::error::Diagnostic;
use crate::simulate::{command_line_problems, prepare, truths};

/// Where the problems of the command line are reported.
const COMMAND_LINE: &str = "xsflow beamtime";

/// What `xsflow beamtime` is asked to do.
#[derive(Debug, Clone)]
pub struct Request {
    /// The experiment config.
    pub config: PathBuf,
    /// The elastic state's true cross section: a model file.
    pub truth: PathBuf,
    /// Other states' truths, `STATE=MB_SR` or `STATE=MODEL`.
    pub state_truths: Vec<String>,
    /// The dead-time model; default the config's `correct_dead_time` model, else
    /// non-paralyzable.
    pub dead_time: Option<DeadTimeModel>,
    /// Resolving time, µs; default the config's, else 2.
    pub resolving_time_us: Option<f64>,
    /// The settings (its `dead_time` and `resolving_time_us` are replaced by the above).
    pub options: BeamtimeOptions,
}

/// Plan the beam time.
///
/// # Errors
/// Every problem of the command line, the config and the models, located.
pub fn beamtime(req: &Request) -> Result<Beamtime, Vec<Diagnostic>> {
    let (p, _, dead_time, resolving_time_us) = prepare(&req.config, req.dead_time, req.resolving_time_us)?;
    let mut options = req.options.clone();
    (options.dead_time, options.resolving_time_us) = (dead_time, resolving_time_us);
    let mut problems = command_line_problems(COMMAND_LINE, &options.validate());
    let truths = truths(COMMAND_LINE, &req.truth, &req.state_truths, &req.config, &p.setup).unwrap_or_else(|d| {
        problems.extend(d);
        Default::default()
    });
    if !problems.is_empty() {
        return Err(problems);
    }
    let mut setups = vec![("nominal".to_string(), &p.setup)];
    for run in p.runs.iter().filter_map(|r| r.loaded.as_ref().ok()) {
        if let Some(setup) = &run.setup {
            let name =
                run.record.arm_theta_lab_deg.iter().map(|(arm, deg)| format!("{arm}={deg}°")).collect::<Vec<_>>();
            let name = name.join(",");
            if !setups.iter().any(|(n, _)| *n == name) {
                setups.push((name, setup));
            }
        }
    }
    let mut settings = Vec::new();
    for (name, setup) in setups {
        let e = simulate::experiment(setup, &truths)
            .map_err(|e| vec![Diagnostic::new(&req.config, "", format!("setting {name}: {e}"))])?;
        settings.push((name, e));
    }
    let share = p.raw.as_ref().map(BackgroundShare::of);
    Ok(plan(&settings, share.as_ref(), &options))
}

/// The plan as JSON, or as lines for a person.
pub fn render(b: &Beamtime, json: bool) -> String {
    if json {
        return serde_json::to_string_pretty(b).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}")) + "\n";
    }
    let mut s = format!(
        "beam {} nA, relative precision {} on every peak (N = {:.0} net counts without background)\n",
        b.current_na,
        b.precision_rel,
        1.0 / (b.precision_rel * b.precision_rel)
    );
    for set in &b.settings {
        let _ = writeln!(
            s,
            "\nsetting {}: {:.4} h (limited by {}); total rate {:.6e} /s, dead time {:.2} %{}",
            set.setting,
            set.hours,
            set.limiting_peak,
            set.total_rate_per_s,
            100.0 * set.dead_time_fraction,
            if set.dead_time_warning {
                format!("  WARNING: above the limit of {:.1} %", 100.0 * b.dead_time_limit)
            } else {
                String::new()
            }
        );
        let _ = writeln!(
            s,
            "{:>10}  {:>9}  {:>12}  {:>6}  {:>9}  {:>12}  {:>12}  {:>12}  {:>10}",
            "detector", "theta_lab", "state", "branch", "theta_cm", "rate/s", "bkg_rate/s", "counts", "hours"
        );
        for q in &set.peaks {
            let hours = q.hours.map_or_else(|| "never".to_string(), |h| format!("{h:.4}"));
            let _ = writeln!(
                s,
                "{:>10}  {:>9.3}  {:>12}  {:>6}  {:>9.3}  {:>12.5e}  {:>12.5e}  {:>12.0}  {hours:>10}",
                q.detector,
                q.theta_lab_deg,
                q.state,
                q.branch,
                q.theta_cm_deg,
                q.rate_per_s,
                q.background_rate_per_s,
                q.counts_needed
            );
        }
        let rates: Vec<String> = set.detector_rates_per_s.iter().map(|(id, r)| format!("{id} {r:.5e}")).collect();
        let _ = writeln!(s, "detector rates /s: {}", rates.join(", "));
    }
    let _ = writeln!(
        s,
        "\ntotal: {:.4} h over {} setting(s); the longest is {}",
        b.total_hours,
        b.settings.len(),
        b.limiting_setting
    );
    s
}

/// The warnings of a plan, one line each.
pub fn warnings(b: &Beamtime) -> Vec<String> {
    b.settings
        .iter()
        .filter(|s| s.dead_time_warning)
        .map(|s| {
            format!(
                "setting {}: dead time {:.1} % at {:.4e} events/s is above the limit of {:.1} % (--dead-time-limit); lower the current or move the detectors back",
                s.setting,
                100.0 * s.dead_time_fraction,
                s.total_rate_per_s,
                100.0 * b.dead_time_limit
            )
        })
        .collect()
}
