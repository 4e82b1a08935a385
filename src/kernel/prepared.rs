//! Prepared evaluation of many points that share a temperature, for a
//! host's bulk calls (a million density readings at 20 °C): the inverse
//! density solve starts from a tabulated guess, and the strength bases
//! reuse the pure component's densities. Results agree with the one-point
//! methods of [`Mixture`] to the solver tolerance ([`W_TOL`] in w), and
//! the same inputs give the same errors. The slice functions for whole
//! columns with a temperature per point are in [`super::bulk`].

use super::composition::{x_from_w, Strength};
use super::error::{finite, Error, Result};
use super::model::{Mixture, T_PROOF_C, T_REF_C};
use super::solve::{END_SNAP, W_TOL};

/// Nodes of the w(ρ) table behind the first guess, evenly spaced in ρ so
/// that finding the interval is one division: with cubic Hermite
/// interpolation the guess is within ~1e-7 of the root, close enough
/// for a single Newton step (see `one_step_suffices`).
const NODES: usize = 257;
const MAX_ITER: usize = 100;

/// Inverse of ρ(w) at one temperature, prepared for many densities
/// (setting up costs about three thousand model evaluations).
pub struct DensityInverse<'m, M: Mixture + ?Sized> {
    m: &'m M,
    t: f64,
    /// (w, ρ, ∂ρ/∂w) at ρ = max, max − step, …, min.
    nodes: Vec<(f64, f64, f64)>,
    /// Per interval: the Hermite interpolant of w as a cubic in
    /// s = (ρ − ρ_i) / (ρ_{i+1} − ρ_i), and 1 / (ρ_{i+1} − ρ_i).
    cubics: Vec<([f64; 4], f64)>,
    step: f64,
    /// Reachable densities (ρ at w_max, ρ at w_min).
    min: f64,
    max: f64,
    /// ρ at w_min and at w_max, as the point solve sees them
    /// ([`Mixture::rho_at_ends`]).
    ends: (f64, f64),
    /// ρ(w) was strictly decreasing at every node; if not, every solve
    /// goes to the one-point method.
    monotonic: bool,
    /// The interpolated guess is provably close enough that one Newton
    /// step from it lands within [`W_TOL`] of the root (checked when the
    /// table is built); otherwise Newton runs until its step is below
    /// [`W_TOL`].
    one_step: bool,
}

impl<'m, M: Mixture + ?Sized> DensityInverse<'m, M> {
    /// Tabulates w(ρ) at `t` °C (checked against the model's range).
    pub fn new(m: &'m M, t: f64) -> Result<Self> {
        let t = m.check_t(t)?;
        let (r_lo_w, r_hi_w) = m.rho_at_ends(t);
        let (min, max) = (r_lo_w.min(r_hi_w), r_lo_w.max(r_hi_w));
        let step = (max - min) / (NODES - 1) as f64;
        let mut monotonic = r_hi_w < r_lo_w && step > 0.0;
        let mut nodes = Vec::with_capacity(NODES);
        if monotonic {
            for i in 0..NODES {
                let rho = if i == NODES - 1 {
                    min
                } else {
                    max - step * i as f64
                };
                let w = m.w_from_density(rho, t)?;
                let (r, dr) = m.rho_dw(w, t);
                if dr >= 0.0 {
                    monotonic = false;
                    break;
                }
                nodes.push((w, r, dr));
            }
        }
        let one_step = monotonic && Self::one_step_suffices(m, t, &nodes)?;
        let cubics = nodes
            .windows(2)
            .map(|p| hermite_cubic(p[0], p[1]))
            .collect();
        Ok(DensityInverse {
            m,
            t,
            nodes,
            cubics,
            step,
            min,
            max,
            ends: (r_lo_w, r_hi_w),
            monotonic,
            one_step,
        })
    }

