//! The fitted mixture itself: evaluation of V_m, ρ and their derivatives
//! (so it is a [`Mixture`]), a precomputed isotherm for fast bulk work,
//! standard uncertainties propagated from the fit covariance, and the
//! extrapolation policy.
//!
//! Extrapolation: `validity()` is the data range (composition span of all
//! rows, temperature span of the mixture rows), so every checked method of
//! [`Mixture`] refuses points outside it with an out-of-range error. A
//! caller who wants to go further calls
//! [`FittedMixture::allow_extrapolation`] with the wider range, and can ask
//! [`FittedMixture::extrapolation_warning`] for a sentence to show beside
//! any result outside the data.

use super::{FitRow, PureDensity, MAX_TERMS};
use crate::kernel::composition::x_from_w;
use crate::kernel::error::{Error, Result};
use crate::kernel::model::{Component, Mixture, Validity};

/// A value with its standard uncertainty (same unit).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Estimate {
    /// The value.
    pub value: f64,
    /// Its standard uncertainty (k = 1).
    pub u: f64,
}

/// Whether a pure-density curve was fitted or given.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum PureOrigin {
    /// Fitted to the data's pure rows.
    Fitted,
    /// Given by the caller.
    Given,
}

/// A pure-component curve with the covariance of its coefficients (row-
/// major, `None` when it is given or has no residual degrees of freedom).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct PureCurve {
    pub density: PureDensity,
    pub cov: Option<Vec<f64>>,
    pub origin: PureOrigin,
}

impl PureCurve {
    /// Standard uncertainty of ρ*(t) from the coefficient covariance.
    fn u_rho(&self, t: f64) -> f64 {
        let Some(cov) = &self.cov else { return 0.0 };
        let n = self.density.coefficients.len();
        let d = t - self.density.t0;
        let mut h = [0.0; super::MAX_PURE_COEFFS];
        let mut p = 1.0;
        for hj in h.iter_mut().take(n) {
            *hj = p;
            p *= d;
        }
        quad_form(cov, &h[..n]).sqrt()
    }
}

/// The excess part: coefficients a_kj at index k(q+1)+j and their
/// covariance (row-major, p × p).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Excess {
    pub t0: f64,
    pub terms: usize,
    pub t_order: usize,
    pub coef: Vec<f64>,
    pub cov: Vec<f64>,
}

impl Excess {
    /// A_k(t) and dA_k/dt for k < terms.
    #[inline]
    fn a_at(&self, t: f64) -> ([f64; MAX_TERMS], [f64; MAX_TERMS]) {
        let d = t - self.t0;
        let q1 = self.t_order + 1;
        let mut a = [0.0; MAX_TERMS];
        let mut da = [0.0; MAX_TERMS];
        for k in 0..self.terms {
            let c = &self.coef[k * q1..(k + 1) * q1];
            let (mut p, mut dp) = (0.0, 0.0);
            for &cj in c.iter().rev() {
                dp = dp * d + p;
                p = p * d + cj;
            }
            a[k] = p;
            da[k] = dp;
        }
        (a, da)
    }
}

/// Where a fitted model's data came from.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Provenance {
    /// Source name given by the caller (file, notebook, instrument run).
    pub source: String,
    /// Date string given by the caller, kept as written.
    pub date: String,
    /// The rows the model was fitted to.
    pub rows: Vec<FitRow>,
}

/// A binary mixture fitted to measured densities (see the module doc of
/// [`crate::kernel::fit`](mod@crate::kernel::fit) for the model). Implements [`Mixture`], so every
/// provided property works on it.
#[derive(Debug, Clone, PartialEq)]
pub struct FittedMixture {
    pub(crate) name: String,
    pub(crate) components: [Component; 2],
    pub(crate) pure: [PureCurve; 2],
    pub(crate) excess: Excess,
    pub(crate) data_range: Validity,
    pub(crate) validity: Validity,
    pub(crate) provenance: Provenance,
}

/// Horner value and derivative of Σ A_k z^k.
#[inline(always)]
fn rk_poly(a: &[f64], z: f64) -> (f64, f64) {
    let (mut p, mut dp) = (0.0, 0.0);
    for &ak in a.iter().rev() {
        dp = dp * z + p;
        p = p * z + ak;
    }
    (p, dp)
}

