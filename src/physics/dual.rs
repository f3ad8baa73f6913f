//! Forward-mode dual numbers with a fixed number of derivative slots.
//!
//! The residual is written once in terms of [`Dual`] values; the exact Jacobian falls out.
//! Per-cell quantities use `Dual<N>` (slots: T, h and, in kinetic mode, rv of the cell);
//! face fluxes use `Dual<2N>` (slots 0..N: the cell above, N..2N: the cell below).
//! Constitutive laws return
//! value and derivative as plain `f64`s and are lifted with [`Dual::chain`].

use std::ops::{Add, Div, Mul, Neg, Sub};

#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Dual<const N: usize> {
    /// Value.
    pub v: f64,
    /// Partial derivatives with respect to the N slots.
    pub d: [f64; N],
}

impl<const N: usize> Dual<N> {
    /// A constant (all derivatives zero).
    #[inline]
    pub fn cst(v: f64) -> Self {
        Dual { v, d: [0.0; N] }
    }
    /// The independent variable of slot `k`.
    #[inline]
    pub fn var(v: f64, k: usize) -> Self {
        let mut d = [0.0; N];
        // Without derivative slots (N = 0, the value-only path) this is a constant.
        if let Some(x) = d.get_mut(k) {
            *x = 1.0;
        }
        Dual { v, d }
    }
    /// f(self) given f and f' at self.v (chain rule).
    #[inline]
    pub fn chain(self, f: f64, df: f64) -> Self {
        let mut d = self.d;
        for x in d.iter_mut() {
            *x *= df;
        }
        Dual { v: f, d }
    }
    /// Lifts a `Dual<M>` into slots `offset..offset + M` of a wider dual (a `Dual<3>` of
    /// one cell into a face's `Dual<6>`; on the value-only path M = N = 0 and this copies
    /// the value).
    #[inline]
    pub fn lift<const M: usize>(x: Dual<M>, offset: usize) -> Self {
        let mut d = [0.0; N];
        for (k, v) in x.d.iter().enumerate() {
            d[offset + k] = *v;
        }
        Dual { v: x.v, d }
    }
    /// The first-order Taylor value at a point displaced by `du` from where this dual was
    /// evaluated, v + Σ dₖ duₖ, as a dual without derivative slots.
    #[inline]
    pub fn taylor(&self, du: &[f64; N]) -> Dual<0> {
        let mut v = self.v;
        for (d, x) in self.d.iter().zip(du.iter()) {
            v += d * x;
        }
        Dual { v, d: [] }
    }
    /// The value alone, as a dual without derivative slots.
    #[inline]
    pub fn value_only(self) -> Dual<0> {
        Dual { v: self.v, d: [] }
    }
    #[inline]
    pub fn exp(self) -> Self {
        let e = self.v.exp();
        self.chain(e, e)
    }
    #[inline]
    pub fn ln(self) -> Self {
        self.chain(self.v.ln(), 1.0 / self.v)
    }
    #[inline]
    pub fn sqrt(self) -> Self {
        let s = self.v.sqrt();
        self.chain(s, 0.5 / s)
    }
    #[inline]
    pub fn powf(self, p: f64) -> Self {
        let f = self.v.powf(p);
        self.chain(f, if self.v == 0.0 { 0.0 } else { p * f / self.v })
    }
    #[inline]
    pub fn recip(self) -> Self {
        let r = 1.0 / self.v;
        self.chain(r, -r * r)
    }
    #[inline]
    pub fn scale(self, s: f64) -> Self {
        self.chain(self.v * s, s)
    }
    /// The larger of two duals (derivative of the chosen one).
    #[inline]
    pub fn max(self, o: Self) -> Self {
        if self.v >= o.v {
            self
        } else {
            o
        }
    }
    /// The smaller of two duals (derivative of the chosen one).
    #[inline]
    pub fn min(self, o: Self) -> Self {
        if self.v <= o.v {
            self
        } else {
            o
        }
    }
    /// True when the value and every derivative are finite.
    #[inline]
    pub fn is_finite(&self) -> bool {
        self.v.is_finite() && self.d.iter().all(|x| x.is_finite())
    }
}

