//! Reduction: how much water brings a lot down to a target strength.
//!
//! Masses are conserved and volumes are not, so the calculation is exact in
//! mass: a lot of mass m₀ and mass fraction w₀ reaches w_t with
//! m_water = m₀ (w₀/w_t − 1). Volumes follow from the model's densities.
//! The volume-additive estimate V₂₀ (s/target − 1) is reported beside it,
//! because it is what a hand calculation gives and it falls short by exactly
//! the contraction on mixing.

use super::lot::{describe, require_positive, resolve, volume_20, Lot};
use crate::kernel::composition::Composition;
use crate::kernel::error::{Error, Result};
use crate::kernel::model::{Mixture, T_REF_C};

/// Largest water mass a reduction may call for, kg.
const WATER_CAP_KG: f64 = 1e15;

/// The water to add and what comes out.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Reduction {
    /// Water to add, L at 20 °C.
    pub water_l: f64,
    /// Water to add, kg.
    pub water_kg: f64,
    /// Water to add, L at the water's own temperature.
    pub water_l_at_t: f64,
    /// Volume of the lot before reduction, L at 20 °C.
    pub lot_volume_20: f64,
    /// Volume after reduction, L at 20 °C.
    pub final_volume: f64,
    /// Mass after reduction, kg.
    pub final_mass: f64,
    /// Mass fraction of component 1 after reduction (the target's).
    pub final_w: f64,
    /// Volume lost on mixing, L at 20 °C:
    /// `lot_volume_20 + water_l − final_volume`.
    pub contraction: f64,
    /// The volume-additive estimate `lot_volume_20 × (s / target − 1)`, with
    /// s and target in % vol at 20 °C, L.
    pub naive_water_l: f64,
    /// `naive_water_l − water_l`, L; equals `−contraction`.
    pub naive_error_l: f64,
}

/// Water (at 20 °C) needed to bring `lot` to the `target` strength (any
/// basis). The target must lie strictly between 0 and the lot's strength.
pub fn reduce<M: Mixture + ?Sized>(m: &M, lot: &Lot, target: Composition) -> Result<Reduction> {
    reduce_with_water_at(m, lot, target, T_REF_C)
}

/// As [`reduce`], with the water at `water_t` °C (its density is the model's
/// at w = 0; `water_l_at_t` is measured at that temperature).
pub fn reduce_with_water_at<M: Mixture + ?Sized>(
    m: &M,
    lot: &Lot,
    target: Composition,
    water_t: f64,
) -> Result<Reduction> {
    let r = resolve(m, lot).map_err(|e| e.context("lot"))?;
    let w_t = m
        .mass_fraction(target)
        .map_err(|e| e.context("target strength"))?;
    let water_t = m
        .check_t(water_t)
        .map_err(|e| e.context("water temperature"))?;
    require_positive("the lot's amount", r.mass, "kg")?;
    if w_t <= 0.0 {
        return Err(Error::Infeasible(format!(
            "the target strength must be above zero, got {}; water alone has no alcohol",
            describe(m, w_t)
        )));
    }
    if w_t >= r.w {
        return Err(Error::Infeasible(format!(
            "the target strength {} must be below the lot's strength {}: \
             adding water only lowers the strength",
            describe(m, w_t),
            describe(m, r.w)
        )));
    }
    let rho_water_20 = m.pure_density(1, T_REF_C)?;
    let rho_water_t = m.pure_density(1, water_t)?;

    let water_kg = r.mass * (r.w / w_t - 1.0);
    // A vanishingly weak target would need more water than any figure can
    // mean (and, for subnormal targets, an infinite amount).
    if !water_kg.is_finite() || water_kg > WATER_CAP_KG {
        return Err(Error::Infeasible(format!(
            "the target strength {} is so weak that the lot would need {water_kg:e} kg \
             of water (more than {WATER_CAP_KG:e} kg)",
            describe(m, w_t)
        )));
    }
    let final_mass = r.mass + water_kg;
    let water_l = water_kg * 1000.0 / rho_water_20;
    let lot_volume_20 = volume_20(m, r.mass, r.w)?;
    let final_volume = volume_20(m, final_mass, w_t)?;

    let abv_lot = m.abv_at(r.w, T_REF_C)?;
    let abv_target = m.abv_at(w_t, T_REF_C)?;
    let naive_water_l = lot_volume_20 * (abv_lot / abv_target - 1.0);

    Ok(Reduction {
        water_l,
        water_kg,
        water_l_at_t: water_kg * 1000.0 / rho_water_t,
        lot_volume_20,
        final_volume,
        final_mass,
        final_w: w_t,
        contraction: lot_volume_20 + water_l - final_volume,
        naive_water_l,
        naive_error_l: naive_water_l - water_l,
    })
}
