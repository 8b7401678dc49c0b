//! The reduced cross-section table (`cross_sections.parquet` / `.csv`), one row per run ×
//! detector × state: the columns of a run reduced with every stage, in output order. This
//! type documents them and generates `schemas/cross_sections.schema.json`; a test checks
//! that the demo output has exactly these columns.

use schemars::JsonSchema;

/// One row of the reduced cross-section table.
#[derive(Debug, Clone, JsonSchema)]
#[allow(dead_code)]
pub struct CrossSectionRow {
    /// Run id.
    pub run: String,
    /// Detector id.
    pub detector: String,
    /// State (peak) name.
    pub state: String,
    /// Lab angle of the detector in degrees.
    pub theta_lab_deg: f64,
    /// Standard uncertainty of the lab angle in degrees.
    pub theta_lab_err_deg: f64,
    /// Gross counts in the peak window.
    pub counts_gross: f64,
    /// Background counts under the peak (present when the yields table has it).
    pub counts_background: Option<f64>,
    /// Standard uncertainty of the background (present when the yields table has it).
    pub counts_background_err: Option<f64>,
    /// Fraction of the peak's counts the window and side-band subtraction keep (present
    /// when the yields table has it; xsflow writes it for yields from events or spectra).
    pub window_acceptance: Option<f64>,
    /// Standard uncertainty of `window_acceptance` (a point-to-point systematic).
    pub window_acceptance_err: Option<f64>,
    /// Measured peak energy in MeV (present when the yields table has it).
    pub peak_energy_lab_mev: Option<f64>,
    /// Net counts, gross minus background.
    pub counts_net: f64,
    /// Standard uncertainty of the net counts (Poisson on gross, background error).
    pub counts_net_err: f64,
    /// Lower end of the Feldman–Cousins confidence interval on the signal counts (the
    /// `subtract_background` stage's `confidence_level`, 68.27 % by default), for a peak
    /// consistent with zero (`upper_limit`); empty otherwise.
    pub counts_net_lower: Option<f64>,
    /// Upper end of that interval; empty where `upper_limit` is false.
    pub counts_net_upper: Option<f64>,
    /// True where the net counts are below `interval_below_sigmas` standard errors: the
    /// signal is not established, quote the interval (an upper limit when its lower end is 0).
    pub upper_limit: bool,
    /// Live fraction of the acquisition, in (0, 1].
    pub live_fraction: f64,
    /// Standard uncertainty of the live fraction.
    pub live_fraction_err: f64,
    /// CM angle of the ejectile in degrees.
    pub theta_cm_deg: f64,
    /// Standard uncertainty of the CM angle in degrees (from the lab angle's).
    pub theta_cm_err_deg: f64,
    /// Jacobian dΩ_lab/dΩ_cm of the detected particle.
    pub domega_lab_per_domega_cm: f64,
    /// Expected lab energy of the detected particle in this state, MeV.
    pub energy_lab_mev: f64,
    /// Kinematic branch: 1, or 2 for the lower-energy solution of a double-valued angle.
    pub branch: i32,
    /// Detection efficiency.
    pub efficiency: f64,
    /// Standard uncertainty of the efficiency.
    pub efficiency_err: f64,
    /// Solid angle in msr.
    pub solid_angle_msr: f64,
    /// Standard uncertainty of the solid angle in msr.
    pub solid_angle_err_msr: f64,
    /// Integrated luminosity (beam particles × target atoms per cm²) in 1/cm².
    pub luminosity_per_cm2: f64,
    /// Common normalisation relative standard uncertainty (charge, target and live
    /// fraction; or the monitor's), the same for every row of a run.
    pub norm_rel_err: f64,
    /// Beam particles, Q/(q e) (absolute normalisation).
    pub beam_particles: Option<f64>,
    /// Relative standard uncertainty of the beam particles.
    pub beam_particles_rel_err: Option<f64>,
    /// Target atoms per cm² along the beam (absolute normalisation).
    pub target_atoms_per_cm2: Option<f64>,
    /// Relative standard uncertainty of the target atoms per cm².
    pub target_atoms_rel_err: Option<f64>,
    /// Monitor luminosity over absolute luminosity (monitor mode with `compare_absolute`).
    pub luminosity_monitor_over_absolute: Option<f64>,
    /// Lab differential cross section dσ/dΩ_lab in mb/sr.
    pub dsdo_lab_mb_sr: f64,
    /// Statistical standard uncertainty of dσ/dΩ_lab in mb/sr.
    pub stat_err_lab_mb_sr: f64,
    /// Point-to-point systematic standard uncertainty of dσ/dΩ_lab in mb/sr.
    pub sys_err_lab_mb_sr: f64,
    /// dσ/dΩ_lab of one net count, mb/sr (1/(A ε f_live L ΔΩ)): turns a cross section into
    /// expected counts for a likelihood fit.
    pub dsdo_lab_mb_sr_per_count: f64,
    /// Lower end of the interval of a peak consistent with zero as dσ/dΩ_lab in mb/sr.
    pub dsdo_lab_lower_mb_sr: Option<f64>,
    /// Upper end of that interval as dσ/dΩ_lab in mb/sr.
    pub dsdo_lab_upper_mb_sr: Option<f64>,
    /// CM differential cross section dσ/dΩ_cm in mb/sr.
    pub dsdo_cm_mb_sr: f64,
    /// Statistical standard uncertainty of dσ/dΩ_cm in mb/sr.
    pub stat_err_mb_sr: f64,
    /// Point-to-point systematic standard uncertainty of dσ/dΩ_cm in mb/sr.
    pub sys_err_mb_sr: f64,
    /// dσ/dΩ_cm of one net count, mb/sr.
    pub dsdo_cm_mb_sr_per_count: Option<f64>,
    /// Lower end of the interval of a peak consistent with zero as dσ/dΩ_cm in mb/sr.
    pub dsdo_cm_lower_mb_sr: Option<f64>,
    /// Upper end of that interval as dσ/dΩ_cm in mb/sr.
    pub dsdo_cm_upper_mb_sr: Option<f64>,
    /// Rutherford dσ/dΩ_cm at the same CM angle, mb/sr (elastic states; empty otherwise).
    pub dsdo_rutherford_cm_mb_sr: Option<f64>,
    /// dσ/dΩ_cm over Rutherford (elastic states; empty otherwise).
    pub ratio_rutherford: Option<f64>,
    /// Which Rutherford cross section the two columns above use: `relativistic` or
    /// `non_relativistic` (the `transform_to_cm` stage's `rutherford`); a fit's curve
    /// divides by the same one.
    pub rutherford_convention: Option<String>,
}
