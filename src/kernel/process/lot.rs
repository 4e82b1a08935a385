//! A lot of liquid as the process calculations take it — an amount (a volume
//! gauged at a temperature, a true mass, or a mass weighed in air) and a
//! strength in any basis — and its reduction to the two numbers every
//! calculation works with: true mass and mass fraction.
//!
//! Mass is the conserved quantity when liquids are mixed or warmed, so every
//! calculation converts to mass first and back to volumes at the end.

use crate::kernel::composition::{self, Composition};
use crate::kernel::error::{in_range, Error, Result};
use crate::kernel::model::{Mixture, T_REF_C};

/// Largest amount accepted, in L or kg (10¹² — a million cubic metres, far
/// beyond any tank). The cap keeps every derived figure finite.
pub const MAX_AMOUNT: f64 = 1e12;

/// How a mass was weighed in air, for the buoyancy correction.
///
/// A balance compares the liquid with reference weights; both are buoyed up
/// by the air they displace. The true (in vacuum) mass is
/// `m_true = m_air × (1 − ρ_air/ρ_weights) / (1 − ρ_air/ρ_liquid)`,
/// with `m_air` the balance reading. The conventional values (air
/// 1.2 kg/m³, weights 8000 kg/m³) are those to which commercial weights
/// are adjusted (common practice).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Weighing {
    /// Density of the air at the balance, kg/m³ (0–10).
    pub air_density: f64,
    /// Density of the reference weights, kg/m³ (1000–30000).
    pub weights_density: f64,
}

impl Default for Weighing {
    /// Air 1.2 kg/m³, weights 8000 kg/m³.
    fn default() -> Self {
        Weighing {
            air_density: 1.2,
            weights_density: 8000.0,
        }
    }
}

impl Weighing {
    fn check(&self) -> Result<()> {
        in_range("air density", self.air_density, 0.0, 10.0, "kg/m³")?;
        in_range(
            "density of the reference weights",
            self.weights_density,
            1000.0,
            30000.0,
            "kg/m³",
        )?;
        Ok(())
    }

    /// Checks a liquid density for the correction. Any liquid is far denser
    /// than the 10 kg/m³ air allowed, so the correction's denominator stays
    /// positive.
    fn check_liquid(&self, liquid_density: f64) -> Result<f64> {
        in_range("liquid density", liquid_density, 100.0, 30000.0, "kg/m³")
    }

    /// True mass (kg, in vacuum) of a liquid of density `liquid_density`
    /// (kg/m³) that balanced `mass_in_air` kg of reference weights.
    pub fn true_mass(&self, mass_in_air: f64, liquid_density: f64) -> Result<f64> {
        self.check()?;
        let m = in_range("mass weighed in air", mass_in_air, 0.0, MAX_AMOUNT, "kg")?;
        let rl = self.check_liquid(liquid_density)?;
        let (ra, rw) = (self.air_density, self.weights_density);
        Ok(m * (1.0 - ra / rw) / (1.0 - ra / rl) + 0.0)
    }

    /// The balance reading (kg of reference weights in air) for a true mass
    /// `true_mass` kg of a liquid of density `liquid_density` kg/m³; the
    /// inverse of [`Weighing::true_mass`].
    pub fn mass_in_air(&self, true_mass: f64, liquid_density: f64) -> Result<f64> {
        self.check()?;
        let m = in_range("true mass", true_mass, 0.0, MAX_AMOUNT, "kg")?;
        let rl = self.check_liquid(liquid_density)?;
        let (ra, rw) = (self.air_density, self.weights_density);
        Ok(m * (1.0 - ra / rl) / (1.0 - ra / rw) + 0.0)
    }
}

/// How much liquid a lot holds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Amount {
    /// A gauged volume.
    Volume {
        /// Volume, L, at `t`.
        litres: f64,
        /// Temperature of the liquid when gauged, °C.
        t: f64,
    },
    /// A true mass (in vacuum).
    Mass {
        /// Mass, kg.
        kg: f64,
    },
    /// A mass weighed in air; the liquid's density at `t` enters the
    /// buoyancy correction.
    WeighedInAir {
        /// Balance reading, kg of reference weights.
        kg: f64,
        /// Temperature of the liquid when weighed, °C.
        t: f64,
        /// Air and reference-weight densities.
        weighing: Weighing,
    },
}