/// aᵀ C a for a row-major square C.
fn quad_form(c: &[f64], a: &[f64]) -> f64 {
    let n = a.len();
    let mut s = 0.0;
    for i in 0..n {
        let mut row = 0.0;
        for j in 0..n {
            row += c[i * n + j] * a[j];
        }
        s += a[i] * row;
    }
    s.max(0.0)
}

/// Everything at one (w, t) that the density and its derivatives need.
struct Point {
    x: f64,
    mbar: f64,
    dmbar_dw: f64,
    dx_dw: f64,
    vm: f64,
    dvm_dx: f64,
    dvm_dt: f64,
}

impl FittedMixture {
    /// The data range: composition span of all rows (0–1 when the data
    /// have pure rows at both ends) and temperature span of the mixture
    /// rows. Unlike [`Mixture::validity`] this never widens.
    pub fn data_range(&self) -> Validity {
        self.data_range
    }

    /// Lets the checked methods evaluate over `range` as well as the data
    /// range (the union of both). w must stay within 0–1. Results outside
    /// the data range are extrapolations: see
    /// [`FittedMixture::extrapolation_warning`].
    pub fn allow_extrapolation(&mut self, range: Validity) -> Result<()> {
        let ok = [range.w_min, range.w_max, range.t_min, range.t_max]
            .iter()
            .all(|v| v.is_finite());
        if !ok
            || range.w_min < 0.0
            || range.w_max > 1.0
            || range.w_min > range.w_max
            || range.t_min > range.t_max
        {
            return Err(Error::Invalid(format!(
                "extrapolation range must be finite with 0 <= w_min <= w_max <= 1 and t_min <= t_max, got w {}..{} and t {}..{} °C",
                range.w_min, range.w_max, range.t_min, range.t_max
            )));
        }
        let d = self.data_range;
        self.validity = Validity {
            w_min: d.w_min.min(range.w_min),
            w_max: d.w_max.max(range.w_max),
            t_min: d.t_min.min(range.t_min),
            t_max: d.t_max.max(range.t_max),
        };
        Ok(())
    }

    /// A sentence warning that (w, t) lies outside the data range, or
    /// `None` inside it.
    pub fn extrapolation_warning(&self, w: f64, t: f64) -> Option<String> {
        let d = self.data_range;
        let mut parts = Vec::new();
        if !(w >= d.w_min && w <= d.w_max) {
            parts.push(format!(
                "mass fraction w = {w} is outside the fitted data's {}..{}",
                d.w_min, d.w_max
            ));
        }
        if !(t >= d.t_min && t <= d.t_max) {
            parts.push(format!(
                "temperature {t} °C is outside the fitted data's {}..{} °C",
                d.t_min, d.t_max
            ));
        }
        if parts.is_empty() {
            None
        } else {
            Some(format!(
                "extrapolation for {}: {}; the result is not supported by measurements",
                self.name,
                parts.join(" and ")
            ))
        }
    }

    /// Number of Redlich–Kister terms n.
    pub fn terms(&self) -> usize {
        self.excess.terms
    }

    /// Temperature order q of the coefficients.
    pub fn t_order(&self) -> usize {
        self.excess.t_order
    }

    /// Centre t₀ (°C) of the coefficient polynomials.
    pub fn t_center(&self) -> f64 {
        self.excess.t0
    }

    /// The coefficients a_kj (cm³/mol/K^j) as rows k, columns j.
    pub fn coefficients(&self) -> Vec<Vec<f64>> {
        let q1 = self.excess.t_order + 1;
        self.excess.coef.chunks(q1).map(|c| c.to_vec()).collect()
    }

    /// Covariance of the coefficients in the order a_00, a_01, …, a_10, …
    /// (index k(q+1)+j).
    pub fn covariance(&self) -> nalgebra::DMatrix<f64> {
        let p = self.excess.coef.len();
        nalgebra::DMatrix::from_row_slice(p, p, &self.excess.cov)
    }

    /// The Redlich–Kister coefficients A_k(t) at `t` °C, cm³/mol.
    pub fn excess_coefficients_at(&self, t: f64) -> Vec<f64> {
        self.excess.a_at(t).0[..self.excess.terms].to_vec()
    }

    /// Pure-density curve of component `i` (0 or 1; anything else reads 1)
    /// and where it came from.
    pub fn pure_density_curve(&self, i: usize) -> (&PureDensity, PureOrigin) {
        let c = &self.pure[i.min(1)];
        (&c.density, c.origin)
    }

    /// Source, date and rows of the data.
    pub fn provenance(&self) -> &Provenance {
        &self.provenance
    }

