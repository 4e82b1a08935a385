//! Slice (bulk) versions of the point functions, for tables and for hosts
//! that hand over whole columns. Inputs are checked in one pass before any
//! arithmetic so that the arithmetic loop has no early exits and the
//! compiler can vectorise it; a bad point is reported with its index.

use super::error::{Error, Result};
use super::model::Mixture;
use super::prepared::DensityInverse;

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
    checked_evaluate(m, Quantity::Density, w, t, out)
}

/// `out[i] = ∂ρ/∂w(w[i], t[i])`, all points checked first.
pub fn drho_dw_slice<M: Mixture + ?Sized>(
    m: &M,
    w: &[f64],
    t: &[f64],
    out: &mut [f64],
) -> Result<()> {
    checked_evaluate(m, Quantity::DrhoDw, w, t, out)
}

/// `out[i] = q(w[i], t[i])` once the lengths agree and every point is in
/// range.
fn checked_evaluate<M: Mixture + ?Sized>(
    m: &M,
    q: Quantity,
    w: &[f64],
    t: &[f64],
    out: &mut [f64],
) -> Result<()> {
    same_lengths(("w", w.len()), ("t", t.len()), out.len())?;
    check_points(m, w, t)?;
    evaluate(m, q, w, t, out);
    Ok(())
}

/// Which point function a bulk loop evaluates.
#[derive(Clone, Copy)]
enum Quantity {
    Density,
    DrhoDw,
    /// % vol at the temperatures given, with ρ of pure component 1 there.
    Abv {
        rho1: f64,
    },
}

/// `out[i] = q(w[i], t[i])`, compiled for AVX2 too and dispatched at run
/// time, so a model whose point functions inline gets 4-wide vector code
/// where the CPU has it.
fn evaluate<M: Mixture + ?Sized>(m: &M, q: Quantity, w: &[f64], t: &[f64], out: &mut [f64]) {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: the CPU has AVX2, checked just above.
        unsafe { evaluate_avx2(m, q, w, t, out) };
        return;
    }
    evaluate_any(m, q, w, t, out);
}

/// [`evaluate`] for AVX2. No FMA is enabled and Rust never fuses a multiply
/// and an add on its own, so the results are bit for bit the baseline's.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn evaluate_avx2<M: Mixture + ?Sized>(
    m: &M,
    q: Quantity,
    w: &[f64],
    t: &[f64],
    out: &mut [f64],
) {
    evaluate_any(m, q, w, t, out);
}

#[inline(always)]
fn evaluate_any<M: Mixture + ?Sized>(m: &M, q: Quantity, w: &[f64], t: &[f64], out: &mut [f64]) {
    // Plain indexed loops: iterator adaptors are separate functions that
    // would not inherit the AVX2 target of the caller.
    let n = out.len().min(w.len()).min(t.len());
    let (w, t, out) = (&w[..n], &t[..n], &mut out[..n]);
    match q {
        Quantity::Density => {
            for i in 0..n {
                out[i] = m.rho(w[i], t[i]);
            }
        }
        Quantity::DrhoDw => {
            for i in 0..n {
                out[i] = m.drho_dw(w[i], t[i]);
            }
        }
        // The point formula of `composition::abv`, operation for operation.
        Quantity::Abv { rho1 } => {
            for i in 0..n {
                out[i] = (100.0 * (w[i] * (m.rho(w[i], t[i]) / rho1))).clamp(0.0, 100.0);
            }
        }
    }
}

/// `out[i]` = % vol at `t_ref` of mass fraction `w[i]`, all points checked
/// first.
pub fn abv_slice<M: Mixture + ?Sized>(m: &M, w: &[f64], t_ref: f64, out: &mut [f64]) -> Result<()> {
    same_lengths(("w", w.len()), ("output", out.len()), out.len())?;
    let rho1 = m.pure_density(0, t_ref)?;
    let v = m.validity();
    // Branch-free range check first, as in `check_points`.
    if !w
        .iter()
        .fold(true, |ok, &w| ok & (w >= v.w_min) & (w <= v.w_max))
    {
        if let Some((index, e)) = w
            .iter()
            .enumerate()
            .find_map(|(i, &w)| m.check_w(w).err().map(|e| (i, e)))
        {
            return Err(Error::AtPoint {
                index,
                source: Box::new(e),
            });
        }
    }
    // The evaluation loop takes a temperature per point; a short constant
    // buffer, reused, keeps it allocation-free for any length.
    let ts = [t_ref; 256];
    for (wc, oc) in w.chunks(256).zip(out.chunks_mut(256)) {
        evaluate(m, Quantity::Abv { rho1 }, wc, &ts[..wc.len()], oc);
    }
    Ok(())
}

