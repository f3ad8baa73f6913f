//! Transient infiltration toward a water table in a homogeneous exponential soil:
//! the analytic series solution of Srivastava & Yeh (1991), "Analytical solutions for
//! one-dimensional, transient infiltration toward the water table in homogeneous and
//! layered soils", Water Resour. Res. 27(5):753–762, homogeneous-soil case.
//!
//! Soil: K = Ks e^(αψ), θ = θr + (θs − θr) e^(αψ). Height x above the water table
//! (0 ≤ x ≤ L, x = L − z in deepdry's depth z), dimensionless
//! x* = αx, L* = αL, t* = α Ks t/(θs − θr), K* = K/Ks, q* = q/Ks (q the infiltration rate
//! at the surface, positive downward). Richards' equation becomes linear in K*:
//!
//!   ∂K*/∂t* = ∂²K*/∂x*² + ∂K*/∂x*,  K*(0, t*) = e^(αψ0),  (∂K*/∂x* + K*)(L*, t*) = q*.
//!
//! Starting from the steady profile of flux qA, with the surface flux switched to qB at
//! t = 0, the solution is
//!
//!   K* = qB − (qB − e^(αψ0)) e^(−x*)
//!        − 4 (qB − qA) e^((L* − x*)/2) e^(−t*/4)
//!          Σₙ sin(λₙ x*) sin(λₙ L*) e^(−λₙ² t*) / (1 + L*/2 + 2 λₙ² L*),
//!
//! with λₙ the positive roots of tan(λ L*) + 2λ = 0. This is the form printed in the
//! paper as we recall it (from memory: the printed text was not available here, so its
//! equation numbers are not quoted); we re-derived it by separation of variables
//! (substitution K* = K*_B + e^(−x*/2 − t*/4) w gives w_t = w_xx, w(0) = 0,
//! w_x + w/2 = 0 at L*), and the derivation and the coefficient integrals are written out
//! in `validation/srivastava-yeh-infiltration/README.md`. The unit tests below check the
//! series against its own initial and boundary conditions.

/// Parameters of the homogeneous problem (SI units; x measured upward from the water table).
#[derive(Debug, Clone, Copy)]
pub struct Problem {
    /// Saturated conductivity [m s⁻¹].
    pub ks: f64,
    /// α [m⁻¹].
    pub alpha: f64,
    pub theta_r: f64,
    pub theta_s: f64,
    /// Height of the surface above the water table [m].
    pub height: f64,
    /// Pressure head at the water table [m] (0 for the water table itself).
    pub psi0: f64,
    /// Infiltration rate before and after t = 0 [m s⁻¹], positive downward.
    pub q_a: f64,
    pub q_b: f64,
}

/// The series solution with precomputed eigenvalues.
#[derive(Debug, Clone)]
pub struct Solution {
    pub p: Problem,
    lambdas: Vec<f64>,
}

/// Positive roots of f(λ) = sin(λL) + 2λ cos(λL) (⇔ tan(λL) + 2λ = 0): one in each interval
/// ((n − ½)π/L, nπ/L), n = 1, 2, …, found by bisection to round-off.
fn eigenvalues(l: f64, count: usize) -> Vec<f64> {
    let f = |x: f64| (x * l).sin() + 2.0 * x * (x * l).cos();
    let pi = std::f64::consts::PI;
    (1..=count)
        .map(|n| {
            let mut a = (n as f64 - 0.5) * pi / l;
            let mut b = n as f64 * pi / l;
            let fa = f(a);
            for _ in 0..200 {
                let m = 0.5 * (a + b);
                if m <= a || m >= b {
                    break;
                }
                if (f(m) > 0.0) == (fa > 0.0) {
                    a = m;
                } else {
                    b = m;
                }
            }
            0.5 * (a + b)
        })
        .collect()
}

impl Solution {
    /// Uses enough eigenvalues for t* ≥ `t_star_min` (terms below 1e-16 of the leading
    /// coefficient are dropped: λₙ² t* > 37).
    pub fn new(p: Problem, t_star_min: f64) -> Solution {
        let l = p.alpha * p.height;
        let pi = std::f64::consts::PI;
        let t = t_star_min.max(1e-8);
        // λₙ ≈ nπ/L*; need λ² t > 37.
        let n = (((37.0 / t).sqrt() * l / pi).ceil() as usize + 2).clamp(20, 200_000);
        Solution {
            p,
            lambdas: eigenvalues(l, n),
        }
    }

    /// Dimensionless time t* of time t [s].
    pub fn t_star(&self, t: f64) -> f64 {
        self.p.alpha * self.p.ks * t / (self.p.theta_s - self.p.theta_r)
    }

