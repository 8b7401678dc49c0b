//! Benchmark of the optical model and of an optical-model fit (release build, one thread):
//!     cargo bench -p xsflow-stages --bench theory
//! Prints medians; the targets (issue: theory and fitting) are one cross section of 24 MeV
//! alpha particles on 58Ni at 170 angles with automatic numerics ≤ 1 ms, and a fit of six
//! potential parameters to 60 points ≤ 0.5 s. The data of the fit are synthetic (invented
//! parameters, 3 % invented errors, fixed seed).
//!
//! Issue 11 (Levenberg–Marquardt as an argmin `Solver` under argmin's `Executor`), medians
//! on an AMD EPYC, 2 logical cores, shared with other builds (load average 3.5–6, so the
//! spread between runs is some 15 %); before and after run back to back at load 3.5:
//!     optical model, accuracy 1e-4:  before 0.495 ms,  after 0.494 ms
//!     optical model, accuracy 1e-6:  before 1.777 ms,  after 1.826 ms (unchanged code)
//!     fit of 6 parameters:           before 213.2 ms,  after 182.4 ms and 191.5 ms
//! (a first "before" at load 5.5 gave 632.6 ms); the same 23 iterations, 128 model
//! evaluations and parameters, so the argmin machinery costs nothing measurable here.
//!
//! Issue 16 (spin-½ optical model): one curve of 30 MeV protons on 58Ni with real and
//! imaginary spin-orbit terms (sample-runs/proton-ni58/theory-optical.yaml), 170 angles,
//! accuracy 1e-4, target ≤ 2 ms: median 0.434 ms over 300 runs (l_max 32, step 0.113 fm;
//! against very fine numerics 3.7e-5 relative in dσ/dΩ, 5.5e-5 absolute in A_y), on an AMD
//! EPYC, 2 logical cores, load average 7.6 from other builds. Measured with
//! `cargo test --workspace --bench theory` (the test profile, where xsflow-stages is built
//! at opt-level 2; the 4He curve at 1e-4 took 0.506 ms there against 0.494 ms in release
//! above), since a release build of the workspace was not at hand.

use std::time::Instant;

use stages::fit::{FitData, FitModelConfig};
use stages::physics::synthetic::Rng;
use stages::theory::ModelConfig;

const NI58: &str = "
model: optical
reaction: { beam: 4He, target: 58Ni, energy_mev: 24.0 }
potential:
  real:         { depth_mev: 150.0, r0_fm: 1.20, a_fm: 0.60 }
  imag_volume:  { depth_mev: 20.0,  r0_fm: 1.40, a_fm: 0.50 }
  imag_surface: { depth_mev: 5.0,   r0_fm: 1.35, a_fm: 0.50 }
  coulomb:      { r0_fm: 1.30 }
";

/// The proton demo model: 30 MeV p on 58Ni with real and imaginary spin-orbit terms.
const PROTON: &str = include_str!("../../sample-runs/proton-ni58/theory-optical.yaml");

const FIT: &str = "
model: optical
reaction: { beam: 4He, target: 58Ni, energy_mev: 24.0 }
potential:
  real:         { depth_mev: 140.0, r0_fm: 1.24, a_fm: 0.56 }
  imag_volume:  { depth_mev: 25.0,  r0_fm: 1.35, a_fm: 0.45 }
  imag_surface: { depth_mev: 5.0,   r0_fm: 1.35, a_fm: 0.50 }
  coulomb:      { r0_fm: 1.30 }
free:
  real.depth_mev: {}
  real.r0_fm: {}
  real.a_fm: {}
  imag_volume.depth_mev: {}
  imag_volume.r0_fm: {}
  imag_volume.a_fm: {}
