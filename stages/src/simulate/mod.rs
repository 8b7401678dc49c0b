//! Synthetic runs with known truth (`xsflow simulate`): from the experiment a config
//! describes and a true CM cross section per state, the expected counts of every peak of
//! every detector, from first principles ([`physics`]), then Poisson counts per channel or
//! list-mode events ([`sample`]). The pipeline writes them in the formats the reduction
//! reads, with `truth.parquet`.
//!
//! What the reduction also uses where it is the definition is shared: the kinematics of
//! the set-up's resolved channels (relativistic, both branches of a double-valued lab
//! angle) and the theory models of `xsflow theory`. The normalisation (luminosity per
//! coulomb, solid angle, efficiency) and the true live fraction are written here apart from
//! the reduction's formulas, so that a closure test checks them.
//!
//! The chain for one peak (detector d, state s, branch b) and one run:
//!     (dσ/dΩ)_lab = (dσ/dΩ)_cm / (dΩ_lab/dΩ_cm)                    (Jacobian of the
//!                                                   detected particle, at θ_cm of the peak)
//!     N_arriving  = (dσ/dΩ)_lab ΔΩ_d ε_d(E) · L,   L = Q · (L/Q)
//!     N_expected  = N_arriving · f_live,           f_live from the true rate n = N_all / T
//! where N_all counts every arriving event of the run (all peaks and the background) and T
//! is its real time. The charge Q is chosen so that N_all is the `--events` asked for.

pub mod beamtime;
mod config;
pub mod physics;
pub mod sample;

use std::collections::BTreeMap;

pub use config::{DeadTimeModel, SimulateOptions, StateTruth, MAX_EVENTS, MAX_RUNS};

use crate::physics::kinematics::Mode;
use crate::physics::PhysicsError;
use crate::raw::RawPlan;
use crate::Setup;

/// Why a simulation cannot be set up.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SimulateError {
    /// The reaction section did not resolve.
    #[error("the config's reaction section has problems; `xsflow check` lists them")]
    Unresolved,
    /// The charge state is needed to turn charge into beam particles.
    #[error("reaction.beam_charge_state is not given; the beam particles follow from the charge and the charge state: add it (a whole number >= 1)")]
    NoChargeState,
    /// A state without a true cross section.
    #[error("state `{state}` has no true cross section; give --state-truth {state}=MB_SR (a constant dσ/dΩ_cm in mb/sr) or {state}=MODEL (a model file of `xsflow theory`); --truth gives the elastic state's")]
    NoTruth {
        /// The state.
        state: String,
    },
    /// A model that cannot be evaluated.
    #[error("the true cross section of state `{state}` cannot be evaluated: {problems}")]
    Model {
        /// The state.
        state: String,
        /// What the model's checks say.
        problems: String,
    },
    /// A cross section that is not a finite number >= 0.
    #[error("the true cross section of state `{state}` at θ_cm = {theta_cm_deg}° is {dsdo_cm_mb_sr} mb/sr; expected a finite number >= 0")]
    BadCrossSection {
        /// The state.
        state: String,
        /// The CM angle, degrees.
        theta_cm_deg: f64,
        /// The value.
        dsdo_cm_mb_sr: f64,
    },
    /// A tabulated efficiency that does not cover a peak's energy.
    #[error("detector {detector}, state `{state}`: {source}")]
    Efficiency {
        /// The detector.
        detector: String,
        /// The state.
        state: String,
        /// What the table says.
        source: PhysicsError,
    },
    /// Nothing to count.
    #[error("no detector sees any state (every angle is past the kinematic limit, or every cross section is 0)")]
    NoCounts,
}

/// One peak of the experiment with its truth: what a detector sees of one state on one
/// kinematic branch.
#[derive(Debug, Clone, PartialEq)]
pub struct Peak {
    /// Index of the detector in config order.
    pub detector: usize,
    /// Detector id.
    pub detector_id: String,
    /// State name.
    pub state: String,
    /// Kinematic branch: 1, or 2 for the lower-energy solution of a double-valued angle.
    pub branch: u8,
    /// Lab angle of the detector, degrees.
    pub theta_lab_deg: f64,
    /// CM angle of the ejectile, degrees.
    pub theta_cm_deg: f64,
    /// Lab energy of the detected particle, MeV.
    pub energy_lab_mev: f64,
    /// dΩ_lab/dΩ_cm of the detected particle.
    pub domega_lab_per_domega_cm: f64,
    /// True dσ/dΩ_cm, mb/sr.
    pub dsdo_cm_mb_sr: f64,
    /// True dσ/dΩ_lab, mb/sr.
    pub dsdo_lab_mb_sr: f64,
    /// Solid angle of the detector, sr.
    pub solid_angle_sr: f64,
    /// Detection efficiency at the peak's energy.
    pub efficiency: f64,
    /// Expected arriving counts per unit luminosity (per 1/cm²), before dead time.
    pub counts_per_luminosity_cm2: f64,
}

