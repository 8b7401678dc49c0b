//! Unit tests of the fit module: the optical keys, what `build` refuses, curve tables, the
//! Rutherford convention read from a table, and a Rutherford fit to exact data.

use approx::assert_relative_eq;
use polars::prelude::{Column, DataFrame};

use super::*;
use crate::physics::kinematics::{Channel, Masses};
use crate::physics::nuclide;

#[test]
fn optical_keys_round_trip_by_name() {
    let all = OpticalKey::all();
    assert_eq!(all.len(), 10);
    for k in &all {
        assert_eq!(OpticalKey::parse(&k.name()), Some(*k), "{}", k.name());
    }
    // (name, a length that must stay > 0)
    let cases =
        [("real.depth_mev", false), ("imag_surface.a_fm", true), ("imag_volume.r0_fm", true), ("coulomb.r0_fm", true)];
    for (name, length) in cases {
        assert_eq!(OpticalKey::parse(name).map(OpticalKey::is_length), Some(length), "{name}");
    }
    assert_eq!(OpticalKey::parse("real.depth"), None);
}

const OPTICAL: &str = "model: optical
reaction: { beam: 4He, target: 58Ni, energy_mev: 24.0 }
potential:
  real:         { depth_mev: 150.0, r0_fm: 1.20, a_fm: 0.60 }
  imag_volume:  { depth_mev: 20.0,  r0_fm: 1.40, a_fm: 0.50 }
  imag_surface: { depth_mev: 0.0,   r0_fm: 1.40, a_fm: 0.50 }
  coulomb:      { r0_fm: 1.30 }
free:
  real.depth_mev: { min: 20.0, max: 400.0 }
";

fn build(yaml: &str) -> Result<Fit, Vec<crate::Problem>> {
    let config: FitModelConfig = serde_yaml::from_str(yaml).expect("the case parses");
    config.build(None)
}

#[test]
fn build_refuses_each_bad_setting_with_its_key() {
    // (fit file, key of the problem)
    let cases = [
        ("model: legendre\norder: 61\n".to_string(), "order"),
        ("model: legendre\norder: 2\nfit: { normalisation: free }\n".to_string(), "fit.normalisation"),
        (
            "model: legendre\norder: 2\nfit: { theta_cm_range_deg: [40.0, 35.0] }\n".to_string(),
            "fit.theta_cm_range_deg",
        ),
        ("model: rutherford\nreaction: { beam: n, target: 58Ni, energy_mev: 10.0 }\n".to_string(), "reaction"),
        (OPTICAL.replace("real.depth_mev: {", "real.depth: {"), "free.real.depth"),
        (OPTICAL.replace("min: 20.0", "min: 160.0"), "free.real.depth_mev"),
        (OPTICAL.replace("a_fm: 0.60", "a_fm: -0.60"), "potential.real.a_fm"),
        // Fits of spin-½ models are issue 16, item 4: refused, not silently spin 0.
        (
            OPTICAL
                .replace("beam: 4He", "beam: p")
                .replace("  coulomb:", "  spin_orbit: { real: { depth_mev: 6.0, r0_fm: 1.0, a_fm: 0.7 } }\n  coulomb:"),
            "potential.spin_orbit",
        ),
        (format!("{OPTICAL}fit: {{ profile: [real.a_fm] }}\n"), "fit.profile[0]"),
        (format!("{OPTICAL}multi_start: {{ real.depth_mev: [100.0, 500.0] }}\n"), "multi_start.real.depth_mev[1]"),
    ];
    for (yaml, key) in cases {
        let problems = build(&yaml).err().unwrap_or_else(|| panic!("accepted:\n{yaml}"));
        assert!(problems.iter().any(|p| p.key == key), "{key} not among {problems:?}");
    }
    assert!(build(OPTICAL).is_ok());
}

#[test]
fn curve_tables_are_checked_and_interpolated_in_log_sigma() {
    // (angles, cross sections, accepted)
    let cases: [(Vec<f64>, Vec<f64>, bool); 5] = [
        (vec![10.0, 20.0], vec![1.0, 2.0], true),
        (vec![10.0], vec![1.0], false),
        (vec![20.0, 10.0], vec![1.0, 2.0], false),
        (vec![10.0, 10.0], vec![1.0, 2.0], false),
        (vec![10.0, 20.0], vec![1.0, 0.0], false),
    ];
    for (t, s, ok) in cases {
        assert_eq!(CurveTable::new(t.clone(), s).is_ok(), ok, "{t:?}");
    }
    // ln σ linear in angle: σ = e^{−θ/10} is exact between the points.
    let t: Vec<f64> = (0..5).map(|i| 10.0 * f64::from(i)).collect();
    let c = CurveTable::new(t.clone(), t.iter().map(|x| (-x / 10.0).exp()).collect()).expect("table");
    // 1e-14: two logarithms, a weighted mean of them and an exponential, a few roundings of
    // numbers of order 1.
    assert_relative_eq!(c.at(15.0).expect("inside"), (-1.5f64).exp(), max_relative = 1e-14);
    assert!(c.at(41.0).is_none());
}