impl Amount {
    /// True mass in kg of this amount of a liquid of mass fraction `w`.
    pub fn mass<M: Mixture + ?Sized>(&self, m: &M, w: f64) -> Result<f64> {
        let w = m.check_w(w)?;
        match *self {
            Amount::Volume { litres, t } => {
                let v = in_range("volume", litres, 0.0, MAX_AMOUNT, "L")?;
                let t = m.check_t(t)?;
                Ok(v * m.rho(w, t) / 1000.0 + 0.0)
            }
            Amount::Mass { kg } => Ok(in_range("mass", kg, 0.0, MAX_AMOUNT, "kg")? + 0.0),
            Amount::WeighedInAir { kg, t, weighing } => {
                let t = m.check_t(t)?;
                weighing.true_mass(kg, m.rho(w, t))
            }
        }
    }
}

/// A quantity of liquid of one strength.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Lot {
    /// How much there is.
    pub amount: Amount,
    /// Its strength, in any basis.
    pub strength: Composition,
}

impl Lot {
    /// `litres` L gauged at `t` °C, of strength `strength`.
    pub fn volume(litres: f64, t: f64, strength: Composition) -> Self {
        Lot {
            amount: Amount::Volume { litres, t },
            strength,
        }
    }

    /// `kg` kg true mass, of strength `strength`.
    pub fn mass(kg: f64, strength: Composition) -> Self {
        Lot {
            amount: Amount::Mass { kg },
            strength,
        }
    }

    /// A balance reading of `kg` kg in air with the liquid at `t` °C.
    pub fn weighed_in_air(kg: f64, t: f64, strength: Composition, weighing: Weighing) -> Self {
        Lot {
            amount: Amount::WeighedInAir { kg, t, weighing },
            strength,
        }
    }

    /// `litres` L of water (component 2, w = 0) gauged at `t` °C.
    pub fn water(litres: f64, t: f64) -> Self {
        Lot::volume(litres, t, Composition::W(0.0))
    }
}

/// A lot reduced to true mass (kg) and mass fraction of component 1.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Resolved {
    pub mass: f64,
    pub w: f64,
}

/// Strength first (the amount may need the density), then the amount.
pub(crate) fn resolve<M: Mixture + ?Sized>(m: &M, lot: &Lot) -> Result<Resolved> {
    let w = m.mass_fraction(lot.strength)?;
    let mass = lot.amount.mass(m, w)?;
    Ok(Resolved { mass, w })
}

/// Volume in L at `t` °C of `mass` kg at mass fraction `w` (both checked).
pub(crate) fn volume_at<M: Mixture + ?Sized>(m: &M, mass: f64, w: f64, t: f64) -> Result<f64> {
    Ok(mass * 1000.0 / m.density(w, t)?)
}

/// Volume in L at 20 °C.
pub(crate) fn volume_20<M: Mixture + ?Sized>(m: &M, mass: f64, w: f64) -> Result<f64> {
    volume_at(m, mass, w, T_REF_C)
}

/// "43.000000 % vol (w = 0.35612345)" when % vol is defined for the model,
/// else the mass fraction alone: for messages. Six decimals, so that a
/// target just past a limit does not print the same as the limit.
pub(crate) fn describe<M: Mixture + ?Sized>(m: &M, w: f64) -> String {
    match composition::abv(m, w, T_REF_C) {
        Ok(abv) => format!("{abv:.6} % vol (w = {w:.8})"),
        Err(_) => format!("w = {w:.8}"),
    }
}

/// Rejects amounts that must be strictly positive for the calculation to
/// mean anything.
pub(crate) fn require_positive(what: &str, value: f64, unit: &str) -> Result<()> {
    if value > 0.0 {
        Ok(())
    } else {
        Err(Error::Invalid(format!(
            "{what} must be greater than zero, got {value} {unit}"
        )))
    }
}
