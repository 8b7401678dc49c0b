//! Stage `normalise`: the integrated luminosity of a run (beam particles × target atoms per
//! cm²), absolutely from the charge and the foil, or relative to monitor detectors at angles
//! where scattering is pure Rutherford. Adds `luminosity_per_cm2` and `norm_rel_err` (the
//! common normalisation uncertainty of the live fraction × luminosity product, the same for
//! every row of a run); the absolute mode also adds `beam_particles`,
//! `beam_particles_rel_err`, `target_atoms_per_cm2` and `target_atoms_rel_err`, and with
//! `compare_absolute` the monitor mode adds them too, with `luminosity_monitor_over_absolute`
//! (a cross-check of charge collection and target thickness).

use polars::prelude::DataFrame;
use schemars::JsonSchema;
use serde::Deserialize;

use crate::physics::luminosity::{from_monitors, MonitorPoint};
use crate::physics::normalisation::{beam_particles, target_atoms_per_cm2};
use crate::physics::rutherford::Convention;
use crate::physics::uncertainty::quadrature;
use crate::problem::Checks;
use crate::setup::{Id, ResolvedReaction};
use crate::stage::correct_dead_time::live_fraction_rel_err;
use crate::table::{f64_values, f64_values_or, str_values, with_f64_columns};
use crate::{Problem, RunContext, RunRecord, Setup, Stage, StageError};

/// How the absolute scale is fixed.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum NormaliseMode {
    /// Beam particles from the integrated charge, target atoms from the areal density.
    #[default]
    Absolute,
    /// Luminosity from monitor detectors whose elastic yield is taken as pure Rutherford.
    Monitor,
}

/// Settings of `normalise`.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct NormaliseConfig {
    /// `absolute` (default) or `monitor`.
    #[serde(default)]
    pub mode: NormaliseMode,
    /// Relative standard uncertainty of the integrated charge (current integrator
    /// calibration, Faraday-cup suppression); default 0, range [0, 1).
    #[serde(default)]
    pub charge_rel_err: f64,
    /// Monitor mode: the detectors whose elastic peak fixes the scale (at least one).
    #[serde(default)]
    pub monitor_detectors: Vec<Id>,
    /// Monitor mode: the state counted in the monitors; default `elastic`; must be an
    /// elastic state of the reaction.
    #[serde(default = "elastic")]
    pub monitor_state: String,
    /// Monitor mode: Rutherford convention, `relativistic` (default) or `non_relativistic`.
    #[serde(default)]
    pub rutherford: Convention,
    /// Monitor mode: also compute the absolute luminosity and report the ratio
    /// monitor/absolute per run; default false.
    #[serde(default)]
    pub compare_absolute: bool,
}

fn elastic() -> String {
    "elastic".into()
}

/// The absolute normalisation of a run, from the set-up and the run's charge.
#[derive(Debug, Clone, Copy)]
struct Absolute {
    charge_rel_err: f64,
    charge_state: u32,
    target_atoms_per_cm2: f64,
    target_atoms_rel_err: f64,
}

/// The monitor normalisation settings, checked.
#[derive(Debug, Clone)]
struct Monitor {
    detectors: Vec<String>,
    state: String,
    rutherford: Convention,
    reaction: Option<ResolvedReaction>,
}

/// The built stage.
#[derive(Debug, Clone)]
pub struct Normalise {
    absolute: Option<Absolute>,
    monitor: Option<Monitor>,
}

impl NormaliseConfig {
    /// Check the settings against the set-up and build the stage (`setup` as in
    /// [`crate::StageConfig::build`]).
    ///
    /// # Errors
    /// Every problem: an out-of-range error, a missing charge state or areal density for
    /// the absolute mode, unknown monitor detectors, a monitor state that is not elastic.
    pub fn build(&self, setup: Option<&Setup>) -> Result<Normalise, Vec<Problem>> {
        let mut c = Checks::default();
        c.rel_err("charge_rel_err", self.charge_rel_err);
        let monitor_mode = self.mode == NormaliseMode::Monitor;
        let wants_absolute = !monitor_mode || self.compare_absolute;
        let absolute = if wants_absolute {
            let charge_state = setup.and_then(|s| s.reaction.beam_charge_state);
            c.require(
                setup.is_none() || charge_state.is_some(),
                "mode",
                "absolute normalisation without reaction.beam_charge_state",
                "reaction.beam_charge_state set (the charge per beam ion)",
            );
            setup.map(|s| {
                let t = &s.target;
                Absolute {
                    charge_rel_err: self.charge_rel_err,
                    charge_state: charge_state.unwrap_or(1),
                    target_atoms_per_cm2: t.areal_density_g_cm2().map_or(f64::NAN, |rho| {
                        target_atoms_per_cm2(rho, t.molar_mass_g_mol, t.isotopic_fraction, t.tilt_deg.to_radians())
                    }),
                    target_atoms_rel_err: t.areal_density_rel_err,
                }
            })
        } else {
            None
        };
        let monitor = if monitor_mode {
            c.require(
                !self.monitor_detectors.is_empty(),
                "monitor_detectors",
                "an empty list",
                "at least one monitor detector id",
            );
            let reaction = setup.and_then(|s| s.resolved.clone());
            if let Some(s) = setup {
                for (i, id) in self.monitor_detectors.iter().enumerate() {
                    c.require(
                        s.detector(&id.0).is_some(),
                        &format!("monitor_detectors[{i}]"),
                        id,
                        &format!("one of the detectors ({})", s.detector_ids()),
                    );
                }
            }
            if let Some(r) = &reaction {
                c.require(
                    r.is_elastic(&self.monitor_state),
                    "monitor_state",
                    &self.monitor_state,
                    &format!("an elastic state of the reaction (states: {})", r.state_names()),
                );
                c.require(
                    r.beam.z > 0 && r.target.z > 0,
                    "mode",
                    "monitor with a neutral particle",
                    "charged beam and target (Rutherford scattering)",
                );
            }
            Some(Monitor {
                detectors: self.monitor_detectors.iter().map(|d| d.0.clone()).collect(),
                state: self.monitor_state.clone(),
                rutherford: self.rutherford,
                reaction,
            })
        } else {
            for (key, set) in
                [("monitor_detectors", !self.monitor_detectors.is_empty()), ("compare_absolute", self.compare_absolute)]
            {
                c.require(!set, key, "a setting of the monitor mode", "mode: monitor to use it");
            }
            None
        };
        if !c.problems.is_empty() {
            return Err(c.problems);
        }
        Ok(Normalise { absolute, monitor })
    }
}