    /// Whether one Newton step from the interpolated guess meets the
    /// tolerance everywhere. Newton's error after a step is at most
    /// K e² with K = max|ρ''| / (2 min|ρ'|) over the interval and e the
    /// guess's error; the Hermite guess errs most mid-interval, so e is
    /// bounded by twice the error measured there against the one-point
    /// solve, and ρ'' by the spread of ρ' between the nodes (doubled).
    fn one_step_suffices(m: &M, t: f64, nodes: &[(f64, f64, f64)]) -> Result<bool> {
        let mut worst: f64 = 0.0;
        for p in nodes.windows(2) {
            let (n0, n1) = (p[0], p[1]);
            let rho_mid = 0.5 * (n0.1 + n1.1);
            let w_mid = m.w_from_density(rho_mid, t)?;
            let e = 2.0 * (hermite_inverse(rho_mid, n0, n1) - w_mid).abs();
            let dw = (n1.0 - n0.0).abs();
            let d2 = if dw > 0.0 {
                2.0 * (n1.2 - n0.2).abs() / dw
            } else {
                f64::INFINITY
            };
            let k = d2 / (2.0 * n0.2.abs().min(n1.2.abs()));
            worst = worst.max(k * e * e);
        }
        Ok(worst.is_finite() && worst < 0.1 * W_TOL)
    }

    /// The temperature this inverse is prepared for, °C.
    pub fn t(&self) -> f64 {
        self.t
    }

    /// Mass fraction whose density at `t` is `rho` (kg/m³); the same
    /// contract and errors as [`Mixture::w_from_density`].
    pub fn w(&self, rho: f64) -> Result<f64> {
        if !self.monotonic {
            return self.m.w_from_density(rho, self.t);
        }
        let rho = finite("density", rho)?;
        let margin = 1e-9 * self.max;
        if rho < self.min - margin || rho > self.max + margin {
            return Err(Error::Unreachable {
                model: self.m.name().to_string(),
                density: rho,
                t: self.t,
                min: self.min,
                max: self.max,
            });
        }
        // The point solve's snap to a pure component, for the same answer.
        let snap = END_SNAP * self.max;
        if (rho - self.ends.0).abs() <= snap {
            return Ok(self.m.validity().w_min);
        }
        if (rho - self.ends.1).abs() <= snap {
            return Ok(self.m.validity().w_max);
        }
        let first = self.nodes[0];
        let last = self.nodes[NODES - 1];
        if rho >= first.1 {
            return Ok(first.0);
        }
        if rho <= last.1 {
            return Ok(last.0);
        }
        let i = (((self.max - rho) / self.step) as usize).min(NODES - 2);
        // Node densities are the solved ones, a rounding away from the
        // even grid: step back or on if rho fell just outside.
        let i = if rho > self.nodes[i].1 {
            i.saturating_sub(1)
        } else if rho < self.nodes[i + 1].1 {
            (i + 1).min(NODES - 2)
        } else {
            i
        };
        let (n0, n1) = (self.nodes[i], self.nodes[i + 1]);
        let (a, b) = (n0.0.min(n1.0), n0.0.max(n1.0));
        let ([c0, c1, c2, c3], inv_h) = self.cubics[i];
        let sv = (rho - n0.1) * inv_h;
        let guess = ((c3 * sv + c2) * sv + c1) * sv + c0;
        if self.one_step && guess > a && guess < b {
            let (r, dr) = self.m.rho_dw(guess, self.t);
            let w = guess - (r - rho) / dr;
            if w >= a && w <= b {
                return Ok(w);
            }
        }
        self.newton(rho, guess, a, b)
    }

