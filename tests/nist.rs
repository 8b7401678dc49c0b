//! The least-squares fitter against the NIST Statistical Reference Datasets for nonlinear
//! regression (NIST/ITL StRD; public-domain files copied into tests/reference/nist-strd/
//! with their README). Every dataset, from both NIST starting values: the certified
//! parameters to 6 significant digits, the certified standard deviations to 3, and the
//! certified residual sum of squares to 6 (the bounds the fitter is specified to meet).
//! One exception, from the arithmetic and not the method: Lanczos1's responses are exact to
//! 13 digits and its residuals are about 1e-13 of them, so in f64 each residual keeps only
//! ~3 correct digits; its SSR and the SDs (which scale with √SSR) are checked to 2 digits,
//! its parameters to 6 like every other dataset.

use std::path::Path;

use stages::physics::dual::{values_and_jacobian, Dual, Real};
use stages::physics::least_squares::{inverse_normal_matrix, minimise, LmOptions, Residuals};

use crate::common::repo_root;

/// A NIST StRD dataset as published.
struct Dataset {
    name: String,
    starts: [Vec<f64>; 2],
    certified: Vec<f64>,
    certified_sd: Vec<f64>,
    certified_ssr: f64,
    /// Predictors per observation.
    x: Vec<Vec<f64>>,
    /// Responses.
    y: Vec<f64>,
}

fn numbers(line: &str) -> Vec<f64> {
    line.split_whitespace().filter_map(|t| t.parse::<f64>().ok()).collect()
}

fn read(path: &Path) -> Dataset {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let lines: Vec<&str> = text.lines().collect();
    let mut starts = [Vec::new(), Vec::new()];
    let (mut certified, mut certified_sd) = (Vec::new(), Vec::new());
    for l in &lines {
        let t = l.trim_start();
        if t.starts_with('b') && t.contains('=') && t[1..].chars().next().is_some_and(|c| c.is_ascii_digit()) {
            let v = numbers(l.split_once('=').expect("has =").1);
            // Start 1, Start 2, certified value, certified standard deviation.
            assert_eq!(v.len(), 4, "{}: {l}", path.display());
            starts[0].push(v[0]);
            starts[1].push(v[1]);
            certified.push(v[2]);
            certified_sd.push(v[3]);
        }
    }
    let certified_ssr = lines
        .iter()
        .find(|l| l.starts_with("Residual Sum of Squares"))
        .map(|l| numbers(l.split_once(':').expect("colon").1)[0])
        .expect("certified SSR");
    let data_start = lines
        .iter()
        .position(|l| l.trim_start().strip_prefix("Data:").is_some_and(|rest| rest.trim_start().starts_with('y')))
        .expect("data header")
        + 1;
    let (mut x, mut y) = (Vec::new(), Vec::new());
    for l in &lines[data_start..] {
        let v = numbers(l);
        if v.len() >= 2 {
            y.push(v[0]);
            x.push(v[1..].to_vec());
        }
    }
    let name = path.file_stem().expect("name").to_string_lossy().into_owned();
    Dataset { name, starts, certified, certified_sd, certified_ssr, x, y }
}

