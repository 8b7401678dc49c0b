//! Forward-mode automatic differentiation with dual numbers: a value and its gradient with
//! respect to up to [`MAX_PARAMS`] parameters, carried through arithmetic and the elementary
//! functions by the chain rule. Gives exact Jacobians for model functions written once,
//! generically over [`Real`] (L. B. Rall, Automatic Differentiation: Techniques and
//! Applications, Springer LNCS 120, 1981; common practice).

use std::ops::{Add, Div, Mul, Neg, Sub};

/// Largest number of parameters a gradient carries.
pub const MAX_PARAMS: usize = 12;

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
        assert_relative_eq!(g.v, f(a, b), max_relative = 1e-15);
        assert_relative_eq!(g.d[0], (f(a + h, b) - f(a - h, b)) / (2.0 * h), max_relative = 1e-8);
        assert_relative_eq!(g.d[1], (f(a, b + h) - f(a, b - h)) / (2.0 * h), max_relative = 1e-8);
    }
}