    /// K/Ks at height x [m] above the water table and time t [s] after the flux change.
    pub fn k_rel(&self, x: f64, t: f64) -> f64 {
        let p = &self.p;
        let (xs, ls) = (p.alpha * x, p.alpha * p.height);
        let (qa, qb) = (p.q_a / p.ks, p.q_b / p.ks);
        let k0 = (p.alpha * p.psi0).exp();
        let steady = qb - (qb - k0) * (-xs).exp();
        let ts = self.t_star(t);
        if ts <= 0.0 {
            return qa - (qa - k0) * (-xs).exp();
        }
        let mut sum = 0.0;
        for &lam in &self.lambdas {
            let decay = (-lam * lam * ts).exp();
            if decay < 1e-300 {
                break;
            }
            sum += (lam * xs).sin() * (lam * ls).sin() * decay
                / (1.0 + ls / 2.0 + 2.0 * lam * lam * ls);
        }
        steady - 4.0 * (qb - qa) * ((ls - xs) / 2.0 - ts / 4.0).exp() * sum
    }

    /// Pressure head ψ [m] at height x above the water table and time t [s].
    pub fn head(&self, x: f64, t: f64) -> f64 {
        self.k_rel(x, t).ln() / self.p.alpha
    }

    /// Liquid content at height x and time t.
    pub fn theta(&self, x: f64, t: f64) -> f64 {
        self.p.theta_r + (self.p.theta_s - self.p.theta_r) * self.k_rel(x, t)
    }

    /// Downward Darcy flux q = K (∂ψ/∂x + 1) [m s⁻¹] at height x, time t, from the
    /// dimensionless form q* = ∂K*/∂x* + K* (central difference of the series, δx* = 1e-5).
    pub fn flux(&self, x: f64, t: f64) -> f64 {
        let dx = 1e-5 / self.p.alpha;
        let lo = (x - dx).max(0.0);
        let hi = (x + dx).min(self.p.height);
        let dk = (self.k_rel(hi, t) - self.k_rel(lo, t)) / (self.p.alpha * (hi - lo));
        self.p.ks * (dk + self.k_rel(x, t))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn problem() -> Problem {
        Problem {
            ks: 1e-6,
            alpha: 1.0,
            theta_r: 0.06,
            theta_s: 0.40,
            height: 10.0,
            psi0: 0.0,
            q_a: 1e-8,
            q_b: 5e-7,
        }
    }

    #[test]
    fn eigenvalues_solve_their_equation() {
        let l = 10.0;
        for lam in eigenvalues(l, 50) {
            assert!(((lam * l).tan() + 2.0 * lam).abs() < 1e-8 * (1.0 + lam));
        }
    }

    /// The series meets the water-table condition, the surface flux qB for t > 0, and
    /// tends to the initial (qA) profile as t → 0.
    #[test]
    fn series_meets_its_conditions() {
        let s = Solution::new(problem(), 1e-6);
        let p = s.p;
        let day = 86400.0;
        for t in [0.1 * day, day, 10.0 * day] {
            assert!((s.k_rel(0.0, t) - 1.0).abs() < 1e-12);
            let q = s.flux(p.height, t);
            assert!(((q - p.q_b) / p.q_b).abs() < 1e-4, "t {t}: q {q}");
        }
        // Near t = 0 the profile is the steady qA profile (away from the surface layer
        // where the step has already acted).
        let t = 1.0;
        for x in [1.0, 3.0, 6.0] {
            let ka = p.q_a / p.ks - (p.q_a / p.ks - 1.0) * (-p.alpha * x).exp();
            assert!(((s.k_rel(x, t) - ka) / ka).abs() < 1e-6, "x {x}");
        }
        // Long times: steady qB profile.
        let t = 1e4 * day;
        let x = 4.0;
        let kb = p.q_b / p.ks - (p.q_b / p.ks - 1.0) * (-p.alpha * x).exp();
        assert!(((s.k_rel(x, t) - kb) / kb).abs() < 1e-9);
    }

    /// The series satisfies the PDE ∂K/∂t* = ∂²K/∂x*² + ∂K/∂x* (finite differences).
    #[test]
    fn series_satisfies_the_linearised_equation() {
        let s = Solution::new(problem(), 1e-3);
        let t = s.p.theta_s - s.p.theta_r; // t* = t α Ks / Δθ
        let tt = |ts: f64| ts * t / (s.p.alpha * s.p.ks);
        let (x, ts, hx, ht) = (7.0, 0.5, 1e-3, 1e-4);
        let k = |x: f64, ts: f64| s.k_rel(x, tt(ts));
        let kt = (k(x, ts + ht) - k(x, ts - ht)) / (2.0 * ht);
        let kx = (k(x + hx, ts) - k(x - hx, ts)) / (2.0 * hx);
        let kxx = (k(x + hx, ts) - 2.0 * k(x, ts) + k(x - hx, ts)) / (hx * hx);
        assert!(
            (kt - kxx - kx).abs() < 1e-5 * (kt.abs() + kx.abs()),
            "{kt} {kxx} {kx}"
        );
    }
}