fn table(conventions: &[&str]) -> DataFrame {
    let n = conventions.len();
    DataFrame::new_infer_height(vec![
        Column::new("state".into(), vec!["elastic"; n]),
        Column::new("theta_cm_deg".into(), (0..n).map(|i| 30.0 + 10.0 * i as f64).collect::<Vec<_>>()),
        Column::new("dsdo_cm_mb_sr".into(), vec![100.0; n]),
        Column::new("stat_err_mb_sr".into(), vec![1.0; n]),
        Column::new("sys_err_mb_sr".into(), vec![0.0; n]),
        Column::new("norm_rel_err".into(), vec![0.02; n]),
        Column::new(RUTHERFORD_CONVENTION.into(), conventions.to_vec()),
    ])
    .expect("table")
}

#[test]
fn the_rutherford_convention_is_read_from_the_table() {
    // (conventions of the rows, what the fit uses; None: refused)
    let cases: [(&[&str], Option<Convention>); 4] = [
        (&["relativistic", "relativistic"], Some(Convention::Relativistic)),
        (&["non_relativistic"], Some(Convention::NonRelativistic)),
        (&["relativistic", "non_relativistic"], None),
        (&["galilean"], None),
    ];
    for (rows, want) in cases {
        let got = FitData::from_table(&table(rows), "elastic").ok().map(|d| d.rutherford_convention);
        assert_eq!(got, want, "{rows:?}");
    }
    let without = table(&["relativistic"]).drop(RUTHERFORD_CONVENTION).expect("drop");
    let data = FitData::from_table(&without, "elastic").expect("data");
    assert_eq!(data.rutherford_convention, Convention::Relativistic);
}

#[test]
fn a_rutherford_fit_finds_the_scale_of_exact_data_in_either_convention() {
    // Data = 1.1 × Rutherford in the data's own convention: the free normalisation is 1.1
    // to the minimiser's tolerance, and the curve's ratio to Rutherford is 1.1 too.
    let (ma, mt) = (nuclide::parse("4He").expect("4He"), nuclide::parse("58Ni").expect("58Ni"));
    let masses = Masses {
        beam_mev: ma.nuclear_mass_mev(),
        target_mev: mt.nuclear_mass_mev(),
        ejectile_mev: ma.nuclear_mass_mev(),
        recoil_mev: mt.nuclear_mass_mev(),
    };
    let channel = Channel::new(masses, 24.0, 0.0).expect("channel");
    let fit = build("model: rutherford\nreaction: { beam: 4He, target: 58Ni, energy_mev: 24.0 }\n").expect("fit");
    for convention in Convention::ALL {
        let theta: Vec<f64> = (2..12).map(|i| 10.0 * f64::from(i)).collect();
        let y: Vec<f64> = theta.iter().map(|t| 1.1 * convention.cm_mb_sr(2, 28, &channel, t.to_radians())).collect();
        let data = FitData {
            err_mb_sr: y.iter().map(|v| 0.01 * v).collect(),
            norm_rel_err: vec![0.0; y.len()],
            labels: (0..y.len()).map(|i| format!("p{i}")).collect(),
            dsdo_cm_mb_sr: y,
            theta_cm_deg: theta,
            rutherford_convention: convention,
            counts: Vec::new(),
        };
        let (report, values) = fit.run(&data, "elastic", "rutherford").expect("fit runs");
        // 1e-9 (both): the relative step xtol = 1e-9 at which the minimiser stops; a scale
        // alone is a linear problem, solved in one step (measured 2e-16).
        assert_relative_eq!(report.parameters[0].value, 1.1, max_relative = 1e-9);
        let curve = fit.curve(&values, report.parameters[0].value, &[45.0], convention).expect("curve");
        assert_relative_eq!(curve[0].2.expect("ratio"), 1.1, max_relative = 1e-9);
    }
}

/// Data of state `elastic` at `theta_deg`: 100 ± 1 mb/sr, no normalisation error.
fn flat_data(theta_deg: &[f64]) -> FitData {
    let n = theta_deg.len();
    FitData {
        theta_cm_deg: theta_deg.to_vec(),
        dsdo_cm_mb_sr: vec![100.0; n],
        err_mb_sr: vec![1.0; n],
        norm_rel_err: vec![0.0; n],
        labels: (0..n).map(|i| format!("p{i}")).collect(),
        rutherford_convention: Convention::Relativistic,
        counts: Vec::new(),
    }
}

