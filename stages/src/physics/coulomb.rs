//! Coulomb wave functions F_L(η, ρ), G_L(η, ρ) and their ρ-derivatives for L = 0 … L_max,
//! the Coulomb phase shifts σ_L, and Legendre polynomials: what partial-wave scattering from
//! a charged (or, with η = 0, a neutral) nucleus needs.
//!
//! Method (Steed's; NIST DLMF §33.8; A. R. Barnett, D. H. Feng, J. W. Steed, L. J. B.
//! Goldfarb, Comput. Phys. Commun. 8 (1974) 377 — citation from memory), written from the
//! mathematics:
//! 1. CF1 (DLMF 33.8.1) gives f = F'_L/F_L at L = L_max and, from the signs of its
//!    denominators, the sign of F_{L_max};
//! 2. the recurrences (DLMF 33.4.4) carry F and F' down to L = 0, unnormalised;
//! 3. CF2 (DLMF 33.8.2) gives p + iq = (H⁺)'/H⁺ at L = 0, H⁺ = G + iF;
//! 4. the Wronskian F'G − FG' = 1 (DLMF 33.2.12) fixes the scale:
//!    F_0 = ±[q + (f_0 − p)²/q]^(-1/2), G_0 = (f_0 − p) F_0 / q, G'_0 = p G_0 − q F_0;
//! 5. G and G' go up from L = 0 by the same recurrences (stable upward for G).
//!
//! CF2 converges where ρ lies outside the L = 0 turning point (ρ > η + √(η² + …), roughly
//! ρ > 2η); elastic nuclear scattering matches well outside it. The Wronskian of every L
//! is checked and reported.

use num_complex::Complex64;

/// Why the Coulomb functions could not be computed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum CoulombError {
    /// ρ must be > 0 and η finite.
    #[error("Coulomb functions need ρ > 0 and finite η; found ρ = {rho}, η = {eta}")]
    Domain {
        /// η.
        eta: f64,
        /// ρ.
        rho: f64,
    },
    /// A continued fraction did not converge (CF2 fails deep inside the turning point).
    #[error("continued fraction {which} did not converge for η = {eta}, ρ = {rho} (ρ is probably inside the Coulomb turning point 2η; match at a larger radius)")]
    NoConvergence {
        /// CF1 or CF2.
        which: &'static str,
        /// η.
        eta: f64,
        /// ρ.
        rho: f64,
    },
}

/// F_L, G_L, F'_L, G'_L for L = 0 … L_max at one (η, ρ).
#[derive(Debug, Clone, PartialEq)]
pub struct CoulombWaves {
    /// Regular functions F_L.
    pub f: Vec<f64>,
    /// Irregular functions G_L (may overflow to infinity deep inside the barrier).
    pub g: Vec<f64>,
    /// dF_L/dρ.
    pub fp: Vec<f64>,
    /// dG_L/dρ.
    pub gp: Vec<f64>,
    /// Largest |F'G − FG' − 1| over the L where all four are finite (DLMF 33.2.12).
    pub wronskian_err: f64,
}

const TINY: f64 = 1e-300;
/// Convergence of a continued fraction: |Δ − 1| below a few units of rounding.
const EPS: f64 = 4.0 * f64::EPSILON;
const MAX_TERMS: usize = 2_000_000;

/// F'_L/F_L at one L by CF1 with the modified Lentz method, and the sign of F_L
/// (W. J. Lentz, Appl. Opt. 15 (1976) 668; I. J. Thompson, A. R. Barnett, J. Comput. Phys.
/// 64 (1986) 490 for the modification).
fn cf1(eta: f64, rho: f64, l: f64) -> Result<(f64, f64), CoulombError> {
    let s = |k: f64| k / rho + eta / k;
    let r2 = |k: f64| 1.0 + eta * eta / (k * k);
    let mut f = s(l + 1.0);
    if f == 0.0 {
        f = TINY;
    }
    let (mut c, mut d) = (f, 0.0);
    let mut sign = 1.0;
    for j in 1..MAX_TERMS {
        let k = l + j as f64;
        let (a, b) = (-r2(k), s(k) + s(k + 1.0));
        d = b + a * d;
        if d == 0.0 {
            d = TINY;
        }
        c = b + a / c;
        if c == 0.0 {
            c = TINY;
        }
        d = 1.0 / d;
        if d < 0.0 {
            sign = -sign;
        }
        let delta = c * d;
        f *= delta;
        if (delta - 1.0).abs() < EPS {
            return Ok((f, sign));
        }
    }
    Err(CoulombError::NoConvergence { which: "CF1", eta, rho })
}

