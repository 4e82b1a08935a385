//! Process calculations for any [`Mixture`](crate::kernel::Mixture): pure
//! alcohol in a lot, reduction with water, blending of lots, planning a
//! blend at least cost, and bottling.
//!
//! Every calculation converts the lots to true mass and mass fraction first
//! (mass is conserved on mixing and warming; volume is not) and gives
//! volumes at 20 °C, the reference of % vol, unless a field says otherwise.
//!
//! These are calculations, not certified measurements: excise and labelling
//! declarations must use the tables and instruments the local authority
//! prescribes.

pub mod alcohol;
pub mod blend;
pub mod bottling;
pub mod lot;
pub mod plan;
pub mod reduce;
pub mod units;

pub use alcohol::{pure_alcohol, PureAlcohol};
pub use blend::{blend, Blend};
pub use bottling::{bottling, Bottling};
pub use lot::{Amount, Lot, Weighing, MAX_AMOUNT};
pub use plan::{plan_blend, BlendPlan, PlanItem, PlanLot, PlanTarget, PlanWater, MAX_PLAN_LOTS};
pub use reduce::{reduce, reduce_with_water_at, Reduction};