    /// Pure molar volumes and their t-derivatives at `t`.
    #[inline]
    fn pure_volumes(&self, t: f64) -> ([f64; 2], [f64; 2]) {
        let mut v = [0.0; 2];
        let mut dv = [0.0; 2];
        for i in 0..2 {
            let (r, dr) = self.pure[i].density.eval(t);
            let m = self.components[i].molar_mass;
            v[i] = 1000.0 * m / r;
            dv[i] = -v[i] * dr / r;
        }
        (v, dv)
    }

    #[inline]
    fn point(&self, w: f64, t: f64) -> Point {
        let m1 = self.components[0].molar_mass;
        let m2 = self.components[1].molar_mass;
        let s = w / m1 + (1.0 - w) / m2;
        let mbar = 1.0 / s;
        let x = (w / m1) * mbar;
        let dx_dw = 1.0 / (m1 * m2 * s * s);
        let dmbar_dw = -(1.0 / m1 - 1.0 / m2) * mbar * mbar;
        let (v, dv) = self.pure_volumes(t);
        let (a, da) = self.excess.a_at(t);
        let n = self.excess.terms;
        let z = 2.0 * x - 1.0;
        let (p, dp) = rk_poly(&a[..n], z);
        let (pt, _) = rk_poly(&da[..n], z);
        let xx = x * (1.0 - x);
        let ve = xx * p;
        let dve_dx = -z * p + 2.0 * xx * dp;
        let dve_dt = xx * pt;
        Point {
            x,
            mbar,
            dmbar_dw,
            dx_dw,
            vm: x * v[0] + (1.0 - x) * v[1] + ve,
            dvm_dx: v[0] - v[1] + dve_dx,
            dvm_dt: x * dv[0] + (1.0 - x) * dv[1] + dve_dt,
        }
    }

    /// A model evaluated at one temperature, for fast evaluation at many
    /// compositions (`t` checked against the validity range).
    pub fn at(&self, t: f64) -> Result<Isotherm> {
        let t = self.check_t(t)?;
        let (v, _) = self.pure_volumes(t);
        let (a, _) = self.excess.a_at(t);
        let n = self.excess.terms;
        // V^E = x(1−x) P(z) = (1 − z²)/4 · P(z) = Q(z); with x = (1+z)/2
        // and d/dx = 2 d/dz, V̄₁ = V₁* + Q + (1−z)Q' and
        // V̄₂ = V₂* + Q − (1+z)Q', both polynomials in z.
        let mut q = [0.0; MAX_TERMS + 3];
        for m in 0..n + 2 {
            let pm = if m < n { a[m] } else { 0.0 };
            let pm2 = if (2..n + 2).contains(&m) {
                a[m - 2]
            } else {
                0.0
            };
            q[m] = 0.25 * (pm - pm2);
        }
        let mut f1 = [0.0; MAX_TERMS + 2];
        let mut f2 = [0.0; MAX_TERMS + 2];
        for m in 0..n + 2 {
            let up = (m + 1) as f64 * q[m + 1];
            let own = (1.0 - m as f64) * q[m];
            f1[m] = own + up;
            f2[m] = own - up;
        }
        f1[0] += v[0];
        f2[0] += v[1];
        Ok(Isotherm {
            t,
            n,
            a,
            f1,
            f2,
            v1: v[0],
            v2: v[1],
            inv_m1: 1.0 / self.components[0].molar_mass,
            inv_m2: 1.0 / self.components[1].molar_mass,
            w_min: self.validity.w_min,
            w_max: self.validity.w_max,
        })
    }

    /// Gradient of V^E, V̄₁ and V̄₂ with respect to the coefficients a_kj.
    fn gradients(&self, x: f64, t: f64) -> [Vec<f64>; 3] {
        let n = self.excess.terms;
        let q1 = self.excess.t_order + 1;
        let d = t - self.excess.t0;
        let z = 2.0 * x - 1.0;
        let xx = x * (1.0 - x);
        let mut g = [vec![0.0; n * q1], vec![0.0; n * q1], vec![0.0; n * q1]];
        let mut zk = 1.0; // z^k
        let mut zk1 = 0.0; // z^(k−1), 0 for k = 0
        for k in 0..n {
            // ∂V^E/∂A_k and ∂(dV^E/dx)/∂A_k.
            let f = xx * zk;
            let df = -z * zk + 2.0 * xx * (k as f64) * zk1;
            let gv = [f, f + (1.0 - x) * df, f - x * df];
            let mut dj = 1.0;
            for j in 0..q1 {
                for (m, gm) in g.iter_mut().enumerate() {
                    gm[k * q1 + j] = gv[m] * dj;
                }
                dj *= d;
            }
            zk1 = zk;
            zk *= z;
        }
        g
    }