const MONITOR_INPUTS: [&str; 12] = [
    "detector",
    "state",
    "counts_net",
    "counts_net_err",
    "efficiency",
    "efficiency_err",
    "solid_angle_msr",
    "solid_angle_err_msr",
    "live_fraction",
    "theta_cm_deg",
    "domega_lab_per_domega_cm",
    "live_fraction_err",
];

impl Normalise {
    /// Absolute luminosity (1/cm²), beam particles, and the relative errors.
    fn absolute_parts(a: &Absolute, run: &RunRecord) -> Result<[f64; 4], StageError> {
        let charge = run.charge_c().ok_or_else(|| StageError::MissingRunValue {
            key: "charge_c".into(),
            needed_by: "normalise (absolute luminosity)".into(),
        })?;
        Ok([beam_particles(charge, a.charge_state), a.charge_rel_err, a.target_atoms_per_cm2, a.target_atoms_rel_err])
    }

    fn monitor_luminosity(m: &Monitor, table: &DataFrame) -> Result<(f64, f64), StageError> {
        let reaction = m.reaction.as_ref().ok_or_else(|| StageError::NoSetup {
            stage: "normalise (monitor mode)".into(),
            what: "the resolved reaction".into(),
        })?;
        let detectors = str_values(table, "detector")?;
        let states = str_values(table, "state")?;
        let cols = MONITOR_INPUTS[2..].iter().map(|c| f64_values(table, c)).collect::<Result<Vec<_>, _>>()?;
        let channel = reaction.channel(&m.state).ok_or_else(|| StageError::NoSetup {
            stage: "normalise (monitor_state)".into(),
            what: format!("a channel of state {}", m.state),
        })?;
        let live_rel_err = live_fraction_rel_err(&cols[6], &cols[9]);
        // The window acceptance where the yields have one (events and spectra), else 1.
        let (acceptance, acceptance_err) =
            (f64_values_or(table, "window_acceptance", 1.0)?, f64_values_or(table, "window_acceptance_err", 0.0)?);
        let mut points = Vec::new();
        for id in &m.detectors {
            let row = detectors.iter().zip(&states).position(|(d, s)| d == id && *s == m.state).ok_or_else(|| {
                StageError::BadValue {
                    row: 0,
                    column: "detector".into(),
                    value: format!("no row for monitor {id}, state {}", m.state),
                    expected: "a yields row for every monitor detector".into(),
                }
            })?;
            let theta_cm = cols[7][row].to_radians();
            let sigma_cm = m.rutherford.cm_mb_sr(reaction.beam.z, reaction.target.z, channel, theta_cm);
            points.push(MonitorPoint {
                counts_net: (cols[0][row], cols[1][row]),
                window_acceptance: (acceptance[row], acceptance_err[row]),
                efficiency: (cols[2][row], cols[3][row]),
                solid_angle_msr: (cols[4][row], cols[5][row]),
                live_fraction: (cols[6][row], cols[6][row] * live_rel_err.own[row]),
                rutherford_lab_mb_sr: sigma_cm / cols[8][row],
            });
        }
        let (l, rel) = from_monitors(&points);
        if !(l.is_finite() && l > 0.0) {
            return Err(StageError::BadValue {
                row: 0,
                column: "counts_net".into(),
                value: format!("monitor counts {}", points.iter().map(|p| p.counts_net.0).sum::<f64>()),
                expected: "monitor counts > 0".into(),
            });
        }
        Ok((l, rel))
    }
}

