//! The calculation kernel: pure numerics, no I/O, no Lua. Everything a
//! mixture can do is reached through the [`Mixture`] trait.

pub mod bulk;
pub mod composition;
pub mod error;
pub mod fit;
pub mod hydrometer;
pub mod model;
pub mod oiml;
pub mod prepared;
pub mod process;
pub mod sheet;
pub mod solve;
pub mod uncertainty;
pub mod volumetric;

pub use composition::{Composition, Strength};
pub use error::{Error, Result};
pub use fit::{fit, Fit, FitReport, FitRow, FitSpec, FittedMixture};
pub use hydrometer::{HydrometerScale, GLASS_ALPHA};
pub use model::{Component, Mixture, Validity, T_PROOF_C, T_REF_C};
pub use oiml::EthanolWater;
pub use process::{
    blend, bottling, plan_blend, pure_alcohol, reduce, reduce_with_water_at, Amount, Lot, Weighing,
};
pub use sheet::{Sheet, Value};
pub use uncertainty::StrengthUncertainty;
pub use volumetric::Mixing;