    /// u(V_i*) at `t` from the pure curve's covariance.
    fn u_pure_volume(&self, i: usize, t: f64) -> f64 {
        let (r, _) = self.pure[i].density.eval(t);
        let v = 1000.0 * self.components[i].molar_mass / r;
        v * self.pure[i].u_rho(t) / r
    }

    /// Excess molar volume (cm³/mol) with its standard uncertainty from
    /// the coefficient covariance (V^E is linear in the coefficients, so
    /// the propagation is exact).
    pub fn excess_molar_volume_u(&self, w: f64, t: f64) -> Result<Estimate> {
        let (w, t) = (self.check_w(w)?, self.check_t(t)?);
        let x = self.x_from_w(w);
        let g = self.gradients(x, t);
        let (a, _) = self.excess.a_at(t);
        let n = self.excess.terms;
        let ve = x * (1.0 - x) * rk_poly(&a[..n], 2.0 * x - 1.0).0;
        Ok(Estimate {
            value: ve,
            u: quad_form(&self.excess.cov, &g[0]).sqrt(),
        })
    }

    /// Density (kg/m³) with its standard uncertainty: the coefficient
    /// part plus the pure curves' parts, added as uncorrelated (the pure
    /// curves are fitted first and held fixed; treating them as
    /// independent overstates u slightly, because the excess fit partly
    /// absorbs an error in a pure curve).
    pub fn density_u(&self, w: f64, t: f64) -> Result<Estimate> {
        let (w, t) = (self.check_w(w)?, self.check_t(t)?);
        let p = self.point(w, t);
        let rho = 1000.0 * p.mbar / p.vm;
        let g = self.gradients(p.x, t);
        let u_ve2 = quad_form(&self.excess.cov, &g[0]);
        let u1 = p.x * self.u_pure_volume(0, t);
        let u2 = (1.0 - p.x) * self.u_pure_volume(1, t);
        let u_vm = (u_ve2 + u1 * u1 + u2 * u2).sqrt();
        Ok(Estimate {
            value: rho,
            u: rho * u_vm / p.vm,
        })
    }

    /// Partial molar volumes (V̄₁, V̄₂) in cm³/mol with standard
    /// uncertainties (coefficient covariance, exact by linearity, plus the
    /// pure molar volume's own uncertainty, uncorrelated).
    pub fn partial_molar_volumes_u(&self, w: f64, t: f64) -> Result<[Estimate; 2]> {
        let (w, t) = (self.check_w(w)?, self.check_t(t)?);
        let x = self.x_from_w(w);
        let iso = self.at(t)?;
        let [v1, v2] = iso.partial_molar_volumes_x(x);
        let g = self.gradients(x, t);
        let u1 = (quad_form(&self.excess.cov, &g[1]) + self.u_pure_volume(0, t).powi(2)).sqrt();
        let u2 = (quad_form(&self.excess.cov, &g[2]) + self.u_pure_volume(1, t).powi(2)).sqrt();
        Ok([Estimate { value: v1, u: u1 }, Estimate { value: v2, u: u2 }])
    }

    /// Partial molar volumes at every mass fraction in `ws`, at `t` °C,
    /// appended to `out` (cleared first). Every w is checked; an error
    /// names the first bad index (counting from 0).
    pub fn partial_molar_volumes_many(
        &self,
        t: f64,
        ws: &[f64],
        out: &mut Vec<[f64; 2]>,
    ) -> Result<()> {
        self.at(t)?.partial_molar_volumes_into(ws, out)
    }
}

/// A fitted model frozen at one temperature: the Redlich–Kister
/// coefficients A_k(t) and pure molar volumes are evaluated once, and the
/// partial molar volumes are rewritten as two polynomials in z = 2x − 1,
/// so each composition costs one division and two interleaved Horner
/// passes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Isotherm {
    t: f64,
    n: usize,
    a: [f64; MAX_TERMS],
    /// V̄₁(z) coefficients (n + 2 of them).
    f1: [f64; MAX_TERMS + 2],
    /// V̄₂(z) coefficients.
    f2: [f64; MAX_TERMS + 2],
    v1: f64,
    v2: f64,
    inv_m1: f64,
    inv_m2: f64,
    w_min: f64,
    w_max: f64,
}

