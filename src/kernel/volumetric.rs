//! Volumetric properties of any [`Mixture`]: molar, partial molar, excess
//! and apparent molar volumes, and the volume change on mixing. Molar
//! volumes are in cm³/mol; with ρ in kg/m³ and M in g/mol, V = 1000 M/ρ.

use super::composition::x_from_w;
use super::error::{finite, Error, Result};
use super::model::Mixture;

/// Mean molar mass of the mixture at mass fraction `w`, g/mol.
pub fn mean_molar_mass(w: f64, m1: f64, m2: f64) -> f64 {
    1.0 / (w / m1 + (1.0 - w) / m2)
}

/// V_m = 1000 M̄/ρ, cm³/mol (`w` and `t` checked).
pub fn molar_volume<M: Mixture + ?Sized>(m: &M, w: f64, t: f64) -> Result<f64> {
    let (w, t) = (m.check_w(w)?, m.check_t(t)?);
    let [a, b] = m.components();
    Ok(1000.0 * mean_molar_mass(w, a.molar_mass, b.molar_mass) / m.rho(w, t))
}

/// Partial molar volumes from the partial specific volumes
/// v̄₁ = v + (1−w) ∂v/∂w and v̄₂ = v − w ∂v/∂w, with v = 1/ρ and
/// ∂v/∂w = −ρ_w/ρ² (`w` and `t` checked).
pub fn partial_molar_volumes<M: Mixture + ?Sized>(m: &M, w: f64, t: f64) -> Result<[f64; 2]> {
    let (w, t) = (m.check_w(w)?, m.check_t(t)?);
    let [a, b] = m.components();
    let (r, dr) = m.rho_dw(w, t);
    Ok(pmv_from_rho(r, dr, w, a.molar_mass, b.molar_mass))
}

/// The partial molar volume formula on its own, for models that evaluate
/// ρ and ∂ρ/∂w in bulk.
#[inline]
pub fn pmv_from_rho(r: f64, dr: f64, w: f64, m1: f64, m2: f64) -> [f64; 2] {
    let v = 1.0 / r;
    let dv = -dr / (r * r);
    [
        1000.0 * m1 * (v + (1.0 - w) * dv),
        1000.0 * m2 * (v - w * dv),
    ]
}

/// V^E = V_m − x V₁* − (1−x) V₂* (`w` and `t` checked).
pub fn excess_molar_volume<M: Mixture + ?Sized>(m: &M, w: f64, t: f64) -> Result<f64> {
    let (w, t) = (m.check_w(w)?, m.check_t(t)?);
    let [a, b] = m.components();
    let x = x_from_w(w, a.molar_mass, b.molar_mass);
    let [v1, v2] = m.pure_molar_volumes(t)?;
    Ok(molar_volume(m, w, t)? - x * v1 - (1.0 - x) * v2)
}

/// φV₁ = (V_m − (1−x)V₂*)/x, φV₂ = (V_m − xV₁*)/(1−x); at x = 0 (resp. 1)
/// the limit, which is the partial molar volume at infinite dilution
/// (`w` and `t` checked).
pub fn apparent_molar_volumes<M: Mixture + ?Sized>(m: &M, w: f64, t: f64) -> Result<[f64; 2]> {
    let (w, t) = (m.check_w(w)?, m.check_t(t)?);
    let [a, b] = m.components();
    let x = x_from_w(w, a.molar_mass, b.molar_mass);
    let [v1s, v2s] = m.pure_molar_volumes(t)?;
    let vm = molar_volume(m, w, t)?;
    let pmv = partial_molar_volumes(m, w, t)?;
    let phi1 = if x > 0.0 {
        (vm - (1.0 - x) * v2s) / x
    } else {
        pmv[0]
    };
    let phi2 = if x < 1.0 {
        (vm - x * v1s) / (1.0 - x)
    } else {
        pmv[1]
    };
    Ok([phi1, phi2])
}

/// The result of mixing two pure components.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Mixing {
    /// Mass fraction of component 1 in the mixture.
    pub w: f64,
    /// Mass of the mixture, kg.
    pub mass: f64,
    /// Sum of the two volumes before mixing, L.
    pub volume_sum: f64,
    /// Volume of the mixture, L.
    pub volume: f64,
    /// volume_sum − volume, L (positive when the volume shrinks).
    pub contraction: f64,
}

/// Mixing `v1` and `v2` litres of the pure components, all at `t` °C.
pub fn mix_volumes<M: Mixture + ?Sized>(m: &M, v1: f64, v2: f64, t: f64) -> Result<Mixing> {
    let v1 = non_negative("volume of component 1", v1)?;
    let v2 = non_negative("volume of component 2", v2)?;
    let t = m.check_t(t)?;
    let m1 = finite("mass of component 1", v1 * m.pure_density(0, t)? / 1000.0)?;
    let m2 = finite("mass of component 2", v2 * m.pure_density(1, t)? / 1000.0)?;
    let mut r = mix_masses(m, m1, m2, t)?;
    r.volume_sum = v1 + v2;
    r.contraction = r.volume_sum - r.volume;
    Ok(r)
}

/// Mixing `m1` and `m2` kg of the pure components, all at `t` °C.
pub fn mix_masses<M: Mixture + ?Sized>(m: &M, m1: f64, m2: f64, t: f64) -> Result<Mixing> {
    let m1 = non_negative("mass of component 1", m1)?;
    let m2 = non_negative("mass of component 2", m2)?;
    let t = m.check_t(t)?;
    let total = finite("total mass", m1 + m2)?;
    if total <= 0.0 {
        return Err(Error::Invalid(
            "nothing to mix: both amounts are zero".into(),
        ));
    }
    let w = m.check_w(m1 / total)?;
    // The factor 1000 can overflow for totals near f64::MAX.
    let volume = finite("mixture volume", total * 1000.0 / m.rho(w, t))?;
    let volume_sum = finite(
        "sum of the volumes",
        m1 * 1000.0 / m.pure_density(0, t)? + m2 * 1000.0 / m.pure_density(1, t)?,
    )?;
    Ok(Mixing {
        w,
        mass: total,
        volume_sum,
        volume,
        contraction: volume_sum - volume,
    })
}

fn non_negative(quantity: &'static str, v: f64) -> Result<f64> {
    finite(quantity, v)?;
    if v < 0.0 {
        return Err(Error::Invalid(format!(
            "{quantity} must not be negative, got {v}"
        )));
    }
    Ok(v)
}
