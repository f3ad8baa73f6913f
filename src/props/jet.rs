//! A second-order forward-mode number (value, first and second derivative with respect to
//! one variable). Used inside the property laws so that the derivatives they return are
//! exact derivatives of the very expression evaluated, not hand-copied formulas.
//! `Copy`, no allocation.

use std::ops::{Add, Div, Mul, Neg, Sub};

///
/// With `SECOND = false` the second derivative is not computed (it stays 0): the value and
/// first derivative come from the very same operations as with `SECOND = true`, so both
/// agree bitwise (the residual-only path of the solver relies on that).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Jet<const SECOND: bool = true> {
    /// Value.
    pub v: f64,
    /// First derivative.
    pub d: f64,
    /// Second derivative (0 when `SECOND` is false).
    pub dd: f64,
}

impl<const S: bool> Jet<S> {
    /// The independent variable x (dx/dx = 1).
    pub fn var(x: f64) -> Self {
        Jet {
            v: x,
            d: 1.0,
            dd: 0.0,
        }
    }
    /// A constant.
    pub fn cst(c: f64) -> Self {
        Jet {
            v: c,
            d: 0.0,
            dd: 0.0,
        }
    }
    pub fn sqrt(self) -> Self {
        let s = self.v.sqrt();
        let half_inv = 0.5 / s;
        let d = self.d * half_inv;
        // a = s² ⇒ a'' = 2 s'² + 2 s s''.
        let dd = if S {
            (self.dd - 2.0 * d * d) * half_inv
        } else {
            0.0
        };
        Jet { v: s, d, dd }
    }
    pub fn exp(self) -> Self {
        let e = self.v.exp();
        Jet {
            v: e,
            d: e * self.d,
            dd: if S {
                e * (self.dd + self.d * self.d)
            } else {
                0.0
            },
        }
    }
    /// self^n for a constant integer exponent.
    pub fn powi(self, n: i32) -> Self {
        match n {
            0 => Jet::<S>::cst(1.0),
            1 => self,
            _ => {
                let p = self.v.powi(n);
                let p1 = f64::from(n) * self.v.powi(n - 1);
                let dd = if S {
                    let p2 = f64::from(n) * f64::from(n - 1) * self.v.powi(n - 2);
                    p2 * self.d * self.d + p1 * self.dd
                } else {
                    0.0
                };
                Jet {
                    v: p,
                    d: p1 * self.d,
                    dd,
                }
            }
        }
    }
}

impl<const S: bool> Add for Jet<S> {
    type Output = Self;
    fn add(self, o: Self) -> Self {
        Jet {
            v: self.v + o.v,
            d: self.d + o.d,
            dd: self.dd + o.dd,
        }
    }
}
impl<const S: bool> Sub for Jet<S> {
    type Output = Self;
    fn sub(self, o: Self) -> Self {
        Jet {
            v: self.v - o.v,
            d: self.d - o.d,
            dd: self.dd - o.dd,
        }
    }
}
impl<const S: bool> Mul for Jet<S> {
    type Output = Self;
    fn mul(self, o: Self) -> Self {
        Jet {
            v: self.v * o.v,
            d: self.d * o.v + self.v * o.d,
            dd: if S {
                self.dd * o.v + 2.0 * self.d * o.d + self.v * o.dd
            } else {
                0.0
            },
        }
    }
}
impl<const S: bool> Div for Jet<S> {
    type Output = Self;
    fn div(self, o: Self) -> Self {
        // One division; the rest by the reciprocal.
        let inv = 1.0 / o.v;
        let q = self.v * inv;
        let d = (self.d - q * o.d) * inv;
        let dd = if S {
            (self.dd - 2.0 * d * o.d - q * o.dd) * inv
        } else {
            0.0
        };
        Jet { v: q, d, dd }
    }
}
impl<const S: bool> Neg for Jet<S> {
    type Output = Self;
    fn neg(self) -> Self {
        Jet {
            v: -self.v,
            d: -self.d,
            dd: -self.dd,
        }
    }
}
impl<const S: bool> Add<f64> for Jet<S> {
    type Output = Self;
    fn add(self, c: f64) -> Self {
        Jet {
            v: self.v + c,
            ..self
        }
    }
}
impl<const S: bool> Sub<f64> for Jet<S> {
    type Output = Self;
    fn sub(self, c: f64) -> Self {
        Jet {
            v: self.v - c,
            ..self
        }
    }
}
impl<const S: bool> Mul<f64> for Jet<S> {
    type Output = Self;
    fn mul(self, c: f64) -> Self {
        Jet {
            v: self.v * c,
            d: self.d * c,
            dd: self.dd * c,
        }
    }
}
impl<const S: bool> Div<f64> for Jet<S> {
    type Output = Self;
    fn div(self, c: f64) -> Self {
        let inv = 1.0 / c;
        Jet {
            v: self.v * inv,
            d: self.d * inv,
            dd: self.dd * inv,
        }
    }
}
impl<const S: bool> Add<Jet<S>> for f64 {
    type Output = Jet<S>;
    fn add(self, j: Jet<S>) -> Jet<S> {
        j + self
    }
}
impl<const S: bool> Sub<Jet<S>> for f64 {
    type Output = Jet<S>;
    fn sub(self, j: Jet<S>) -> Jet<S> {
        -j + self
    }
}
impl<const S: bool> Mul<Jet<S>> for f64 {
    type Output = Jet<S>;
    fn mul(self, j: Jet<S>) -> Jet<S> {
        j * self
    }
}
impl<const S: bool> Div<Jet<S>> for f64 {
    type Output = Jet<S>;
    fn div(self, j: Jet<S>) -> Jet<S> {
        Jet::<S>::cst(self) / j
    }
}

#[cfg(test)]
mod tests {
    use super::Jet;

    /// Closed-form derivatives of a composite function, computed by hand:
    /// f(x) = sqrt(x) · exp(1/x) + x⁴/4, at x = 2.
    /// f'(x) = exp(1/x) (1/(2√x) − √x/x²) + x³
    /// f''(x) by differentiating again (below, term by term).
    #[test]
    fn jet_matches_closed_form() {
        let x = 2.0_f64;
        let j: Jet = Jet::var(x);
        let f = j.sqrt() * (1.0 / j).exp() + j.powi(4) / 4.0;
        let e = (1.0 / x).exp();
        let s = x.sqrt();
        let g = 1.0 / (2.0 * s) - s / (x * x); // d/dx of √x·e^{1/x} divided by e^{1/x}
        let f1 = e * g + x * x * x;
        // d/dx [e g] = e(−1/x²) g + e g',  g' = −1/(4 x^{3/2}) + (3/2) x^{−5/2}
        let g1 = -1.0 / (4.0 * x.powf(1.5)) + 1.5 * x.powf(-2.5);
        // d/dx x³ = 3x²
        let f2 = e * (-1.0 / (x * x)) * g + e * g1 + 3.0 * x * x;
        assert!((f.v - (s * e + 4.0)).abs() < 1e-14);
        assert!((f.d - f1).abs() < 1e-13 * f1.abs());
        assert!((f.dd - f2).abs() < 1e-13 * f2.abs());
        // powi: x³ → 3x² = 12, 6x = 12.
        let q = j.powi(3);
        assert!((q.d - 12.0).abs() < 1e-13 && (q.dd - 12.0).abs() < 1e-13);
        let r = Jet::cst(1.0) / j; // 1/x: −1/x², 2/x³
        assert!((r.d + 0.25).abs() < 1e-15 && (r.dd - 0.25).abs() < 1e-15);
    }
}