/// Columns at least this long measured at one temperature are solved
/// through a [`DensityInverse`], whose set-up costs about three thousand
/// model evaluations.
pub const PREPARED_MIN: usize = 1024;

/// Mass fraction from density: through a [`DensityInverse`] when the
/// column is long and has one temperature, else point by point. Either
/// way within the point solve's tolerance of [`Mixture::w_from_density`],
/// with its errors.
pub fn w_from_density_slice<M: Mixture + ?Sized>(
    m: &M,
    rho: &[f64],
    t: &[f64],
    out: &mut [f64],
) -> Result<()> {
    same_lengths(("density", rho.len()), ("t", t.len()), out.len())?;
    let at = |index: usize| {
        move |e: Error| Error::AtPoint {
            index,
            source: Box::new(e),
        }
    };
    if let Some(&t0) = t.first() {
        let one_t = t.len() >= PREPARED_MIN && t.iter().all(|&x| x.to_bits() == t0.to_bits());
        // A bad temperature is left to the point loop, which reports it at
        // point 0.
        if let Some(inv) = one_t.then(|| DensityInverse::new(m, t0).ok()).flatten() {
            for (index, (o, &r)) in out.iter_mut().zip(rho).enumerate() {
                *o = inv.w(r).map_err(at(index))?;
            }
            return Ok(());
        }
    }
    for (index, ((o, &r), &t)) in out.iter_mut().zip(rho).zip(t).enumerate() {
        *o = m.w_from_density(r, t).map_err(at(index))?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::kernel::{Component, EthanolWater, Validity};

    /// The reference equation behind the required methods only, so that
    /// every provided method (the slice solve among them) is the default.
    struct Plain(EthanolWater);

    impl Mixture for Plain {
        fn name(&self) -> &str {
            "plain"
        }
        fn components(&self) -> &[Component; 2] {
            self.0.components()
        }
        fn validity(&self) -> Validity {
            self.0.validity()
        }
        fn rho(&self, w: f64, t: f64) -> f64 {
            self.0.rho(w, t)
        }
        fn drho_dw(&self, w: f64, t: f64) -> f64 {
            self.0.drho_dw(w, t)
        }
        fn drho_dt(&self, w: f64, t: f64) -> f64 {
            self.0.drho_dt(w, t)
        }
    }

    #[test]
    fn default_slice_solve_agrees_with_the_point_solve() {
        let m = Plain(EthanolWater::new());
        let n = 3 * PREPARED_MIN;
        let (lo, hi) = (m.rho(1.0, 15.0), m.rho(0.0, 15.0));
        let rho: Vec<f64> = (0..n)
            .map(|i| lo + (hi - lo) * i as f64 / (n - 1) as f64)
            .collect();
        // One temperature (the prepared inverse) and a temperature per
        // point (the point solve).
        let one_t = vec![15.0; n];
        let mixed: Vec<f64> = (0..n)
            .map(|i| if i % 2 == 0 { 15.0 } else { 15.0 + 1e-12 })
            .collect();
        for t in [&one_t, &mixed] {
            let mut out = vec![0.0; n];
            m.w_from_density_slice(&rho, t, &mut out).unwrap();
            for i in 0..n {
                let want = m.w_from_density(rho[i], t[i]).unwrap();
                assert!(
                    (out[i] - want).abs() < 1e-11,
                    "{}: {} vs {want}",
                    rho[i],
                    out[i]
                );
            }
            assert_eq!(out[0], 1.0);
            assert_eq!(out[n - 1], 0.0);
        }
        let mut bad = rho.clone();
        bad[2000] = 1100.0;
        match m.w_from_density_slice(&bad, &one_t, &mut vec![0.0; n]) {
            Err(Error::AtPoint {
                index: 2000,
                source,
            }) => {
                assert_eq!(Err(*source), m.w_from_density(1100.0, 15.0))
            }
            other => panic!("expected an error at point 2000, got {other:?}"),
        }
        // A bad temperature is reported at the first point.
        assert!(matches!(
            m.w_from_density_slice(&rho, &vec![60.0; n], &mut vec![0.0; n]),
            Err(Error::AtPoint { index: 0, .. })
        ));
    }
}
