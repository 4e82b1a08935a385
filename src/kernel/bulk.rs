//! Slice (bulk) versions of the point functions, for tables and for hosts
//! that hand over whole columns. Inputs are checked in one pass before any
//! arithmetic so that the arithmetic loop has no early exits and the
//! compiler can vectorise it; a bad point is reported with its index.

use super::error::{Error, Result};
use super::model::Mixture;

/// Checks that the input and output slices have one length.
pub fn same_lengths(a: (&str, usize), b: (&str, usize), out: usize) -> Result<()> {
    if a.1 != b.1 || a.1 != out {
        return Err(Error::Invalid(format!(
            "slices differ in length: {} has {}, {} has {}, the output has {out}",
            a.0, a.1, b.0, b.1
        )));
    }
    Ok(())
}

/// Checks every (w, t) pair against the model's validity range.
pub fn check_points<M: Mixture + ?Sized>(m: &M, w: &[f64], t: &[f64]) -> Result<()> {
    let v = m.validity();
    // Non-short-circuit `&` keeps this a branch-free reduction; NaN fails
    // every comparison and so is caught too.
    let all_ok = w.iter().zip(t).fold(true, |ok, (&w, &t)| {
        ok & (w >= v.w_min) & (w <= v.w_max) & (t >= v.t_min) & (t <= v.t_max)
    });
    if all_ok {
        return Ok(());
    }
    for (index, (&w, &t)) in w.iter().zip(t).enumerate() {
        if let Err(e) = m.check_w(w).and_then(|_| m.check_t(t)) {
            return Err(Error::AtPoint {
                index,
                source: Box::new(e),
            });
        }
    }
    Ok(())
}

/// `out[i] = ρ(w[i], t[i])`, all points checked first.
pub fn density_slice<M: Mixture + ?Sized>(
    m: &M,
    w: &[f64],
    t: &[f64],
    out: &mut [f64],
) -> Result<()> {
    same_lengths(("w", w.len()), ("t", t.len()), out.len())?;
    check_points(m, w, t)?;
    for ((o, &w), &t) in out.iter_mut().zip(w).zip(t) {
        *o = m.rho(w, t);
    }
    Ok(())
}

/// `out[i] = ∂ρ/∂w(w[i], t[i])`, all points checked first.
pub fn drho_dw_slice<M: Mixture + ?Sized>(
    m: &M,
    w: &[f64],
    t: &[f64],
    out: &mut [f64],
) -> Result<()> {
    same_lengths(("w", w.len()), ("t", t.len()), out.len())?;
    check_points(m, w, t)?;
    for ((o, &w), &t) in out.iter_mut().zip(w).zip(t) {
        *o = m.drho_dw(w, t);
    }
    Ok(())
}

/// Mass fraction from density point by point.
pub fn w_from_density_slice<M: Mixture + ?Sized>(
    m: &M,
    rho: &[f64],
    t: &[f64],
    out: &mut [f64],
) -> Result<()> {
    same_lengths(("density", rho.len()), ("t", t.len()), out.len())?;
    for (index, ((o, &r), &t)) in out.iter_mut().zip(rho).zip(t).enumerate() {
        *o = m.w_from_density(r, t).map_err(|e| Error::AtPoint {
            index,
            source: Box::new(e),
        })?;
    }
    Ok(())
}