#[test]
fn a_fit_that_cannot_run_says_what_to_change() {
    let rutherford = "model: rutherford\nreaction: { beam: 4He, target: 58Ni, energy_mev: 24.0 }\n";
    let table = || CurveTable::new(vec![40.0, 60.0], vec![50.0, 10.0]).expect("table");
    let curve = || FitModelConfig::Curve { file: "c.csv".into(), fit: FitSettings::default() };
    // (fit, data angles, the whole message)
    let cases = [
        (
            build(&format!("{rutherford}fit: {{ theta_cm_range_deg: [170.0, 175.0] }}\n")).expect("fit"),
            vec![30.0, 40.0],
            "no data point of state elastic has θ_cm in [170, 175]°",
        ),
        (
            build(&format!("{rutherford}fit: {{ normalisation: prior }}\n")).expect("fit"),
            vec![30.0, 40.0],
            "normalisation: prior needs a normalisation error: the rows have norm_rel_err 0; \
             set fit.normalisation_rel_err or use normalisation: fixed",
        ),
        (
            curve().build(Some(table())).expect("fit"),
            vec![30.0, 50.0],
            "data angle 30° lies outside the curve (40° to 60°)",
        ),
    ];
    for (fit, theta, message) in cases {
        let e = fit.run(&flat_data(&theta), "elastic", "case").expect_err(message);
        assert_eq!(e.to_string(), message);
    }
    // The curve of a curve model past its table, and an optical potential with a radius
    // that is not > 0 (the fit's bounds keep a minimisation away from it).
    let e = curve().build(Some(table())).expect("fit").curve(&[], 1.0, &[70.0], Convention::Relativistic);
    assert_eq!(
        e.expect_err("past the table").to_string(),
        "theta_cm_deg = 70 lies outside the table range [40, 60]; extend the table (no extrapolation is done)"
    );
    let optical =
        build(&OPTICAL.replace("real.depth_mev: {", "real.r0_fm: {").replace("min: 20.0, max: 400.0", "max: 2.0"))
            .expect("fit");
    let Model::Optical(om) = &optical.model else { panic!("an optical model") };
    assert_eq!(om.potential(&[-0.5]).expect_err("negative radius").to_string(), "real.r0_fm must be > 0, found -0.5");
}

#[test]
fn low_count_rows_enter_through_the_likelihood_as_configured() {
    // A constant (Legendre order 0) through seven rows read from a table with counts:
    // gross n, background b = 1, k = 0.5 mb/sr per count. On counts the best constant is
    // k (mean(n) − b) exactly (the Poisson likelihood of one mean; common practice); the
    // row with 0 gross counts is flagged upper_limit and enters on its counts in every mode.
    let gross = [3.0, 7.0, 2.0, 5.0, 4.0, 0.0, 6.0];
    let n = gross.len();
    let (k, b) = (0.5, 1.0);
    let column = |name: &str, v: Vec<f64>| Column::new(name.into(), v);
    let table = DataFrame::new_infer_height(vec![
        Column::new("state".into(), vec!["elastic"; n]),
        column("theta_cm_deg", (0..n).map(|i| 100.0 + 10.0 * i as f64).collect()),
        column("dsdo_cm_mb_sr", gross.iter().map(|g| k * (g - b)).collect()),
        column("stat_err_mb_sr", gross.iter().map(|g: &f64| k * (g + b).max(1.0).sqrt()).collect()),
        column("sys_err_mb_sr", vec![0.0; n]),
        column("norm_rel_err", vec![0.0; n]),
        column("counts_gross", gross.to_vec()),
        column("counts_background", vec![b; n]),
        column("dsdo_cm_mb_sr_per_count", vec![k; n]),
        Column::new("upper_limit".into(), gross.iter().map(|g| *g < 1.0).collect::<Vec<bool>>()),
    ])
    .expect("table");
    let data = FitData::from_table(&table, "elastic").expect("data");
    let mean = gross.iter().sum::<f64>() / n as f64;
    // (settings, Poisson points, whether the result is the likelihood's k (mean − b))
    let cases = [
        ("", 7, true),
        ("fit: { likelihood: poisson }", 7, true),
        ("fit: { poisson_below_counts: 4 }", 3, false),
        ("fit: { likelihood: gaussian }", 1, false),
    ];
    for (settings, poisson, exact) in cases {
        let fit = build(&format!("model: legendre\norder: 0\n{settings}\n")).expect("builds");
        let (report, _) = fit.run(&data, "elastic", "legendre").expect("fit runs");
        assert_eq!((report.points_poisson, report.points_gaussian), (poisson, n - poisson), "{settings}");
        let flagged = report.data.iter().find(|p| p.counts == Some(0.0)).expect("the zero-count row");
        assert_eq!(flagged.statistic, "poisson", "{settings}");
        if exact {
            // 1e-7: the minimiser's stopping tolerances (see physics::model_fit's tests).
            assert_relative_eq!(report.parameters[0].value, k * (mean - b), max_relative = 1e-7);
        }
    }
    let bad = build("model: legendre\norder: 0\nfit: { poisson_below_counts: 0 }\n").err().expect("refused");
    assert_eq!(bad[0].key, "fit.poisson_below_counts");
}
