//! The kernel's one error type. Messages are lowercase, quote the offending
//! value and name the valid range, so a front end can print them as they are.

use thiserror::Error;

/// Everything that can go wrong in a kernel calculation.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum Error {
    /// A NaN or infinite input.
    #[error("{quantity} must be a finite number, got {value}")]
    NotFinite { quantity: &'static str, value: f64 },

    /// A finite input outside the range where the model or formula holds.
    #[error("{quantity} = {value} {unit} is outside the valid range {min} to {max} {unit}")]
    OutOfRange {
        quantity: &'static str,
        value: f64,
        min: f64,
        max: f64,
        unit: &'static str,
    },

    /// A measured density that no composition reaches at that temperature.
    #[error(
        "density {density} kg/m³ at {t} °C is not reachable by {model}: \
         at that temperature it spans {min:.4} to {max:.4} kg/m³"
    )]
    Unreachable {
        model: String,
        density: f64,
        t: f64,
        min: f64,
        max: f64,
    },

    /// An iterative solve that did not meet its tolerance (a bug or a
    /// pathological model; never returned silently).
    #[error("{what} did not converge after {iterations} iterations (residual {residual:e})")]
    NoConvergence {
        what: &'static str,
        iterations: usize,
        residual: f64,
    },

    /// Any other invalid argument, described in words.
    #[error("{0}")]
    Invalid(String),

    /// A bad row in the data given to a fit; `row` counts from 1.
    #[error("fit data row {row}: {message}")]
    FitRow { row: usize, message: String },

    /// A fit that cannot be made as asked (too few points, rank-deficient
    /// design, missing pure-component data, …).
    #[error("cannot fit: {0}")]
    Fit(String),

    /// A saved fitted model that cannot be read back.
    #[error("fitted-mixture file: {0}")]
    SavedModel(String),
}

/// Kernel result alias.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Rejects NaN and infinities, naming the quantity.
pub fn finite(quantity: &'static str, value: f64) -> Result<f64> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(Error::NotFinite { quantity, value })
    }
}

/// Rejects non-finite values and values outside `[min, max]`.
pub fn in_range(
    quantity: &'static str,
    value: f64,
    min: f64,
    max: f64,
    unit: &'static str,
) -> Result<f64> {
    finite(quantity, value)?;
    if value < min || value > max {
        return Err(Error::OutOfRange {
            quantity,
            value,
            min,
            max,
            unit,
        });
    }
    Ok(value)
}

/// Rejects non-finite values and values that are not strictly positive.
pub fn positive(quantity: &'static str, value: f64, unit: &'static str) -> Result<f64> {
    in_range(quantity, value, f64::MIN_POSITIVE, f64::MAX, unit)
}
