//! One-dimensional root finding for the inverse problems (density → w,
//! % vol → w): a safeguarded Newton iteration inside a bracket, so it is as
//! fast as Newton where Newton behaves and never leaves the bracket or fails
//! silently where it does not.

use super::error::{finite, Error, Result};
use super::model::Mixture;

/// Tolerance on w at which the solves stop.
pub const W_TOL: f64 = 1e-12;
const MAX_ITER: usize = 100;
/// Relative distance from a pure component's density within which the
/// density solve returns that pure component exactly.
pub const END_SNAP: f64 = 1e-12;

/// Solves `f(w) = target` for `w` in `[lo, hi]`, where `f` returns the value
/// and derivative and is increasing. `target` must lie between `f(lo)` and
/// `f(hi)` (the caller checks reachability and reports it).
pub fn solve_increasing(
    f: impl Fn(f64) -> (f64, f64),
    target: f64,
    lo: f64,
    hi: f64,
    guess: f64,
    what: &'static str,
) -> Result<f64> {
    check_bracket(target, lo, hi, what)?;
    let (fa, _) = f(lo);
    let (fb, _) = f(hi);
    solve_in_bracket(f, target, lo, hi, fa, fb, guess, what)
}

/// [`solve_increasing`] with `f(lo)` and `f(hi)` already known, so callers
/// that have them from cheaper sources (closed forms for the pure
/// components) do not evaluate `f` at the ends again.
#[allow(clippy::too_many_arguments)]
pub fn solve_increasing_with_ends(
    f: impl Fn(f64) -> (f64, f64),
    target: f64,
    lo: f64,
    hi: f64,
    fa: f64,
    fb: f64,
    guess: f64,
    what: &'static str,
) -> Result<f64> {
    check_bracket(target, lo, hi, what)?;
    solve_in_bracket(f, target, lo, hi, fa, fb, guess, what)
}

/// The checks [`solve_increasing`] makes before solving: a finite bracket
/// and a finite target.
fn check_bracket(target: f64, lo: f64, hi: f64, what: &'static str) -> Result<()> {
    if !(lo.is_finite() && hi.is_finite() && lo <= hi) {
        return Err(Error::Invalid(format!(
            "{what}: the bracket [{lo}, {hi}] is not a finite interval"
        )));
    }
    finite(what, target)?;
    Ok(())
}

/// Plain Newton for an increasing `f(w) = target` from a first guess that
/// is already close (a model's precomputed table), with no bracket and so
/// no evaluations at its ends. `Some(w)` once a step falls below
/// [`W_TOL`] (the bracketed solve's own stopping rule) with every iterate
/// inside `[lo, hi]`; `None` — the caller then runs the bracketed solve — if
/// an iterate leaves the interval, the slope is not positive, a value is
/// not finite, or `max_steps` steps do not settle.
pub fn polish_increasing(
    f: impl Fn(f64) -> (f64, f64),
    target: f64,
    lo: f64,
    hi: f64,
    guess: f64,
    max_steps: usize,
) -> Option<f64> {
    if !(guess >= lo && guess <= hi) {
        return None;
    }
    let mut w = guess;
    for _ in 0..max_steps {
        let (fw, dfw) = f(w);
        let g = fw - target;
        if g == 0.0 {
            return Some(w);
        }
        if !(g.is_finite() && dfw > 0.0 && dfw.is_finite()) {
            return None;
        }
        let next = w - g / dfw;
        if !(next >= lo && next <= hi) {
            return None;
        }
        let step = (next - w).abs();
        w = next;
        if step < W_TOL {
            return Some(w);
        }
    }
    None
}

/// The safeguarded Newton iteration proper, with `f(lo)` and `f(hi)`
/// already known (and the bracket and target already checked).
#[allow(clippy::too_many_arguments)]
fn solve_in_bracket(
    f: impl Fn(f64) -> (f64, f64),
    target: f64,
    lo: f64,
    hi: f64,
    fa: f64,
    fb: f64,
    guess: f64,
    what: &'static str,
) -> Result<f64> {
    let (mut a, mut b) = (lo, hi);
    if !(fa.is_finite() && fb.is_finite()) {
        return Err(Error::Invalid(format!(
            "{what}: the function is not finite at the ends of [{lo}, {hi}]"
        )));
    }
    if target <= fa {
        return Ok(a);
    }
    if target >= fb {
        return Ok(b);
    }
    let mut w = if guess > a && guess < b {
        guess
    } else {
        0.5 * (a + b)
    };
    let mut last = f64::INFINITY;
    for _ in 0..MAX_ITER {
        let (fw, dfw) = f(w);
        let g = fw - target;
        if g.is_nan() {
            return Err(Error::Invalid(format!(
                "{what}: the function is NaN at {w}"
            )));
        }
        if g == 0.0 {
            return Ok(w);
        }
        if g < 0.0 {
            a = w;
        } else {
            b = w;
        }
        let newton = w - g / dfw;
        let next = if dfw > 0.0 && newton > a && newton < b {
            newton
        } else {
            0.5 * (a + b)
        };
        let step = (next - w).abs();
        w = next;
        if step < W_TOL || (b - a) < W_TOL {
            return Ok(w);
        }
        // A Newton step that did not halve the previous one: bisect instead
        // next time round by shrinking towards the midpoint.
        if step > 0.5 * last {
            w = 0.5 * (a + b);
        }
        last = step;
    }
    let (fw, _) = f(w);
    Err(Error::NoConvergence {
        what,
        iterations: MAX_ITER,
        residual: fw - target,
    })
}

/// Mass fraction of component 1 from a density `rho` (kg/m³) measured at
/// `t` °C. Density decreases with w wherever the model has been checked (see
/// the monotonicity test); the solve is bracketed regardless.
pub fn w_from_density<M: Mixture + ?Sized>(m: &M, rho: f64, t: f64) -> Result<f64> {
    let rho = finite("density", rho)?;
    let t = m.check_t(t)?;
    let v = m.validity();
    let (r_lo_w, r_hi_w) = m.rho_at_ends(t);
    let (min, max) = (r_lo_w.min(r_hi_w), r_lo_w.max(r_hi_w));
    // Allow a rounding margin at the ends so that ρ(pure) itself round-trips.
    let margin = 1e-9 * max;
    if rho < min - margin || rho > max + margin {
        return Err(Error::Unreachable {
            model: m.name().to_string(),
            density: rho,
            t,
            min,
            max,
        });
    }
    // A density equal to a pure component's up to rounding (closed forms
    // for the ends, as `rho_at_ends` may use, differ from the full
    // polynomial in the last bits) is that pure component, exactly. The
    // snap is ~1e-9 kg/m³, i.e. < 1e-10 in w for any |∂ρ/∂w| > 10.
    let snap = END_SNAP * max;
    if (rho - r_lo_w).abs() <= snap {
        return Ok(v.w_min);
    }
    if (rho - r_hi_w).abs() <= snap {
        return Ok(v.w_max);
    }
    let f = |w: f64| {
        let (r, dr) = m.rho_dw(w, t);
        (-r, -dr)
    };
    let guess = m.guess_w_from_density(rho, t).unwrap_or_else(|| {
        let span = r_hi_w - r_lo_w;
        if span == 0.0 {
            0.5 * (v.w_min + v.w_max)
        } else {
            v.w_min + (rho - r_lo_w) / span * (v.w_max - v.w_min)
        }
    });
    solve_in_bracket(
        f,
        -rho,
        v.w_min,
        v.w_max,
        -r_lo_w,
        -r_hi_w,
        guess,
        "density solve",
    )
}
