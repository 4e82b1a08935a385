//! The binary-mixture model trait. A model supplies three things — density
//! ρ(w, t) with its partial derivatives, its two components and its validity
//! range — and every other property (composition bases, inverse solves,
//! volumetric properties, hydrometer readings, uncertainty) is a provided
//! method, so the reference equation and a mixture fitted from user data get
//! all of them.

use super::bulk;
use super::composition::{self, Composition, Strength};
use super::error::{in_range, Result};
use super::hydrometer::{self, HydrometerScale};
use super::solve;
use super::uncertainty::{self, StrengthUncertainty};
use super::volumetric::{self, Mixing};

/// One pure component of a binary mixture.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Component {
    /// Display name, e.g. `"ethanol"`.
    pub name: String,
    /// Molar mass in g/mol.
    pub molar_mass: f64,
}

impl Component {
    /// A component with a name and a molar mass in g/mol.
    pub fn new(name: impl Into<String>, molar_mass: f64) -> Self {
        Self {
            name: name.into(),
            molar_mass,
        }
    }
}

/// The composition and temperature span over which a model holds.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Validity {
    /// Lowest mass fraction of the first component (0–1).
    pub w_min: f64,
    /// Highest mass fraction of the first component (0–1).
    pub w_max: f64,
    /// Lowest temperature, °C.
    pub t_min: f64,
    /// Highest temperature, °C.
    pub t_max: f64,
}

/// Reference temperature of % vol, °C.
pub const T_REF_C: f64 = 20.0;
/// Reference temperature of US proof, 60 °F in °C.
pub const T_PROOF_C: f64 = (60.0 - 32.0) * 5.0 / 9.0;

/// A binary liquid mixture: component 1 (mass fraction `w`) in component 2.
///
/// Implementors supply the required methods; they are called only with `w`
/// and `t` already checked against [`Mixture::validity`], so they need not
/// validate. Everything else is provided and validates its inputs.
pub trait Mixture: Send + Sync {
    /// A short name for messages, e.g. `"ethanol-water (OIML R 22)"`.
    fn name(&self) -> &str;
    /// The two components, in the mixture's fixed order.
    fn components(&self) -> &[Component; 2];
    /// Where the model holds.
    fn validity(&self) -> Validity;
    /// Density ρ(w, t) in kg/m³ (unchecked).
    fn rho(&self, w: f64, t: f64) -> f64;
    /// ∂ρ/∂w at constant t, kg/m³ per unit mass fraction (unchecked).
    fn drho_dw(&self, w: f64, t: f64) -> f64;
    /// ∂ρ/∂t at constant w, kg/m³/K (unchecked).
    fn drho_dt(&self, w: f64, t: f64) -> f64;

    /// ρ and ∂ρ/∂w together; override when one pass is cheaper.
    fn rho_dw(&self, w: f64, t: f64) -> (f64, f64) {
        (self.rho(w, t), self.drho_dw(w, t))
    }

    /// Densities at the two ends of the validity range, (ρ(w_min, t),
    /// ρ(w_max, t)) in kg/m³ (unchecked). Override when closed forms are
    /// cheaper than two [`Mixture::rho`] calls; the density solve uses them
    /// for its reachability check and bracket.
    fn rho_at_ends(&self, t: f64) -> (f64, f64) {
        let v = self.validity();
        (self.rho(v.w_min, t), self.rho(v.w_max, t))
    }

    /// A first guess of w for the density solve; `None` lets the solver
    /// start from linear interpolation between the pure components.
    fn guess_w_from_density(&self, _rho: f64, _t: f64) -> Option<f64> {
        None
    }

    /// A close first guess of w for the % vol solve (`abv` in 0–100 at
    /// `t_ref` °C, both already checked); `None` lets the solver start from
    /// a crude guess inside its bracket. A guess good to ~1e-6 lets the
    /// solve skip the bracket and finish in two Newton steps.
    fn guess_w_from_abv(&self, _abv: f64, _t_ref: f64) -> Option<f64> {
        None
    }

    // ---- checked access -------------------------------------------------

    /// Checks a mass fraction against the validity range.
    fn check_w(&self, w: f64) -> Result<f64> {
        let v = self.validity();
        in_range("mass fraction w", w, v.w_min, v.w_max, "")
    }

    /// Checks a temperature (°C) against the validity range.
    fn check_t(&self, t: f64) -> Result<f64> {
        let v = self.validity();
        in_range("temperature t", t, v.t_min, v.t_max, "°C")
    }

    /// Density ρ(w, t) in kg/m³, with `w` and `t` checked.
    fn density(&self, w: f64, t: f64) -> Result<f64> {
        Ok(self.rho(self.check_w(w)?, self.check_t(t)?))
    }

