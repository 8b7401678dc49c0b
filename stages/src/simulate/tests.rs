//! Unit tests of the simulation's set-up: expected counts worked by hand, the errors, and
//! the spectra's bookkeeping.

use std::collections::BTreeMap;

use approx::assert_relative_eq;

use super::*;
use crate::physics::synthetic::Rng;
use crate::setup::testing::setup;

/// L/Q of the test set-up (100 µg/cm² of M = 58 g/mol, q = 2) worked by hand:
/// 1e-4 · 6.02214076e23 / 58 / (2 · 1.602176634e-19) = 3.240279844932762e36 1/(cm² C).
const LUMINOSITY_PER_CM2_PER_C: f64 = 3.240_279_844_932_762e36;

fn options(events: f64, real_time_s: f64, dead_time: DeadTimeModel, resolving_time_us: f64) -> SimulateOptions {
    SimulateOptions {
        seed: 1,
        runs: 1,
        events,
        real_time_s,
        dead_time,
        resolving_time_us,
        background_fraction: 0.0,
        pulser_rate_per_s: 10.0,
    }
}

fn constant(dsdo_cm_mb_sr: f64) -> BTreeMap<String, StateTruth> {
    BTreeMap::from([("elastic".to_string(), StateTruth::Constant(dsdo_cm_mb_sr))])
}

#[test]
fn expected_counts_worked_by_hand() {
    // (detectors, dσ/dΩ_cm mb/sr, events, real time s, model, τ µs, expected arriving
    // counts per coulomb of each peak × its Jacobian dΩ_lab/dΩ_cm, and the live fraction,
    // both worked by hand: N/Q = (σ_cm/J) · 1e-27 cm²/mb · ΔΩ · ε · L/Q, f = 1/(1 + nτ)
    // or e^(−nτ) with n = events/T)
    let given = "{ id: A, theta_lab_deg: 40.0, aperture: { shape: given, solid_angle_msr: 1.0 }, efficiency: 0.5 }";
    let circle = "{ id: B, theta_lab_deg: 90.0, distance_mm: 100.0, aperture: { shape: circle, radius_mm: 100.0 } }";
    let cases = [
        // 1000 mb/sr · 1e-27 · 1e-3 sr · 0.5 · L/Q; 1e6 events in 1000 s at 1 µs: nτ = 1e-3.
        (
            format!("[{given}]"),
            1000.0,
            1e6,
            1000.0,
            DeadTimeModel::NonParalyzable,
            1.0,
            vec![1000.0 * 1e-27 * 1e-3 * 0.5 * LUMINOSITY_PER_CM2_PER_C],
            1.0 / 1.001,
        ),
        // Two detectors; the circle with r = d holds 2π(1 − 1/√2) sr. 3.6e7 events in
        // 3600 s at 10 µs: nτ = 0.1.
        (
            format!("[{given}, {circle}]"),
            20.0,
            3.6e7,
            3600.0,
            DeadTimeModel::Paralyzable,
            10.0,
            vec![
                20.0 * 1e-27 * 1e-3 * 0.5 * LUMINOSITY_PER_CM2_PER_C,
                20.0 * 1e-27
                    * 2.0
                    * std::f64::consts::PI
                    * (1.0 - std::f64::consts::FRAC_1_SQRT_2)
                    * LUMINOSITY_PER_CM2_PER_C,
            ],
            (-0.1f64).exp(),
        ),
    ];
    for (detectors, dsdo, events, real_time_s, model, tau_us, per_c_times_jacobian, live) in cases {
        let e = experiment(&setup(&detectors), &constant(dsdo)).expect("experiment");
        // 1e-14: products of a few numbers; the Jacobian is the shared kinematics'.
        assert_relative_eq!(e.luminosity_per_cm2_per_c, LUMINOSITY_PER_CM2_PER_C, max_relative = 1e-14);
        assert_eq!(e.peaks.len(), per_c_times_jacobian.len());
        for (p, want) in e.peaks.iter().zip(&per_c_times_jacobian) {
            let per_c = p.counts_per_luminosity_cm2 * e.luminosity_per_cm2_per_c;
            assert_relative_eq!(per_c * p.domega_lab_per_domega_cm, want, max_relative = 1e-13);
            assert_relative_eq!(p.dsdo_lab_mb_sr * p.domega_lab_per_domega_cm, dsdo, max_relative = 1e-14);
        }
        let run = run_numbers(&e, &options(events, real_time_s, model, tau_us), false);
        assert_relative_eq!(run.live_fraction, live, max_relative = 1e-15);
        // The charge gives the events asked for: Σ N/Q · Q = events.
        let total: f64 = run.peak_arrivals.iter().sum();
        assert_relative_eq!(total, events, max_relative = 1e-14);
        let per_c: f64 = e.peaks.iter().map(|p| p.counts_per_luminosity_cm2 * e.luminosity_per_cm2_per_c).sum();
        assert_relative_eq!(run.charge_c, events / per_c, max_relative = 1e-14);
    }
}