/// p + iq = (H⁺_0)'/H⁺_0 by CF2 (DLMF 33.8.2 with ℓ = 0):
///     c + (i/ρ) · ab / (2(ρ − η + i) + (a+1)(b+1) / (2(ρ − η + 2i) + …)),
///     a = 1 + iη, b = iη, c = i(1 − η/ρ).
fn cf2(eta: f64, rho: f64) -> Result<Complex64, CoulombError> {
    let i = Complex64::i();
    let (a, b) = (Complex64::new(1.0, eta), Complex64::new(0.0, eta));
    // Complex division squares the modulus, so the guard value stays above 1e-154.
    let tiny = Complex64::new(1e-150, 0.0);
    let mut f = tiny;
    let (mut c, mut d) = (f, Complex64::new(0.0, 0.0));
    for j in 1..MAX_TERMS {
        let jf = j as f64;
        let aj = (a + (jf - 1.0)) * (b + (jf - 1.0));
        let bj = (Complex64::new(rho - eta, jf)) * 2.0;
        d = bj + aj * d;
        if d.norm() == 0.0 {
            d = tiny;
        }
        c = bj + aj / c;
        if c.norm() == 0.0 {
            c = tiny;
        }
        d = d.inv();
        let delta = c * d;
        f *= delta;
        if (delta - 1.0).norm() < EPS {
            return Ok(i * (1.0 - eta / rho) + i / rho * f);
        }
    }
    Err(CoulombError::NoConvergence { which: "CF2", eta, rho })
}

/// Coulomb wave functions for L = 0 … `l_max` (see the module text for the method). For
/// η = 0 they are the Riccati–Bessel functions F_L = ρ j_L(ρ), G_L = −ρ y_L(ρ).
///
/// # Errors
/// ρ ≤ 0 or a non-finite input; a continued fraction that does not converge.
pub fn coulomb_waves(eta: f64, rho: f64, l_max: usize) -> Result<CoulombWaves, CoulombError> {
    if !(rho > 0.0 && rho.is_finite() && eta.is_finite()) {
        return Err(CoulombError::Domain { eta, rho });
    }
    let n = l_max + 1;
    let (fcf, sign) = cf1(eta, rho, l_max as f64)?;
    let (mut f, mut fp) = (vec![0.0; n], vec![0.0; n]);
    // Downward from a start of the right sign, rescaling to stay inside f64.
    f[l_max] = sign * 1e-200;
    fp[l_max] = fcf * f[l_max];
    for l in (1..=l_max).rev() {
        let lf = l as f64;
        let (s, r) = (lf / rho + eta / lf, (1.0 + eta * eta / (lf * lf)).sqrt());
        f[l - 1] = (s * f[l] + fp[l]) / r;
        fp[l - 1] = s * f[l - 1] - r * f[l];
        if f[l - 1].abs() > 1e200 {
            for k in l - 1..n {
                f[k] *= 1e-200;
                fp[k] *= 1e-200;
            }
        }
    }
    let pq = cf2(eta, rho)?;
    let (p, q) = (pq.re, pq.im);
    let f0 = fp[0] / f[0];
    let w = 1.0 / (q + (f0 - p) * (f0 - p) / q).sqrt();
    let scale = w / f[0].abs();
    for k in 0..n {
        f[k] *= scale;
        fp[k] *= scale;
    }
    let (mut g, mut gp) = (vec![0.0; n], vec![0.0; n]);
    g[0] = (f0 - p) * f[0] / q;
    gp[0] = p * g[0] - q * f[0];
    for l in 1..n {
        let lf = l as f64;
        let (s, r) = (lf / rho + eta / lf, (1.0 + eta * eta / (lf * lf)).sqrt());
        g[l] = (s * g[l - 1] - gp[l - 1]) / r;
        gp[l] = r * g[l - 1] - s * g[l];
    }
    let wronskian_err = (0..n)
        .filter(|&l| {
            f[l].is_finite() && g[l].is_finite() && fp[l].is_finite() && gp[l].is_finite() && g[l].abs() < 1e150
        })
        .map(|l| (fp[l] * g[l] - f[l] * gp[l] - 1.0).abs())
        .fold(0.0, f64::max);
    Ok(CoulombWaves { f, g, fp, gp, wronskian_err })
}

/// Coulomb phase shifts σ_L = arg Γ(L + 1 + iη) for L = 0 … `l_max` (DLMF 33.2.10), on the
/// continuous branch: σ_0 = Im ln Γ(1 + iη) from Stirling's series after shifting the
/// argument by 16 (DLMF 5.11.1, 5.5.1), then σ_L = σ_{L−1} + atan(η/L).
pub fn coulomb_phases(eta: f64, l_max: usize) -> Vec<f64> {
    let shift = 16.0;
    let z = Complex64::new(1.0 + shift, eta);
    // ln Γ(z) ≈ (z − ½) ln z − z + ½ ln 2π + Σ B_2n / (2n(2n−1) z^(2n−1)).
    let bernoulli = [1.0 / 6.0, -1.0 / 30.0, 1.0 / 42.0, -1.0 / 30.0, 5.0 / 66.0, -691.0 / 2730.0, 7.0 / 6.0];
    let mut series = (z - 0.5) * z.ln() - z + 0.5 * (2.0 * std::f64::consts::PI).ln();
    for (k, b) in bernoulli.iter().enumerate() {
        let n2 = 2.0 * (k as f64 + 1.0);
        series += b / (n2 * (n2 - 1.0)) / z.powf(n2 - 1.0);
    }
    let shifted: f64 = (0..16).map(|k| (eta / (1.0 + k as f64)).atan()).sum();
    let mut sigma = vec![series.im - shifted; l_max + 1];
    for l in 1..=l_max {
        sigma[l] = sigma[l - 1] + (eta / l as f64).atan();
    }
    sigma
}