    /// Density in kg/m³ of a composition given in any basis, at `t` °C.
    fn density_of(&self, c: Composition, t: f64) -> Result<f64> {
        let w = self.mass_fraction(c)?;
        self.density(w, t)
    }

    /// Density of pure component 1 (`i = 0`) or 2 (`i = 1`) at `t`, kg/m³.
    fn pure_density(&self, i: usize, t: f64) -> Result<f64> {
        let v = self.validity();
        let w = match i {
            0 => v.w_max,
            1 => v.w_min,
            _ => {
                return Err(super::Error::Invalid(format!(
                    "component index {i} does not exist: a binary mixture has components 0 and 1"
                )))
            }
        };
        if (i == 0 && v.w_max < 1.0) || (i == 1 && v.w_min > 0.0) {
            return Err(super::Error::Invalid(format!(
                "{} does not cover pure {}",
                self.name(),
                self.components()[i].name
            )));
        }
        self.density(w, t)
    }

    // ---- composition bases ----------------------------------------------

    /// Mass fraction of component 1 for a composition given in any basis.
    fn mass_fraction(&self, c: Composition) -> Result<f64> {
        composition::to_w(self, c)
    }

    /// Strength of mass fraction `w` in every basis.
    fn strength(&self, w: f64) -> Result<Strength> {
        composition::strength(self, self.check_w(w)?)
    }

    /// Converts a composition in any basis to every basis.
    fn convert(&self, c: Composition) -> Result<Strength> {
        let w = self.mass_fraction(c)?;
        composition::strength(self, w)
    }

    /// % vol of component 1 referred to `t_ref` °C (pure component 1 and the
    /// mixture both at `t_ref`).
    fn abv_at(&self, w: f64, t_ref: f64) -> Result<f64> {
        composition::abv(self, self.check_w(w)?, self.check_t(t_ref)?)
    }

    /// Mass fraction from a density measured at `t` °C (bracketed Newton,
    /// converged to 1e-12 in w). A density the model cannot reach at `t` is
    /// an error naming the reachable range.
    fn w_from_density(&self, rho: f64, t: f64) -> Result<f64> {
        solve::w_from_density(self, rho, t)
    }

    /// True strength in every basis from a density measured at `t` °C.
    fn strength_from_density(&self, rho: f64, t: f64) -> Result<Strength> {
        let w = self.w_from_density(rho, t)?;
        composition::strength(self, w)
    }

    /// True strength from a density reading with standard uncertainties
    /// `u_rho` (kg/m³) and `u_t` (K), propagated to first order (GUM).
    fn strength_with_uncertainty(
        &self,
        rho: f64,
        t: f64,
        u_rho: f64,
        u_t: f64,
    ) -> Result<(Strength, StrengthUncertainty)> {
        uncertainty::strength_from_density(self, rho, t, u_rho, u_t)
    }

    /// True strength from a glass hydrometer reading taken at `t` °C.
    fn hydrometer(&self, scale: HydrometerScale, reading: f64, t: f64) -> Result<Strength> {
        hydrometer::true_strength(self, scale, reading, t)
    }

    // ---- volumetric properties ------------------------------------------

    /// Mole fraction of component 1 from mass fraction `w`.
    fn x_from_w(&self, w: f64) -> f64 {
        let [a, b] = self.components();
        composition::x_from_w(w, a.molar_mass, b.molar_mass)
    }

    /// Molar volume V_m = M/ρ of the mixture, cm³/mol.
    fn molar_volume(&self, w: f64, t: f64) -> Result<f64> {
        volumetric::molar_volume(self, self.check_w(w)?, self.check_t(t)?)
    }

    /// Partial molar volumes (V̄₁, V̄₂) in cm³/mol, analytic from ∂ρ/∂w:
    /// V̄₁ = M₁(v + (1−w) ∂v/∂w), V̄₂ = M₂(v − w ∂v/∂w), v = 1/ρ.
    fn partial_molar_volumes(&self, w: f64, t: f64) -> Result<[f64; 2]> {
        volumetric::partial_molar_volumes(self, self.check_w(w)?, self.check_t(t)?)
    }

    /// Partial molar volumes at infinite dilution: V̄₁ at w = 0 and V̄₂ at
    /// w = 1, cm³/mol.
    fn partial_molar_volumes_infinite_dilution(&self, t: f64) -> Result<[f64; 2]> {
        let v1 = self.partial_molar_volumes(0.0, t)?[0];
        let v2 = self.partial_molar_volumes(1.0, t)?[1];
        Ok([v1, v2])
    }

