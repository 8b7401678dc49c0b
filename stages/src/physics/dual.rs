//! Forward-mode automatic differentiation with dual numbers: a value and its gradient with
//! respect to up to [`MAX_PARAMS`] parameters, carried through arithmetic and the elementary
//! functions by the chain rule. Gives exact Jacobians for model functions written once,
//! generically over [`Real`] (L. B. Rall, Automatic Differentiation: Techniques and
//! Applications, Springer LNCS 120, 1981; common practice). Problems with more parameters
//! than one gradient holds are differentiated in chunks ([`values_and_jacobian`]).

use std::ops::{Add, Div, Mul, Neg, Sub};

/// Largest number of parameters one gradient carries; [`values_and_jacobian`] handles any
/// number by seeding this many at a time.
pub const MAX_PARAMS: usize = 12;

/// Values f_i(p) and the Jacobian ∂f_i/∂p_j (row-major, `values.len()` × `p.len()`) of
/// functions of any number of parameters, by forward mode in chunks: each pass seeds at most
/// [`MAX_PARAMS`] parameters as [`Dual::param`] and holds the others constant, so the
/// functions are evaluated ⌈n / MAX_PARAMS⌉ times (the "chunk mode" of forward
/// differentiation: J. Revels, M. Lubin, T. Papamarkou, arXiv:1607.07892, 2016, section 3;
/// common practice). `f(i, p)` is function i at the dual parameters `p`.
///
/// # Panics
/// If `jac.len() != values.len() * p.len()` (a programming error).
pub fn values_and_jacobian(p: &[f64], f: impl Fn(usize, &[Dual]) -> Dual, values: &mut [f64], jac: &mut [f64]) {
    let n = p.len();
    assert_eq!(jac.len(), values.len() * n, "the Jacobian is values × parameters");
    if n == 0 {
        values.iter_mut().enumerate().for_each(|(i, v)| *v = f(i, &[]).v);
        return;
    }
    for start in (0..n).step_by(MAX_PARAMS) {
        let width = MAX_PARAMS.min(n - start);
        let seeded: Vec<Dual> = p
            .iter()
            .enumerate()
            .map(|(j, v)| if (start..start + width).contains(&j) { Dual::param(*v, j - start) } else { Dual::cst(*v) })
            .collect();
        for (i, value) in values.iter_mut().enumerate() {
            let y = f(i, &seeded);
            *value = y.v;
            jac[i * n + start..i * n + start + width].copy_from_slice(&y.d[..width]);
        }
    }
}

/// A number usable in a model: `f64`, or [`Dual`] to carry derivatives.
pub trait Real:
    Copy
    + Add<Output = Self>
    + Sub<Output = Self>
    + Mul<Output = Self>
    + Div<Output = Self>
    + Neg<Output = Self>
    + Add<f64, Output = Self>
    + Sub<f64, Output = Self>
    + Mul<f64, Output = Self>
    + Div<f64, Output = Self>
{
    /// A constant.
    fn cst(v: f64) -> Self;
    /// The value without derivatives.
    fn value(self) -> f64;
    /// e^x.
    fn exp(self) -> Self;
    /// ln x.
    fn ln(self) -> Self;
    /// x^p for a constant p.
    fn powf(self, p: f64) -> Self;
    /// x^y for a variable exponent (x > 0).
    fn pow(self, y: Self) -> Self {
        (self.ln() * y).exp()
    }
    /// sin x.
    fn sin(self) -> Self;
    /// cos x.
    fn cos(self) -> Self;
    /// atan x.
    fn atan(self) -> Self;
    /// √x.
    fn sqrt(self) -> Self;
}

impl Real for f64 {
    fn cst(v: f64) -> Self {
        v
    }
    fn value(self) -> f64 {
        self
    }
    fn exp(self) -> Self {
        f64::exp(self)
    }
    fn ln(self) -> Self {
        f64::ln(self)
    }
    fn powf(self, p: f64) -> Self {
        f64::powf(self, p)
    }
    fn pow(self, y: Self) -> Self {
        f64::powf(self, y)
    }
    fn sin(self) -> Self {
        f64::sin(self)
    }
    fn cos(self) -> Self {
        f64::cos(self)
    }
    fn atan(self) -> Self {
        f64::atan(self)
    }
    fn sqrt(self) -> Self {
        f64::sqrt(self)
    }
}

/// A value with its gradient.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Dual {
    /// The value.
    pub v: f64,
    /// ∂value/∂p_i.
    pub d: [f64; MAX_PARAMS],
}

impl Dual {
    /// Parameter number `i` with value `v`: its gradient is the unit vector e_i.
    ///
    /// # Panics
    /// If `i >= MAX_PARAMS` (a programming error: models have fixed, small parameter counts).
    pub fn param(v: f64, i: usize) -> Self {
        let mut d = [0.0; MAX_PARAMS];
        d[i] = 1.0;
        Dual { v, d }
    }

    /// Apply f with f(v) = fv and f'(v) = dfv (the chain rule).
    fn chain(self, fv: f64, dfv: f64) -> Self {
        Dual { v: fv, d: self.d.map(|x| x * dfv) }
    }
}

impl Add for Dual {
    type Output = Dual;
    fn add(self, o: Dual) -> Dual {
        let mut d = self.d;
        d.iter_mut().zip(o.d).for_each(|(a, b)| *a += b);
        Dual { v: self.v + o.v, d }
    }
}

impl Sub for Dual {
    type Output = Dual;
    fn sub(self, o: Dual) -> Dual {
        self + (-o)
    }
}