#[test]
fn a_state_without_truth_or_a_run_without_charge_state_is_an_error() {
    let s = setup("[{ id: A, theta_lab_deg: 40.0, aperture: { shape: given, solid_angle_msr: 1.0 } }]");
    let e = experiment(&s, &BTreeMap::new()).expect_err("no truth");
    assert_eq!(e, SimulateError::NoTruth { state: "elastic".into() });
    assert!(e.to_string().contains("--state-truth elastic=MB_SR"), "{e}");
    let e = experiment(&s, &constant(-1.0)).expect_err("negative");
    assert!(matches!(e, SimulateError::BadCrossSection { .. }), "{e}");
    let e = experiment(&s, &constant(0.0)).expect_err("nothing");
    assert_eq!(e, SimulateError::NoCounts);
    let mut no_q = s.clone();
    no_q.reaction.beam_charge_state = None;
    assert_eq!(experiment(&no_q, &constant(1.0)).expect_err("no q"), SimulateError::NoChargeState);
}

fn raw_plan(s: &Setup) -> RawPlan {
    let raw: crate::raw::RawConfig = serde_yaml::from_str(
        "{ columns: { detector: det, energy: adc }, overflow_channel: 4096, calibration: { all: { offset_mev: 0.0, gain_mev_per_channel: 0.01 } }, gates: { resolution_mev: 0.08 } }",
    )
    .expect("raw parses");
    raw.build(s).expect("raw builds")
}

#[test]
fn spectra_hold_every_arriving_event_and_poisson_counts_repeat_for_a_seed() {
    let s = setup(
        "[{ id: A, theta_lab_deg: 40.0, aperture: { shape: given, solid_angle_msr: 1.0 } }, { id: B, theta_lab_deg: 120.0, aperture: { shape: given, solid_angle_msr: 2.0 } }]",
    );
    let e = experiment(&s, &constant(100.0)).expect("experiment");
    let mut o = options(1e6, 3600.0, DeadTimeModel::Paralyzable, 2.0);
    o.background_fraction = 0.05;
    let run = run_numbers(&e, &o, true);
    let spectra = expected_spectra(&e, &run, &raw_plan(&s), o.background_fraction);
    // Peaks and background together are the events asked for (1e-9: sums of 8192 channels).
    let total = spectra.arriving.iter().sum::<f64>() + spectra.outside;
    assert_relative_eq!(total, 1e6, max_relative = 1e-9);
    // The peaks near 22–24 MeV are inside the 40.96 MeV of the channels.
    assert!(spectra.outside < 1e-6, "{}", spectra.outside);
    let draw = |seed| sample::poisson_counts(&mut Rng::new(seed), &spectra.arriving);
    assert_eq!(draw(5), draw(5), "same seed, same counts");
    assert_ne!(draw(5), draw(6), "another seed, other counts");
}