fit: { normalisation: fixed }
";

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let cpu = std::fs::read_to_string("/proc/cpuinfo")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("model name"))
                .map(|l| l.split(':').nth(1).unwrap_or("").trim().to_string())
        })
        .unwrap_or_else(|| "unknown CPU".into());
    println!(
        "machine: {cpu}, {} logical cores; single thread",
        std::thread::available_parallelism().map_or(1, |n| n.get())
    );

    let angles: Vec<f64> = (0..170).map(|i| 10.0 + 160.0 * f64::from(i) / 169.0).collect();
    for (label, yaml, accuracies) in
        [("4He+58Ni 24 MeV", NI58, &["1.0e-4", "1.0e-6"][..]), ("p+58Ni 30 MeV, spin-orbit", PROTON, &["1.0e-4"][..])]
    {
        time_curve(label, yaml, accuracies, &angles)?;
    }
    let model: ModelConfig = serde_yaml::from_str(NI58)?;

    // Synthetic data: 60 angles, the true potential of NI58, 3 % errors, fixed seed.
    let theta: Vec<f64> = (0..60).map(|i| 10.0 + 160.0 * f64::from(i) / 59.0).collect();
    let truth = model.evaluate(&theta).map_err(|p| format!("{p:?}"))?;
    let mut rng = Rng::new(2026);
    let y: Vec<f64> = truth.rows.iter().map(|r| r.dsdo_cm_mb_sr * (1.0 + 0.03 * rng.normal())).collect();
    let data = FitData {
        err_mb_sr: truth.rows.iter().map(|r| 0.03 * r.dsdo_cm_mb_sr).collect(),
        dsdo_cm_mb_sr: y,
        norm_rel_err: vec![0.0; 60],
        labels: (0..60).map(|i| format!("p{i}")).collect(),
        theta_cm_deg: theta,
        rutherford_convention: Default::default(),
        counts: Vec::new(),
    };
    let config: FitModelConfig = serde_yaml::from_str(FIT)?;
    let fit = config.build(None).map_err(|p| format!("{p:?}"))?;
    let mut times = Vec::new();
    let mut last = None;
    for _ in 0..5 {
        let t = Instant::now();
        let (report, _) = fit.run(&data, "elastic", "optical")?;
        times.push(t.elapsed().as_secs_f64());
        last = Some(report);
    }
    let r = last.ok_or("no fit")?;
    println!(
        "fit of 6 optical-model parameters to 60 points: median {:.1} ms over {} fits; converged {} ({}), {} iterations, {} model evaluations, chi2/ndf {:.3}",
        median(times.clone()) * 1e3,
        times.len(),
        r.converged,
        r.termination,
        r.iterations,
        r.evaluations,
        r.chi2_per_ndf.unwrap_or(f64::NAN)
    );
    for p in &r.parameters {
        println!("  {:<24} {:>12.5} ± {}", p.name, p.value, p.error.map_or("-".into(), |e| format!("{e:.5}")));
    }
    Ok(())
}

/// Time one model curve at each accuracy (median of 300) and compare it with very fine
/// numerics (accuracy 1e-9 and a quarter of its step): dσ/dΩ relative, A_y absolute.
fn time_curve(label: &str, yaml: &str, accuracies: &[&str], angles: &[f64]) -> Result<(), Box<dyn std::error::Error>> {
    let with = |numerics: String| -> Result<ModelConfig, serde_yaml::Error> {
        serde_yaml::from_str(&format!("{yaml}numerics: {{ {numerics} }}\n"))
    };
    let h0 = with("accuracy: 1.0e-9".into())?.evaluate(angles).map_err(|p| format!("{p:?}"))?.step_fm.unwrap_or(0.01);
    let fine =
        with(format!("accuracy: 1.0e-9, step_fm: {}", h0 / 4.0))?.evaluate(angles).map_err(|p| format!("{p:?}"))?;
    for accuracy in accuracies {
        let model = with(format!("accuracy: {accuracy}"))?;
        let curve = model.evaluate(angles).map_err(|p| format!("{p:?}"))?;
        let mut times = Vec::new();
        for _ in 0..300 {
            let t = Instant::now();
            let c = model.evaluate(angles).map_err(|p| format!("{p:?}"))?;
            times.push(t.elapsed().as_secs_f64());
            assert_eq!(c.rows.len(), angles.len());
        }
        let (h, (ra, _)) = (curve.step_fm.unwrap_or(0.0), curve.matching_radii_fm.unwrap_or((0.0, 0.0)));
        let pairs = || curve.rows.iter().zip(&fine.rows);
        let err =
            pairs().map(|(a, b)| ((a.dsdo_cm_mb_sr - b.dsdo_cm_mb_sr) / b.dsdo_cm_mb_sr).abs()).fold(0.0, f64::max);
        let err_ay = pairs()
            .filter_map(|(a, b)| Some((a.analyzing_power? - b.analyzing_power?).abs()))
            .reduce(f64::max)
            .map_or_else(|| "no".into(), |e| format!("{e:.2e}"));
        println!(
            "optical model {label}, {} angles, accuracy {accuracy}: median {:.3} ms over {} runs \
             (l_max {}, step {:.5} fm, matching at {:.2} fm); largest error against very fine numerics \
             {:.2e} relative (dσ/dΩ), {} absolute (A_y)",
            angles.len(),
            median(times.clone()) * 1e3,
            times.len(),
            curve.l_max,
            h,
            ra,
            err,
            err_ay
        );
    }
    Ok(())
}