/// The elastic peak of the beam on one impurity of the foil (`target.contaminants`), as
/// one detector sees it on one kinematic branch.
#[derive(Debug, Clone, PartialEq)]
pub struct ContaminantPeak {
    /// Index of the detector in config order.
    pub detector: usize,
    /// The impurity.
    pub nuclide: String,
    /// Kinematic branch.
    pub branch: u8,
    /// Lab energy of the detected particle, MeV.
    pub energy_lab_mev: f64,
    /// Expected arriving counts per unit luminosity of the target nuclide (per 1/cm²),
    /// before dead time.
    pub counts_per_luminosity_cm2: f64,
}

/// Every peak of the experiment, with its truth, and the luminosity per coulomb.
#[derive(Debug, Clone)]
pub struct Experiment {
    /// The peaks, by detector in config order, then state in config order, then branch.
    pub peaks: Vec<Peak>,
    /// The impurities' peaks, by impurity, then detector, then branch.
    pub contaminants: Vec<ContaminantPeak>,
    /// Integrated luminosity per coulomb of beam charge, 1/(cm² C).
    pub luminosity_per_cm2_per_c: f64,
}

/// The peaks of the set-up with their true cross sections (`truths` by state name).
///
/// # Errors
/// A state without a truth, a model that cannot be evaluated or gives a bad value, an
/// efficiency table that does not cover a peak, no charge state, or nothing to count.
pub fn experiment(setup: &Setup, truths: &BTreeMap<String, StateTruth>) -> Result<Experiment, SimulateError> {
    let resolved = setup.resolved.as_ref().ok_or(SimulateError::Unresolved)?;
    let charge_state = setup.reaction.beam_charge_state.ok_or(SimulateError::NoChargeState)?;
    let luminosity_per_cm2_per_c =
        physics::luminosity_per_cm2_per_c(charge_state, &setup.target).ok_or(SimulateError::Unresolved)?;
    let mut peaks = Vec::new();
    for (d, det) in setup.detectors.iter().enumerate() {
        let solid_angle_sr = physics::solid_angle_sr(det).ok_or(SimulateError::Unresolved)?;
        for (state, channel) in &resolved.channels {
            for s in channel.at_lab_angle(det.theta_lab_deg.to_radians(), resolved.detect, Mode::Relativistic) {
                let efficiency = physics::efficiency(det, s.energy_lab_mev).map_err(|source| {
                    SimulateError::Efficiency { detector: det.id.0.clone(), state: state.name.clone(), source }
                })?;
                peaks.push(Peak {
                    detector: d,
                    detector_id: det.id.0.clone(),
                    state: state.name.clone(),
                    branch: s.branch,
                    theta_lab_deg: det.theta_lab_deg,
                    theta_cm_deg: s.theta_cm_rad.to_degrees(),
                    energy_lab_mev: s.energy_lab_mev,
                    domega_lab_per_domega_cm: s.domega_lab_per_domega_cm,
                    dsdo_cm_mb_sr: 0.0,
                    dsdo_lab_mb_sr: 0.0,
                    solid_angle_sr,
                    efficiency,
                    counts_per_luminosity_cm2: 0.0,
                });
            }
        }
    }
    for (state, _) in &resolved.channels {
        let truth = truths.get(&state.name).ok_or_else(|| SimulateError::NoTruth { state: state.name.clone() })?;
        let mine: Vec<&mut Peak> = peaks.iter_mut().filter(|p| p.state == state.name).collect();
        let angles: Vec<f64> = mine.iter().map(|p| p.theta_cm_deg).collect();
        let values = cm_cross_sections(&state.name, truth, &angles)?;
        for (p, dsdo_cm_mb_sr) in mine.into_iter().zip(values) {
            p.dsdo_cm_mb_sr = dsdo_cm_mb_sr;
            p.dsdo_lab_mb_sr = dsdo_cm_mb_sr / p.domega_lab_per_domega_cm;
            p.counts_per_luminosity_cm2 =
                physics::counts_per_luminosity_cm2(p.dsdo_lab_mb_sr, p.solid_angle_sr, p.efficiency);
        }
    }
    if !peaks.iter().any(|p| p.counts_per_luminosity_cm2 > 0.0) {
        return Err(SimulateError::NoCounts);
    }
    let contaminants = contaminant_peaks(setup, resolved)?;
    Ok(Experiment { peaks, contaminants, luminosity_per_cm2_per_c })
}