impl Isotherm {
    /// The temperature, °C.
    pub fn t(&self) -> f64 {
        self.t
    }

    /// Pure molar volumes (V₁*, V₂*) at this temperature, cm³/mol.
    pub fn pure_molar_volumes(&self) -> [f64; 2] {
        [self.v1, self.v2]
    }

    /// Mole fraction of component 1 from mass fraction.
    #[inline]
    pub fn x_from_w(&self, w: f64) -> f64 {
        let n1 = w * self.inv_m1;
        n1 / (n1 + (1.0 - w) * self.inv_m2)
    }

    /// V^E(x) in cm³/mol (x not checked).
    #[inline]
    pub fn excess_x(&self, x: f64) -> f64 {
        x * (1.0 - x) * rk_poly(&self.a[..self.n], 2.0 * x - 1.0).0
    }

    /// V_m(x) in cm³/mol (x not checked).
    #[inline]
    pub fn molar_volume_x(&self, x: f64) -> f64 {
        x * self.v1 + (1.0 - x) * self.v2 + self.excess_x(x)
    }

    /// (V̄₁, V̄₂) at mole fraction x, cm³/mol (x not checked):
    /// V̄₁ = V_m + (1−x) dV_m/dx, V̄₂ = V_m − x dV_m/dx.
    #[inline]
    pub fn partial_molar_volumes_x(&self, x: f64) -> [f64; 2] {
        self.pmv_z(2.0 * x - 1.0)
    }

    /// (V̄₁, V̄₂) at mass fraction w, cm³/mol (w not checked).
    #[inline]
    pub fn partial_molar_volumes_w(&self, w: f64) -> [f64; 2] {
        let n1 = w * self.inv_m1;
        let n2 = (1.0 - w) * self.inv_m2;
        self.pmv_z((n1 - n2) / (n1 + n2))
    }

    #[inline(always)]
    fn pmv_z(&self, z: f64) -> [f64; 2] {
        let k = self.n + 2;
        let (mut p1, mut p2) = (0.0, 0.0);
        for m in (0..k).rev() {
            p1 = p1 * z + self.f1[m];
            p2 = p2 * z + self.f2[m];
        }
        [p1, p2]
    }

    /// Partial molar volumes at each mass fraction of `ws` into `out`
    /// (cleared first); a w outside the model's range is an error naming
    /// its index (from 0), and `out` is left empty.
    pub fn partial_molar_volumes_into(&self, ws: &[f64], out: &mut Vec<[f64; 2]>) -> Result<()> {
        out.clear();
        if let Some((i, &w)) = ws
            .iter()
            .enumerate()
            .find(|(_, &w)| !(w >= self.w_min && w <= self.w_max))
        {
            return Err(Error::Invalid(format!(
                "mass fraction at index {i} is {w}, outside the valid range {} to {}",
                self.w_min, self.w_max
            )));
        }
        out.reserve(ws.len());
        out.extend(ws.iter().map(|&w| self.partial_molar_volumes_w(w)));
        Ok(())
    }
}

impl Mixture for FittedMixture {
    fn name(&self) -> &str {
        &self.name
    }

    fn components(&self) -> &[Component; 2] {
        &self.components
    }

    fn validity(&self) -> Validity {
        self.validity
    }

    #[inline]
    fn rho(&self, w: f64, t: f64) -> f64 {
        let p = self.point(w, t);
        1000.0 * p.mbar / p.vm
    }

    #[inline]
    fn drho_dw(&self, w: f64, t: f64) -> f64 {
        self.rho_dw(w, t).1
    }

    #[inline]
    fn drho_dt(&self, w: f64, t: f64) -> f64 {
        let p = self.point(w, t);
        -1000.0 * p.mbar * p.dvm_dt / (p.vm * p.vm)
    }

    #[inline]
    fn rho_dw(&self, w: f64, t: f64) -> (f64, f64) {
        let p = self.point(w, t);
        let rho = 1000.0 * p.mbar / p.vm;
        let dvm_dw = p.dvm_dx * p.dx_dw;
        let drho = 1000.0 * (p.dmbar_dw * p.vm - p.mbar * dvm_dw) / (p.vm * p.vm);
        (rho, drho)
    }

    fn x_from_w(&self, w: f64) -> f64 {
        x_from_w(
            w,
            self.components[0].molar_mass,
            self.components[1].molar_mass,
        )
    }
}