/// Legendre polynomials P_0(x) … P_{l_max}(x) by Bonnet's recurrence
/// (L+1) P_{L+1} = (2L+1) x P_L − L P_{L−1} (DLMF 18.9.1).
pub fn legendre(x: f64, l_max: usize) -> Vec<f64> {
    let mut p = vec![1.0; l_max + 1];
    if l_max >= 1 {
        p[1] = x;
    }
    for l in 1..l_max {
        let lf = l as f64;
        p[l + 1] = ((2.0 * lf + 1.0) * x * p[l] - lf * p[l - 1]) / (lf + 1.0);
    }
    p
}

/// First associated Legendre functions P_l^1(cos θ) = sin θ · dP_l/dx at x = cos θ for
/// l = 0 … l_max, without the Condon–Shortley phase (so P_1^1 = sin θ ≥ 0 on [0, π]), by the
/// recurrence in l at fixed order m = 1 (DLMF 14.10.3 with μ = 1):
///     l P_{l+1}^1 = (2l+1) x P_l^1 − (l+1) P_{l−1}^1,   P_0^1 = 0, P_1^1 = sin θ.
/// (DLMF 14.7.8 and scipy's `lpmv` carry the factor (−1)^m; the recurrence is linear, so
/// the sign convention only fixes the start.) θ in rad.
pub fn legendre_first_associated(theta_rad: f64, l_max: usize) -> Vec<f64> {
    let (x, sin) = (theta_rad.cos(), theta_rad.sin());
    let mut p = vec![0.0; l_max + 1];
    if l_max >= 1 {
        p[1] = sin;
    }
    for l in 1..l_max {
        let lf = l as f64;
        p[l + 1] = ((2.0 * lf + 1.0) * x * p[l] - (lf + 1.0) * p[l - 1]) / lf;
    }
    p
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn neutral_waves_are_sine_and_cosine() {
        // η = 0, L = 0: F = sin ρ, G = cos ρ (DLMF 33.5.1); L = 1: F = sin ρ/ρ − cos ρ.
        let w = coulomb_waves(0.0, 2.5, 1).expect("valid");
        // 1e-13 (the four checks): the continued fractions stop at 4ε ≈ 9e-16 and F, G, the
        // recurrence and the Wronskian take a few tens of operations more (measured 2e-16).
        assert_relative_eq!(w.f[0], 2.5f64.sin(), max_relative = 1e-13);
        assert_relative_eq!(w.g[0], 2.5f64.cos(), max_relative = 1e-13);
        assert_relative_eq!(w.f[1], 2.5f64.sin() / 2.5 - 2.5f64.cos(), max_relative = 1e-13);
        assert!(w.wronskian_err < 1e-13);
    }

    #[test]
    fn phases_follow_the_recurrence_and_vanish_without_charge() {
        // σ_0(0) = 0; σ_1 − σ_0 = atan η (DLMF 33.2.10 with Γ(z+1) = zΓ(z)).
        // 1e-15: σ_L(0) = arg Γ(L + 1) is 0; a few roundings of numbers below 1 at most.
        assert!(coulomb_phases(0.0, 3).iter().all(|s| s.abs() < 1e-15));
        let s = coulomb_phases(2.0, 1);
        // 1e-14: a difference of two phases of order 1, each rounded to ~2e-16.
        assert_relative_eq!(s[1] - s[0], 2f64.atan(), max_relative = 1e-14);
    }

    #[test]
    fn legendre_low_orders() {
        // P_2(x) = (3x² − 1)/2, P_3(x) = (5x³ − 3x)/2 (DLMF Table 18.3.1).
        let p = legendre(0.3, 3);
        // 1e-15 and 1e-14: two and four steps of the three-term recurrence, each rounding
        // once; P_3(0.3) = −0.3825 is a difference of numbers of order 1.
        assert_relative_eq!(p[2], (3.0 * 0.09 - 1.0) / 2.0, max_relative = 1e-15);
        assert_relative_eq!(p[3], (5.0 * 0.027 - 0.9) / 2.0, max_relative = 1e-14);
    }

    #[test]
    fn first_associated_legendre_low_orders() {
        // sin θ · P_l'(cos θ): P_1^1 = s, P_2^1 = 3xs, P_3^1 = (3/2)(5x² − 1)s (DLMF Table
        // 18.3.1 differentiated; no Condon–Shortley phase). (θ in rad)
        for theta in [0.0f64, 0.4, 1.3, 2.9, std::f64::consts::PI] {
            let (x, s) = (theta.cos(), theta.sin());
            let p = legendre_first_associated(theta, 3);
            // 1e-14 absolute: |P_l^1| ≤ 6 here and two steps of the recurrence each round
            // once.
            for (got, want) in p.iter().zip([0.0, s, 3.0 * x * s, 1.5 * (5.0 * x * x - 1.0) * s]) {
                assert!((got - want).abs() < 1e-14, "θ {theta}: {got} vs {want}");
            }
        }
    }
}