/// The elastic peaks of the beam on the foil's impurities: Rutherford scattering
/// ([`crate::physics::rutherford::cm_nonrel_mb_sr`], the convention of `model: rutherford`)
/// at the CM angle of each detector's relativistic kinematic solution, per unit luminosity
/// of the target nuclide:
///     N/L = (dσ/dΩ)_lab ΔΩ ε · n_c/n_t,   n_c/n_t = (ρx_c/M_c) / (ρx f/M)
/// (the tilt's 1/cos α is common to both), M_c the impurity's atomic mass in g/mol.
fn contaminant_peaks(
    setup: &Setup,
    resolved: &crate::setup::ResolvedReaction,
) -> Result<Vec<ContaminantPeak>, SimulateError> {
    let target_per_g = setup.target.areal_density_g_cm2().ok_or(SimulateError::Unresolved)?
        * setup.target.isotopic_fraction
        / setup.target.molar_mass_g_mol;
    let beam = &resolved.beam;
    let mut out = Vec::new();
    for (k, nuclide, channel) in resolved.impurity_channels(setup.reaction.energy_mev, &setup.target.contaminants) {
        let ratio = k.areal_density_ug_cm2 * 1e-6 / nuclide.atomic_mass_u / target_per_g;
        let e_cm_mev = channel.cm_energy_nonrel_mev();
        for (d, det) in setup.detectors.iter().enumerate() {
            let solid_angle_sr = physics::solid_angle_sr(det).ok_or(SimulateError::Unresolved)?;
            for s in channel.at_lab_angle(det.theta_lab_deg.to_radians(), resolved.detect, Mode::Relativistic) {
                let efficiency =
                    physics::efficiency(det, s.energy_lab_mev).map_err(|source| SimulateError::Efficiency {
                        detector: det.id.0.clone(),
                        state: format!("contaminant {}", k.nuclide),
                        source,
                    })?;
                let dsdo_cm_mb_sr =
                    crate::physics::rutherford::cm_nonrel_mb_sr(beam.z, nuclide.z, e_cm_mev, s.theta_cm_rad);
                let per_luminosity = physics::counts_per_luminosity_cm2(
                    dsdo_cm_mb_sr / s.domega_lab_per_domega_cm,
                    solid_angle_sr,
                    efficiency,
                );
                out.push(ContaminantPeak {
                    detector: d,
                    nuclide: k.nuclide.clone(),
                    branch: s.branch,
                    energy_lab_mev: s.energy_lab_mev,
                    counts_per_luminosity_cm2: per_luminosity * ratio,
                });
            }
        }
    }
    Ok(out)
}

/// A state's true dσ/dΩ_cm at CM angles in degrees.
fn cm_cross_sections(state: &str, truth: &StateTruth, angles_deg: &[f64]) -> Result<Vec<f64>, SimulateError> {
    let values = match truth {
        StateTruth::Constant(v) => vec![*v; angles_deg.len()],
        StateTruth::Model(_) if angles_deg.is_empty() => Vec::new(),
        StateTruth::Model(model) => model
            .evaluate(angles_deg)
            .map_err(|problems| SimulateError::Model {
                state: state.to_string(),
                problems: problems.iter().map(ToString::to_string).collect::<Vec<_>>().join("; "),
            })?
            .rows
            .iter()
            .map(|r| r.dsdo_cm_mb_sr)
            .collect(),
    };
    match angles_deg.iter().zip(&values).find(|(_, v)| !(v.is_finite() && **v >= 0.0)) {
        Some((a, v)) => {
            Err(SimulateError::BadCrossSection { state: state.to_string(), theta_cm_deg: *a, dsdo_cm_mb_sr: *v })
        }
        None => Ok(values),
    }
}