/// The NIST model functions, as printed in each dataset file.
fn model<T: Real>(name: &str, x: &[f64], b: &[T]) -> T {
    let c = T::cst;
    let x0 = x[0];
    let pi = std::f64::consts::PI;
    match name {
        "Misra1a" => b[0] * (c(1.0) - (-(b[1] * x0)).exp()),
        "Misra1b" => b[0] * (c(1.0) - (b[1] * (0.5 * x0) + 1.0).powf(-2.0)),
        "Misra1c" => b[0] * (c(1.0) - (b[1] * (2.0 * x0) + 1.0).powf(-0.5)),
        "Misra1d" => b[0] * b[1] * x0 / (b[1] * x0 + 1.0),
        "Chwirut1" | "Chwirut2" => (-(b[0] * x0)).exp() / (b[1] + b[2] * x0),
        "Lanczos1" | "Lanczos2" | "Lanczos3" => {
            b[0] * (-(b[1] * x0)).exp() + b[2] * (-(b[3] * x0)).exp() + b[4] * (-(b[5] * x0)).exp()
        }
        "Gauss1" | "Gauss2" | "Gauss3" => {
            let g = |a: T, m: T, w: T| a * (-((c(x0) - m) * (c(x0) - m)) / (w * w)).exp();
            b[0] * (-(b[1] * x0)).exp() + g(b[2], b[3], b[4]) + g(b[5], b[6], b[7])
        }
        "DanWood" => b[0] * c(x0).pow(b[1]),
        "Kirby2" => (b[0] + b[1] * x0 + b[2] * (x0 * x0)) / (b[3] * x0 + b[4] * (x0 * x0) + 1.0),
        "Hahn1" | "Thurber" => {
            (b[0] + b[1] * x0 + b[2] * x0.powi(2) + b[3] * x0.powi(3))
                / (b[4] * x0 + b[5] * x0.powi(2) + b[6] * x0.powi(3) + 1.0)
        }
        // log[y] = b1 - b2*x1 * exp[-b3*x2]; the response is log(y) (see `response`).
        "Nelson" => b[0] - b[1] * x0 * (-(b[2] * x[1])).exp(),
        "MGH17" => b[0] + b[1] * (-(b[3] * x0)).exp() + b[2] * (-(b[4] * x0)).exp(),
        "Roszman1" => b[0] - b[1] * x0 - (b[2] / (c(x0) - b[3])).atan() / pi,
        "ENSO" => {
            let w = 2.0 * pi * x0;
            let per = |p: T| c(w) / p;
            b[0] + b[1] * (w / 12.0).cos()
                + b[2] * (w / 12.0).sin()
                + b[4] * per(b[3]).cos()
                + b[5] * per(b[3]).sin()
                + b[7] * per(b[6]).cos()
                + b[8] * per(b[6]).sin()
        }
        "MGH09" => b[0] * (b[1] * x0 + x0 * x0) / (b[2] * x0 + b[3] + x0 * x0),
        "BoxBOD" => b[0] * (c(1.0) - (-(b[1] * x0)).exp()),
        "Rat42" => b[0] / ((b[1] - b[2] * x0).exp() + 1.0),
        "MGH10" => b[0] * (b[1] / (b[2] + x0)).exp(),
        "Eckerle4" => (b[0] / b[1]) * ((c(x0) - b[2]) / b[1] * ((c(x0) - b[2]) / b[1]) * -0.5).exp(),
        "Rat43" => b[0] / ((b[1] - b[2] * x0).exp() + 1.0).pow(c(1.0) / b[3]),
        "Bennett5" => b[0] * (b[1] + x0).pow(-(c(1.0) / b[2])),
        other => panic!("no model for {other}"),
    }
}

fn response(name: &str, y: f64) -> f64 {
    if name == "Nelson" {
        y.ln()
    } else {
        y
    }
}

impl Residuals for Dataset {
    fn len(&self) -> usize {
        self.y.len()
    }
    fn eval(&self, p: &[f64], r: &mut [f64], jac: &mut [f64]) -> bool {
        let residual = |i: usize, b: &[Dual]| model(&self.name, &self.x[i], b) - response(&self.name, self.y[i]);
        values_and_jacobian(p, residual, r, jac);
        true
    }
}