impl Stage for Normalise {
    fn name(&self) -> &'static str {
        "normalise"
    }
    fn needs(&self) -> Vec<&'static str> {
        if self.monitor.is_some() {
            MONITOR_INPUTS.to_vec()
        } else {
            vec!["live_fraction", "live_fraction_err"]
        }
    }
    fn adds(&self) -> Vec<&'static str> {
        let mut adds = vec!["luminosity_per_cm2", "norm_rel_err"];
        if self.absolute.is_some() {
            adds.extend(["beam_particles", "beam_particles_rel_err", "target_atoms_per_cm2", "target_atoms_rel_err"]);
        }
        if self.absolute.is_some() && self.monitor.is_some() {
            adds.push("luminosity_monitor_over_absolute");
        }
        adds
    }
    fn run(&self, table: DataFrame, ctx: &RunContext<'_>) -> Result<DataFrame, StageError> {
        let n = table.height();
        let mut columns = Vec::new();
        let absolute = self.absolute.as_ref().map(|a| Self::absolute_parts(a, ctx.run)).transpose()?;
        if let Some([beam, beam_rel, target, target_rel]) = absolute {
            columns.extend([
                ("beam_particles", beam),
                ("beam_particles_rel_err", beam_rel),
                ("target_atoms_per_cm2", target),
                ("target_atoms_rel_err", target_rel),
            ]);
        }
        let (luminosity, norm_rel_err) = match (&self.monitor, absolute) {
            (Some(m), _) => Self::monitor_luminosity(m, &table)?,
            (None, Some([beam, beam_rel, target, target_rel])) => {
                // The live fraction's error joins the normalisation where it is common to
                // the run; a detector's own is in its statistical error.
                let f = f64_values(&table, "live_fraction")?;
                let f_err = f64_values(&table, "live_fraction_err")?;
                let live_rel = live_fraction_rel_err(&f, &f_err).common;
                (beam * target, quadrature(&[beam_rel, target_rel, live_rel]))
            }
            (None, None) => {
                return Err(StageError::NoSetup {
                    stage: "normalise".into(),
                    what: "the absolute or monitor normalisation".into(),
                })
            }
        };
        if let (Some(_), Some([beam, _, target, _])) = (&self.monitor, absolute) {
            columns.push(("luminosity_monitor_over_absolute", luminosity / (beam * target)));
        }
        columns.insert(0, ("norm_rel_err", norm_rel_err));
        columns.insert(0, ("luminosity_per_cm2", luminosity));
        with_f64_columns(table, columns.into_iter().map(|(name, v)| (name, vec![v; n])).collect())
    }
    fn check_run(&self, run: &RunRecord) -> Vec<Problem> {
        match (&self.absolute, run.charge_c()) {
            (Some(_), None) => vec![Problem::new(
                "charge_c",
                "missing",
                "the integrated charge (normalise reads it for the absolute luminosity)",
            )],
            _ => Vec::new(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::setup::testing::{record, setup};
    use approx::assert_relative_eq;
    use polars::prelude::Column;

    #[test]
    fn absolute_luminosity_from_charge_and_areal_density() {
        // Worked by hand with CODATA 2018 e and N_A: 1 µC of ⁴He²⁺ is
        // N = 1e-6 / (2 · 1.602176634e-19) = 3.120754e12 ions; 100 µg/cm² of 58 g/mol is
        // n = 1e-4 / 58 · 6.02214076e23 = 1.038300e18 atoms/cm². The normalisation error
        // adds charge (1 %), target (3 %) and live fraction (0.9 ± 0.009, 1 %) in quadrature.
        let setup = setup("[{ id: A, theta_lab_deg: 30.0, aperture: { shape: given, solid_angle_msr: 1.0 } }]");
        let config: NormaliseConfig = serde_yaml::from_str("{ mode: absolute, charge_rel_err: 0.01 }").expect("parses");
        let stage = config.build(Some(&setup)).expect("builds");
        let table = DataFrame::new_infer_height(vec![
            Column::new("detector".into(), ["A"]),
            Column::new("live_fraction".into(), [0.9]),
            Column::new("live_fraction_err".into(), [0.009]),
        ])
        .expect("table");
        let out = stage.run(table, &RunContext { setup: &setup, run: &record("") }).expect("runs");
        let at = |c: &str| f64_values(&out, c).expect("column")[0];
        let (beam, target) = (1e-6 / (2.0 * 1.602_176_634e-19), 1e-4 / 58.0 * 6.022_140_76e23);
        // (column, expected); 1e-12: the same arithmetic in another order.
        let cases = [
            ("beam_particles", beam),
            ("target_atoms_per_cm2", target),
            ("luminosity_per_cm2", beam * target),
            ("norm_rel_err", (0.01f64.powi(2) + 0.03f64.powi(2) + 0.01f64.powi(2)).sqrt()),
        ];
        for (column, want) in cases {
            assert_relative_eq!(at(column), want, max_relative = 1e-12);
        }
        // Absolute normalisation without a charge state is refused when built.
        let mut neutral = setup.clone();
        neutral.reaction.beam_charge_state = None;
        let problems = config.build(Some(&neutral)).expect_err("refused");
        assert!(problems.iter().any(|p| p.expected.contains("beam_charge_state")), "{problems:?}");
    }
}