/// The numbers of one run: charge, luminosity, true rate and live fraction, and the
/// expected arriving counts of each peak.
#[derive(Debug, Clone, PartialEq)]
pub struct RunNumbers {
    /// Integrated beam charge, C.
    pub charge_c: f64,
    /// Integrated luminosity, 1/cm².
    pub luminosity_per_cm2: f64,
    /// Expected arriving events of every peak and the background, before dead time.
    pub events_arriving: f64,
    /// True (arrival) rate of events, 1/s.
    pub true_rate_per_s: f64,
    /// True live fraction of the acquisition at that rate.
    pub live_fraction: f64,
    /// Expected arriving counts of each peak of [`Experiment::peaks`], before dead time.
    pub peak_arrivals: Vec<f64>,
    /// Expected arriving counts of each peak of [`Experiment::contaminants`].
    pub contaminant_arrivals: Vec<f64>,
}

/// The run whose expected arriving events are `options.events`, counting a flat background
/// of `background_fraction` of the peak counts when `with_background`.
pub fn run_numbers(e: &Experiment, options: &SimulateOptions, with_background: bool) -> RunNumbers {
    let per_luminosity: f64 = e.peaks.iter().map(|p| p.counts_per_luminosity_cm2).sum();
    let background = if with_background { options.background_fraction } else { 0.0 };
    let contaminants: f64 = e.contaminants.iter().map(|p| p.counts_per_luminosity_cm2).sum();
    let events_per_c = (per_luminosity * (1.0 + background) + contaminants) * e.luminosity_per_cm2_per_c;
    let charge_c = options.events / events_per_c;
    let luminosity_per_cm2 = charge_c * e.luminosity_per_cm2_per_c;
    let true_rate_per_s = options.events / options.real_time_s;
    RunNumbers {
        charge_c,
        luminosity_per_cm2,
        events_arriving: options.events,
        true_rate_per_s,
        live_fraction: physics::live_fraction(options.dead_time, true_rate_per_s, options.resolving_time_us * 1e-6),
        peak_arrivals: e.peaks.iter().map(|p| p.counts_per_luminosity_cm2 * luminosity_per_cm2).collect(),
        contaminant_arrivals: e.contaminants.iter().map(|p| p.counts_per_luminosity_cm2 * luminosity_per_cm2).collect(),
    }
}

/// The expected arriving counts per detector and channel of one run (before dead time),
/// laid out detector after detector, and the arriving counts that fall outside the
/// channels.
#[derive(Debug, Clone, PartialEq)]
pub struct ExpectedSpectra {
    /// Channels per detector.
    pub channels: usize,
    /// Expected arriving counts, index detector × channels + channel.
    pub arriving: Vec<f64>,
    /// Expected arriving counts outside every detector's channels.
    pub outside: f64,
}

/// The spectra a run's peaks make through the detector response of the `raw:` section:
/// Gaussian peaks of σ = `gates.resolution_mev` at the kinematic energies (of the states
/// and of the foil's impurities), through each detector's calibration, on a flat background of
/// `background_fraction` of the detector's peak counts spread evenly over its channels.
pub fn expected_spectra(e: &Experiment, run: &RunNumbers, raw: &RawPlan, background_fraction: f64) -> ExpectedSpectra {
    let channels = raw.n_channels();
    let detectors = raw.detector_ids().len();
    let mut arriving = vec![0.0; detectors * channels];
    let mut outside = 0.0;
    let sigma_mev = raw.config.gates.resolution_mev;
    for d in 0..detectors {
        let means = &mut arriving[d * channels..(d + 1) * channels];
        let mut peak_total = 0.0;
        for (p, counts) in e.peaks.iter().zip(&run.peak_arrivals).filter(|(p, _)| p.detector == d) {
            outside += physics::add_peak(means, raw.calibration(d), p.energy_lab_mev, sigma_mev, *counts);
            peak_total += counts;
        }
        for (p, counts) in e.contaminants.iter().zip(&run.contaminant_arrivals).filter(|(p, _)| p.detector == d) {
            outside += physics::add_peak(means, raw.calibration(d), p.energy_lab_mev, sigma_mev, *counts);
        }
        let per_channel = background_fraction * peak_total / channels as f64;
        means.iter_mut().for_each(|m| *m += per_channel);
    }
    ExpectedSpectra { channels, arriving, outside }
}

#[cfg(test)]
mod tests;