#[test]
fn fitter_reproduces_every_nist_strd_nonlinear_dataset_from_both_starts() {
    let dir = repo_root().join("tests/reference/nist-strd");
    let mut paths: Vec<_> = std::fs::read_dir(&dir)
        .expect("NIST folder")
        .flatten()
        .map(|e| e.path())
        .filter(|p| p.extension().is_some_and(|e| e == "dat"))
        .collect();
    paths.sort();
    assert_eq!(paths.len(), 27, "the 27 NIST StRD nonlinear datasets");
    let mut failures = Vec::new();
    for path in &paths {
        let d = read(path);
        let (m, n) = (d.y.len(), d.certified.len());
        for (k, start) in d.starts.iter().enumerate() {
            let fit = minimise(&d, start, &LmOptions::default());
            let what = format!("{} start {}", d.name, k + 1);
            if !fit.termination.converged() {
                failures
                    .push(format!("{what}: stopped with {:?} after {} iterations", fit.termination, fit.iterations));
                continue;
            }
            // Significant digits agreeing: the log relative error of NIST's own assessments.
            // Required: 6 for the parameters and the SSR (NIST certifies 11; 6 is what a
            // careful double-precision solver reaches on the hardest sets), 3 for the standard
            // deviations (they come from the curvature at the minimum, known to fewer
            // digits); Lanczos1 2 and 2: its certified SSR is 1.4e-25, residuals at the
            // round-off of double precision, so the SSR and the deviations built from it carry
            // round-off only.
            let lre = |got: f64, want: f64| -((got - want).abs() / want.abs()).log10();
            let (sd_digits_needed, ssr_digits_needed) = if d.name == "Lanczos1" { (2.0, 2.0) } else { (3.0, 6.0) };
            let s2 = fit.ssr / (m - n) as f64;
            let inv = inverse_normal_matrix(&fit.jacobian, m, n);
            for j in 0..n {
                let digits = lre(fit.params[j], d.certified[j]);
                if digits < 6.0 {
                    failures.push(format!(
                        "{what}: b{} = {} vs certified {} ({digits:.1} digits)",
                        j + 1,
                        fit.params[j],
                        d.certified[j]
                    ));
                }
                let sd = inv.as_ref().map_or(f64::NAN, |inv| (s2 * inv[j * n + j]).sqrt());
                let sd_digits = lre(sd, d.certified_sd[j]);
                if sd_digits.is_nan() || sd_digits < sd_digits_needed {
                    failures.push(format!(
                        "{what}: sd(b{}) = {sd} vs certified {} ({sd_digits:.1} digits)",
                        j + 1,
                        d.certified_sd[j]
                    ));
                }
            }
            if lre(fit.ssr, d.certified_ssr) < ssr_digits_needed {
                failures.push(format!("{what}: SSR {} vs certified {}", fit.ssr, d.certified_ssr));
            }
        }
    }
    assert!(failures.is_empty(), "{} problems:\n{}", failures.len(), failures.join("\n"));
}

#[test]
fn peak_fit_reproduces_nist_gauss1_to_gauss3() {
    // The spectrum peak fit (two Gaussians on an exponential background, the model of
    // stages::physics::peak_fit) against NIST StRD Gauss1, Gauss2 and Gauss3, from both
    // NIST starts. Its parameters are NIST's with s = b5/√2 and s = b8/√2; NIST's standard
    // deviations scale the curvature errors by √(SSR/(n − p)) (the peak fit's own errors
    // are unscaled, because its weights are the bin errors). Certified values to 6 digits,
    // their standard deviations to 3.
    use stages::physics::peak_fit::{fit_peaks, Background, PeakModel};
    let model = PeakModel { background: Background::Exponential, peaks: 2 };
    let r2 = std::f64::consts::SQRT_2;
    let to_ours = |b: &[f64]| vec![b[0], b[1], b[2], b[3], b[4] / r2, b[5], b[6], b[7] / r2];
    for name in ["Gauss1", "Gauss2", "Gauss3"] {
        let d = read(&repo_root().join(format!("tests/reference/nist-strd/{name}.dat")));
        let x: Vec<f64> = d.x.iter().map(|x| x[0]).collect();
        let ones = vec![1.0; x.len()];
        for (k, start) in d.starts.iter().enumerate() {
            let fit = fit_peaks(&model, &x, &d.y, &ones, &to_ours(start), 1.0);
            assert!(fit.termination.converged(), "{name} start {}: {:?}", k + 1, fit.termination);
            let want = to_ours(&d.certified);
            let want_sd = to_ours(&d.certified_sd);
            let scale = (fit.chi2 / fit.ndf as f64).sqrt();
            let errors = fit.errors.clone().expect("regular curvature matrix");
            for j in 0..8 {
                let digits = -((fit.params[j] - want[j]).abs() / want[j].abs()).log10();
                assert!(digits >= 6.0, "{name} start {}: parameter {j} {} vs {}", k + 1, fit.params[j], want[j]);
                let sd = errors[j] * scale;
                let sd_digits = -((sd - want_sd[j]).abs() / want_sd[j]).log10();
                assert!(sd_digits >= 3.0, "{name} start {}: sd {j} {sd} vs {}", k + 1, want_sd[j]);
            }
            // 1e-9 (tightened from 1e-6): NIST gives the SSR to 11 digits, and at the minimum
            // it is second order in the parameters' error (measured 2.5e-11).
            assert!((fit.chi2 / d.certified_ssr - 1.0).abs() < 1e-9, "{name}: SSR {}", fit.chi2);
        }
    }
}