    /// Molar volumes of the pure components at `t`, cm³/mol.
    fn pure_molar_volumes(&self, t: f64) -> Result<[f64; 2]> {
        let [a, b] = self.components();
        Ok([
            a.molar_mass * 1000.0 / self.pure_density(0, t)?,
            b.molar_mass * 1000.0 / self.pure_density(1, t)?,
        ])
    }

    /// Excess molar volume V^E = V_m − x V₁* − (1−x) V₂*, cm³/mol.
    fn excess_molar_volume(&self, w: f64, t: f64) -> Result<f64> {
        volumetric::excess_molar_volume(self, self.check_w(w)?, self.check_t(t)?)
    }

    /// Apparent molar volumes (φV₁, φV₂), cm³/mol: φV₁ = (V_m − (1−x)V₂*)/x
    /// and symmetrically; at infinite dilution they equal the partial molar
    /// volume there.
    fn apparent_molar_volumes(&self, w: f64, t: f64) -> Result<[f64; 2]> {
        volumetric::apparent_molar_volumes(self, self.check_w(w)?, self.check_t(t)?)
    }

    /// Cubic thermal expansion coefficient α = −(1/ρ) ∂ρ/∂t, 1/K.
    fn expansion_coefficient(&self, w: f64, t: f64) -> Result<f64> {
        let (w, t) = (self.check_w(w)?, self.check_t(t)?);
        Ok(-self.drho_dt(w, t) / self.rho(w, t))
    }

    /// Mixing the given volumes (L) of pure components 1 and 2, both at
    /// `t` °C; the mixture is also at `t`.
    fn mix_volumes(&self, v1_l: f64, v2_l: f64, t: f64) -> Result<Mixing> {
        volumetric::mix_volumes(self, v1_l, v2_l, t)
    }

    /// Mixing the given masses (kg) of pure components 1 and 2 at `t` °C.
    fn mix_masses(&self, m1_kg: f64, m2_kg: f64, t: f64) -> Result<Mixing> {
        volumetric::mix_masses(self, m1_kg, m2_kg, t)
    }

    /// Volume at `t_to` of a liquid of mass fraction `w` that measures
    /// `volume` (finite, not negative) at `t_from` (mass conserved). Same
    /// unit in and out.
    fn volume_at(&self, volume: f64, w: f64, t_from: f64, t_to: f64) -> Result<f64> {
        let volume = in_range("volume", volume, 0.0, f64::MAX, "")?;
        let v = volume * self.volume_correction_factor(w, t_from, t_to)?;
        // A volume near f64::MAX can overflow on expansion.
        super::error::finite("volume after correction", v)
    }

    /// The factor V(t_to)/V(t_from) = ρ(t_from)/ρ(t_to).
    fn volume_correction_factor(&self, w: f64, t_from: f64, t_to: f64) -> Result<f64> {
        let w = self.check_w(w)?;
        Ok(self.rho(w, self.check_t(t_from)?) / self.rho(w, self.check_t(t_to)?))
    }

    // ---- bulk (slice) versions ------------------------------------------

    /// `out[i] = ρ(w[i], t[i])` in kg/m³ for equally long slices. All points
    /// are checked first; the first bad one is reported as
    /// [`Error::AtPoint`](super::Error::AtPoint) and `out` is left untouched.
    fn density_slice(&self, w: &[f64], t: &[f64], out: &mut [f64]) -> Result<()> {
        bulk::density_slice(self, w, t, out)
    }

    /// `out[i] = ∂ρ/∂w(w[i], t[i])` in kg/m³ per unit mass fraction, checked
    /// like [`Mixture::density_slice`].
    fn drho_dw_slice(&self, w: &[f64], t: &[f64], out: &mut [f64]) -> Result<()> {
        bulk::drho_dw_slice(self, w, t, out)
    }

    /// `out[i]` = % vol at `t_ref` °C of mass fraction `w[i]`, as
    /// [`Mixture::abv_at`] point by point (same values, bit for bit). All
    /// points are checked first, as in [`Mixture::density_slice`].
    fn abv_slice(&self, w: &[f64], t_ref: f64, out: &mut [f64]) -> Result<()> {
        bulk::abv_slice(self, w, t_ref, out)
    }

    /// `out[i]` = mass fraction from density `rho[i]` (kg/m³) measured at
    /// `t[i]` °C, as [`Mixture::w_from_density`] point by point (to the
    /// solver's tolerance: a long column at one temperature goes through a
    /// prepared inverse, see [`bulk::w_from_density_slice`]). On the first
    /// bad point it returns [`Error::AtPoint`](super::Error::AtPoint);
    /// `out` then holds the points before it.
    fn w_from_density_slice(&self, rho: &[f64], t: &[f64], out: &mut [f64]) -> Result<()> {
        bulk::w_from_density_slice(self, rho, t, out)
    }
}