impl<const N: usize> Add for Dual<N> {
    type Output = Self;
    #[inline]
    fn add(mut self, o: Self) -> Self {
        self.v += o.v;
        for (a, b) in self.d.iter_mut().zip(o.d.iter()) {
            *a += b;
        }
        self
    }
}
impl<const N: usize> Sub for Dual<N> {
    type Output = Self;
    #[inline]
    fn sub(mut self, o: Self) -> Self {
        self.v -= o.v;
        for (a, b) in self.d.iter_mut().zip(o.d.iter()) {
            *a -= b;
        }
        self
    }
}
impl<const N: usize> Mul for Dual<N> {
    type Output = Self;
    #[inline]
    fn mul(self, o: Self) -> Self {
        let mut d = [0.0; N];
        for (k, x) in d.iter_mut().enumerate() {
            *x = self.d[k] * o.v + self.v * o.d[k];
        }
        Dual { v: self.v * o.v, d }
    }
}
impl<const N: usize> Div for Dual<N> {
    type Output = Self;
    #[inline]
    fn div(self, o: Self) -> Self {
        let inv = 1.0 / o.v;
        let q = self.v * inv;
        let mut d = [0.0; N];
        for (k, x) in d.iter_mut().enumerate() {
            *x = (self.d[k] - q * o.d[k]) * inv;
        }
        Dual { v: q, d }
    }
}
impl<const N: usize> Neg for Dual<N> {
    type Output = Self;
    #[inline]
    fn neg(mut self) -> Self {
        self.v = -self.v;
        for a in self.d.iter_mut() {
            *a = -*a;
        }
        self
    }
}
impl<const N: usize> Add<f64> for Dual<N> {
    type Output = Self;
    #[inline]
    fn add(mut self, o: f64) -> Self {
        self.v += o;
        self
    }
}
impl<const N: usize> Sub<f64> for Dual<N> {
    type Output = Self;
    #[inline]
    fn sub(mut self, o: f64) -> Self {
        self.v -= o;
        self
    }
}
impl<const N: usize> Mul<f64> for Dual<N> {
    type Output = Self;
    #[inline]
    fn mul(self, o: f64) -> Self {
        self.scale(o)
    }
}
impl<const N: usize> Div<f64> for Dual<N> {
    type Output = Self;
    #[inline]
    fn div(self, o: f64) -> Self {
        self.scale(1.0 / o)
    }
}
impl<const N: usize> Mul<Dual<N>> for f64 {
    type Output = Dual<N>;
    #[inline]
    fn mul(self, o: Dual<N>) -> Dual<N> {
        o.scale(self)
    }
}
impl<const N: usize> Sub<Dual<N>> for f64 {
    type Output = Dual<N>;
    #[inline]
    fn sub(self, o: Dual<N>) -> Dual<N> {
        -o + self
    }
}
impl<const N: usize> Add<Dual<N>> for f64 {
    type Output = Dual<N>;
    #[inline]
    fn add(self, o: Dual<N>) -> Dual<N> {
        o + self
    }
}

impl<const N: usize> Div<Dual<N>> for f64 {
    type Output = Dual<N>;
    #[inline]
    fn div(self, o: Dual<N>) -> Dual<N> {
        o.recip().scale(self)
    }
}

/// Value only (the residual path without derivatives).
pub type D0 = Dual<0>;
pub type D3 = Dual<3>;
pub type D6 = Dual<6>;

#[cfg(test)]
mod tests {
    use super::*;

    /// d/dx [x² e^x / (1 + x)] at x = 0.7, against the hand-derived derivative
    /// (quotient and product rules; exact calculus).
    #[test]
    fn dual_matches_hand_derivative() {
        let x = D3::var(0.7, 1);
        let f = x * x * x.exp() / (x + 1.0);
        let xv: f64 = 0.7;
        let g = xv * xv * xv.exp();
        let dg = (2.0 * xv + xv * xv) * xv.exp();
        let expect = (dg * (1.0 + xv) - g) / (1.0 + xv).powi(2);
        assert!((f.d[1] - expect).abs() < 1e-14 * expect.abs());
        assert_eq!(f.d[0], 0.0);
        assert_eq!(f.d[2], 0.0);
    }
}