impl Mul for Dual {
    type Output = Dual;
    fn mul(self, o: Dual) -> Dual {
        let mut d = [0.0; MAX_PARAMS];
        for (i, x) in d.iter_mut().enumerate() {
            *x = self.d[i] * o.v + self.v * o.d[i];
        }
        Dual { v: self.v * o.v, d }
    }
}

impl Div for Dual {
    type Output = Dual;
    fn div(self, o: Dual) -> Dual {
        let mut d = [0.0; MAX_PARAMS];
        let inv = 1.0 / o.v;
        for (i, x) in d.iter_mut().enumerate() {
            *x = (self.d[i] - self.v * inv * o.d[i]) * inv;
        }
        Dual { v: self.v * inv, d }
    }
}

impl Neg for Dual {
    type Output = Dual;
    fn neg(self) -> Dual {
        Dual { v: -self.v, d: self.d.map(|x| -x) }
    }
}

impl Add<f64> for Dual {
    type Output = Dual;
    fn add(self, o: f64) -> Dual {
        Dual { v: self.v + o, d: self.d }
    }
}

impl Sub<f64> for Dual {
    type Output = Dual;
    fn sub(self, o: f64) -> Dual {
        Dual { v: self.v - o, d: self.d }
    }
}

impl Mul<f64> for Dual {
    type Output = Dual;
    fn mul(self, o: f64) -> Dual {
        Dual { v: self.v * o, d: self.d.map(|x| x * o) }
    }
}

impl Div<f64> for Dual {
    type Output = Dual;
    fn div(self, o: f64) -> Dual {
        self * (1.0 / o)
    }
}

impl Real for Dual {
    fn cst(v: f64) -> Self {
        Dual { v, d: [0.0; MAX_PARAMS] }
    }
    fn value(self) -> f64 {
        self.v
    }
    fn exp(self) -> Self {
        let e = self.v.exp();
        self.chain(e, e)
    }
    fn ln(self) -> Self {
        self.chain(self.v.ln(), 1.0 / self.v)
    }
    fn powf(self, p: f64) -> Self {
        self.chain(self.v.powf(p), p * self.v.powf(p - 1.0))
    }
    fn sin(self) -> Self {
        self.chain(self.v.sin(), self.v.cos())
    }
    fn cos(self) -> Self {
        self.chain(self.v.cos(), -self.v.sin())
    }
    fn atan(self) -> Self {
        self.chain(self.v.atan(), 1.0 / (1.0 + self.v * self.v))
    }
    fn sqrt(self) -> Self {
        let s = self.v.sqrt();
        self.chain(s, 0.5 / s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn gradients_match_central_differences() {
        // f(a, b) = a^b · sin(a) / atan(b) + sqrt(a) · ln(b) − exp(−a b)
        fn f<T: Real>(a: T, b: T) -> T {
            a.pow(b) * a.sin() / b.atan() + a.sqrt() * b.ln() - (-(a * b)).exp()
        }
        let (a, b, h) = (1.3, 0.7, 1e-6);
        let g = f(Dual::param(a, 0), Dual::param(b, 1));
        // 1e-15: the value part performs the same operations as f on f64.
        assert_relative_eq!(g.v, f(a, b), max_relative = 1e-15);
        // 1e-9: round-off of the central differences, ε |f|/h ≈ 1.1e-16 · 1/1e-6 ≈ 1e-10;
        // truncation h² |f'''|/6 ≈ 1e-13 (measured 1.3e-10).
        assert_relative_eq!(g.d[0], (f(a + h, b) - f(a - h, b)) / (2.0 * h), max_relative = 1e-9);
        assert_relative_eq!(g.d[1], (f(a, b + h) - f(a, b - h)) / (2.0 * h), max_relative = 1e-9);
    }

    #[test]
    fn jacobians_of_any_size_match_the_analytic_one() {
        // f_i(p) = Σ_j (i + 1) p_j² + p_0 p_{n−1}: ∂f_i/∂p_j = 2 (i + 1) p_j + [j = 0] p_{n−1}
        // + [j = n−1] p_0. Sizes below, at and across chunk boundaries; the derivatives of
        // a polynomial are exact, up to round-off of the products (1e-14).
        for n in [0, 1, MAX_PARAMS - 1, MAX_PARAMS, MAX_PARAMS + 1, 3 * MAX_PARAMS + 5] {
            let p: Vec<f64> = (0..n).map(|j| 0.5 + j as f64 * 0.25).collect();
            let f = |i: usize, q: &[Dual]| {
                let mut y = Dual::cst(0.0);
                for x in q {
                    y = y + *x * *x * (i + 1) as f64;
                }
                if n > 0 {
                    y = y + q[0] * q[n - 1];
                }
                y
            };
            let m = 3;
            let (mut values, mut jac) = (vec![0.0; m], vec![f64::NAN; m * n]);
            values_and_jacobian(&p, f, &mut values, &mut jac);
            for i in 0..m {
                let sum: f64 = p.iter().map(|x| x * x * (i + 1) as f64).sum();
                let cross = if n > 0 { p[0] * p[n - 1] } else { 0.0 };
                // 1e-14 (both): sums of up to 41 positive products, rounded in another order.
                assert_relative_eq!(values[i], sum + cross, max_relative = 1e-14);
                for j in 0..n {
                    let mut want = 2.0 * (i + 1) as f64 * p[j];
                    if j == 0 {
                        want += p[n - 1];
                    }
                    if j == n - 1 {
                        want += p[0];
                    }
                    assert_relative_eq!(jac[i * n + j], want, max_relative = 1e-14);
                }
            }
        }
    }
}