    /// Safeguarded Newton on ρ(w) − rho inside [a, b] (ρ(a) ≥ rho ≥ ρ(b)),
    /// falling back to the one-point solve if the bracket turns out wrong.
    fn newton(&self, rho: f64, guess: f64, mut a: f64, mut b: f64) -> Result<f64> {
        let mut w = if guess > a && guess < b {
            guess
        } else {
            0.5 * (a + b)
        };
        for _ in 0..MAX_ITER {
            let (r, dr) = self.m.rho_dw(w, self.t);
            let g = r - rho;
            if g == 0.0 {
                return Ok(w);
            }
            if g > 0.0 {
                a = w;
            } else {
                b = w;
            }
            let newton = w - g / dr;
            let next = if dr < 0.0 && newton > a && newton < b {
                newton
            } else {
                0.5 * (a + b)
            };
            let step = (next - w).abs();
            w = next;
            if step < W_TOL || (b - a) < W_TOL {
                return Ok(w);
            }
        }
        self.m.w_from_density(rho, self.t)
    }
}

/// The cubic Hermite interpolant of w(ρ) between two nodes (w, ρ, ∂ρ/∂w)
/// as coefficients of s = (ρ − ρ₀)/(ρ₁ − ρ₀), with 1/(ρ₁ − ρ₀).
fn hermite_cubic(n0: (f64, f64, f64), n1: (f64, f64, f64)) -> ([f64; 4], f64) {
    let (w0, r0, d0) = n0;
    let (w1, r1, d1) = n1;
    let h = r1 - r0;
    if h == 0.0 || d0 == 0.0 || d1 == 0.0 {
        return ([w0, 0.0, 0.0, 0.0], 0.0);
    }
    let (m0, m1) = (h / d0, h / d1);
    // h00 = 2s³ − 3s² + 1, h10 = s³ − 2s² + s, h01 = −2s³ + 3s², h11 = s³ − s².
    let c0 = w0;
    let c1 = m0;
    let c2 = -3.0 * w0 - 2.0 * m0 + 3.0 * w1 - m1;
    let c3 = 2.0 * w0 + m0 - 2.0 * w1 + m1;
    ([c0, c1, c2, c3], 1.0 / h)
}

/// w at density `rho` from the cubic Hermite interpolant of w(ρ) between
/// two nodes (w, ρ, ∂ρ/∂w), using dw/dρ = 1/(∂ρ/∂w).
fn hermite_inverse(rho: f64, n0: (f64, f64, f64), n1: (f64, f64, f64)) -> f64 {
    let (w0, r0, d0) = n0;
    let (w1, r1, d1) = n1;
    let h = r1 - r0;
    if h == 0.0 {
        return w0;
    }
    let s = (rho - r0) / h;
    let (m0, m1) = (h / d0, h / d1);
    let s2 = s * s;
    let s3 = s2 * s;
    let w = (2.0 * s3 - 3.0 * s2 + 1.0) * w0
        + (s3 - 2.0 * s2 + s) * m0
        + (-2.0 * s3 + 3.0 * s2) * w1
        + (s3 - s2) * m1;
    if w.is_finite() {
        w
    } else {
        w0 + s * (w1 - w0)
    }
}

/// Every strength basis for many mass fractions: the pure first
/// component's densities at 20 °C and at 60 °F computed once.
pub struct StrengthBases<'m, M: Mixture + ?Sized> {
    m: &'m M,
    rho1_ref: f64,
    rho1_proof: f64,
    m1: f64,
    m2: f64,
}

impl<'m, M: Mixture + ?Sized> StrengthBases<'m, M> {
    /// Prepares for `m` (an error if it does not cover the pure first
    /// component, as for [`Mixture::strength`]).
    pub fn new(m: &'m M) -> Result<Self> {
        let [a, b] = m.components();
        Ok(StrengthBases {
            m,
            rho1_ref: m.pure_density(0, T_REF_C)?,
            rho1_proof: m.pure_density(0, T_PROOF_C)?,
            m1: a.molar_mass,
            m2: b.molar_mass,
        })
    }

    /// The strength of mass fraction `w` in every basis; the same values
    /// as [`Mixture::strength`].
    pub fn strength(&self, w: f64) -> Result<Strength> {
        let w = self.m.check_w(w)?;
        Ok(Strength {
            w,
            abm: 100.0 * w,
            x: x_from_w(w, self.m1, self.m2),
            abv: abv(w, self.m.rho(w, T_REF_C), self.rho1_ref),
            proof: 2.0 * abv(w, self.m.rho(w, T_PROOF_C), self.rho1_proof),
        })
    }
}

/// % vol from w, the mixture's density and the pure first component's, as
/// `composition::abv` computes it (operation for operation, and clamped).
#[inline]
fn abv(w: f64, rho: f64, rho1: f64) -> f64 {
    (100.0 * (w * (rho / rho1))).clamp(0.0, 100.0)
}

impl<'m, M: Mixture + ?Sized> StrengthBases<'m, M> {
    /// The strength of mass fraction `w` whose density at 20 °C is known
    /// to be `rho_20` (a density measured at 20 °C and solved for w): one
    /// model evaluation fewer. % vol then agrees with [`Self::strength`]
    /// to the solver's tolerance rather than to the last bit.
    pub fn strength_with_rho_20(&self, w: f64, rho_20: f64) -> Result<Strength> {
        let w = self.m.check_w(w)?;
        Ok(Strength {
            w,
            abm: 100.0 * w,
            x: x_from_w(w, self.m1, self.m2),
            abv: abv(w, rho_20, self.rho1_ref),
            proof: 2.0 * abv(w, self.m.rho(w, T_PROOF_C), self.rho1_proof),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::kernel::EthanolWater;

    #[test]
    fn inverse_agrees_with_the_one_point_solve() {
        let m = EthanolWater::new();
        for t in [-20.0, 0.0, 15.0, 20.0, 40.0] {
            let inv = DensityInverse::new(&m, t).unwrap();
            let v = m.validity();
            let (hi, lo) = (m.rho(v.w_min, t), m.rho(v.w_max, t));
            for k in 0..=2000 {
                let rho = lo + (hi - lo) * k as f64 / 2000.0;
                let a = inv.w(rho).unwrap();
                let b = m.w_from_density(rho, t).unwrap();
                assert!((a - b).abs() < 1e-11, "t {t} rho {rho}: {a} vs {b}");
            }
        }
    }

    #[test]
    fn one_newton_step_is_proven_enough_for_ethanol_water() {
        let m = EthanolWater::new();
        // From 0 °C up; colder, the curve flattens near pure water and
        // the inverse verifies its Newton steps instead.
        for t in [0.0, 10.0, 15.0, 20.0, 25.0, 30.0, 40.0] {
            assert!(DensityInverse::new(&m, t).unwrap().one_step, "t = {t}");
        }
    }

    #[test]
    fn inverse_gives_the_same_errors() {
        let m = EthanolWater::new();
        let inv = DensityInverse::new(&m, 20.0).unwrap();
        assert_eq!(inv.w(500.0), m.w_from_density(500.0, 20.0));
        assert_eq!(inv.w(1100.0), m.w_from_density(1100.0, 20.0));
        assert!(matches!(inv.w(f64::NAN), Err(Error::NotFinite { .. })));
        assert!(DensityInverse::new(&m, 60.0).is_err());
    }

    #[test]
    fn strength_bases_match_the_one_point_method() {
        let m = EthanolWater::new();
        let sb = StrengthBases::new(&m).unwrap();
        for k in 0..=100 {
            let w = k as f64 / 100.0;
            assert_eq!(sb.strength(w).unwrap(), m.strength(w).unwrap());
        }
        assert!(sb.strength(1.5).is_err());
        let inv = DensityInverse::new(&m, 20.0).unwrap();
        for k in 0..=200 {
            let rho = 790.0 + k as f64;
            let w = inv.w(rho).unwrap();
            let a = sb.strength_with_rho_20(w, rho).unwrap();
            let b = m.strength_from_density(rho, 20.0).unwrap();
            assert!(
                (a.abv - b.abv).abs() < 1e-9,
                "{rho}: {} vs {}",
                a.abv,
                b.abv
            );
            assert!((a.proof - b.proof).abs() < 2e-9, "{rho}");
        }
    }
}
