//! Blend planning: how much of each lot (and of water) makes a target
//! volume at a target strength, at least cost.
//!
//! The target fixes the blend's mass M = V ρ(w_t, 20 °C) and its mass of
//! component 1 E = M w_t, and both are linear in the lots' masses mᵢ:
//!
//! ```text
//! Σ mᵢ = M,   Σ mᵢ wᵢ = E,   0 ≤ mᵢ ≤ limitᵢ,   minimise Σ costᵢ · 1000 mᵢ / ρᵢ(20 °C)
//! ```
//!
//! a linear programme with two equality constraints. With two sources of
//! different strength (one lot and water, or two lots) the amounts are
//! fixed by the target alone; with more, a family of blends meets it and the
//! cost chooses. An optimum always lies at a vertex where at most two
//! sources are strictly between their bounds (zero and their limit) — the
//! basic solutions of a programme with two constraints.
//!
//! The solve is exact and needs no iteration tolerance: for every pair of
//! sources of different strength taken as the basis, the two constraint
//! prices follow from their costs, every other source's reduced cost says
//! whether it sits at zero or at its limit (a source with no limit and a
//! negative reduced cost rules the pair out), and the basic amounts follow
//! from the two constraints. By linear-programming duality a pair whose
//! amounts come out within bounds is optimal; the cheapest feasible
//! candidate over all pairs is returned, which is O(n³) for n sources.
//! Sources whose reduced costs tie (equal costs, e.g. all zero) are filled by
//! interpolating between the weakest-first and strongest-first fills, then
//! moved to a vertex along directions that keep both constraints and do not
//! raise the cost. When several plans cost the same, one of them is returned
//! (the same one every time).

use super::blend::{blend_resolved, Blend};
use super::lot::{describe, require_positive, volume_at, Amount, Resolved, MAX_AMOUNT};
use crate::kernel::composition::Composition;
use crate::kernel::error::{in_range, Error, Result};
use crate::kernel::model::{Mixture, T_REF_C};

/// Most lots a plan takes (the solve is cubic in their number).
pub const MAX_PLAN_LOTS: usize = 256;

/// Largest cost per litre accepted (any currency).
const MAX_COST: f64 = 1e15;

/// Mass fractions closer than this count as the same strength in the solve.
const W_EPS: f64 = 1e-9;

/// A lot available to a blend plan.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PlanLot {
    /// Its strength, in any basis.
    pub strength: Composition,
    /// Its temperature in °C, if its volume should also be given at that
    /// temperature (as it will be drawn from the tank).
    pub t: Option<f64>,
    /// How much of it there is; `None` for no limit.
    pub limit: Option<Amount>,
    /// Cost per litre at 20 °C (any currency; 0 by default).
    pub cost_per_l: f64,
}

impl PlanLot {
    /// A lot of `strength`, unlimited, at no cost, volumes at 20 °C only.
    pub fn new(strength: Composition) -> Self {
        PlanLot {
            strength,
            t: None,
            limit: None,
            cost_per_l: 0.0,
        }
    }

    /// With at most `limit` of it available.
    pub fn with_limit(mut self, limit: Amount) -> Self {
        self.limit = Some(limit);
        self
    }

    /// At `cost_per_l` per litre at 20 °C.
    pub fn with_cost(mut self, cost_per_l: f64) -> Self {
        self.cost_per_l = cost_per_l;
        self
    }

    /// Drawn at `t` °C (its volume is also reported at that temperature).
    pub fn with_temperature(mut self, t: f64) -> Self {
        self.t = Some(t);
        self
    }
}

/// The water a plan may use (component 2, w = 0). The default is
/// unlimited, free, with volumes at 20 °C only.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct PlanWater {
    /// Its temperature in °C, if its volume should also be given there.
    pub t: Option<f64>,
    /// How much there is; `None` for no limit.
    pub limit: Option<Amount>,
    /// Cost per litre at 20 °C.
    pub cost_per_l: f64,
}

/// What the blend must be.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PlanTarget {
    /// Strength, in any basis.
    pub strength: Composition,
    /// Final volume, L at 20 °C.
    pub volume_20: f64,
}

/// How much of one source the plan uses.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct PlanItem {
    /// True mass, kg.
    pub mass: f64,
    /// Volume, L at 20 °C.
    pub volume_20: f64,
    /// Volume, L at the source's own temperature, when one was given.
    pub volume_at_t: Option<f64>,
    /// `cost_per_l × volume_20`.
    pub cost: f64,
}

/// A blend plan and the blend it makes.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct BlendPlan {
    /// One item per lot, in the order given.
    pub lots: Vec<PlanItem>,
    /// The water, when water was allowed.
    pub water: Option<PlanItem>,
    /// Sum of the items' costs.
    pub total_cost: f64,
    /// The blend the plan makes, computed forward from the amounts.
    pub blend: Blend,
}

/// One source reduced to what the programme needs.
#[derive(Debug, Clone)]
struct Source {
    name: String,
    w: f64,
    /// Mass limit, kg (infinite when none).
    cap: f64,
    /// Cost per kg.
    cost: f64,
    t: Option<f64>,
    cost_per_l: f64,
}

/// The cheapest amounts of `lots` (and of water, when `water` is given) that
/// make `target`. Errors say which input is wrong, or why no blend of the
/// available material reaches the target.
pub fn plan_blend<M: Mixture + ?Sized>(
    m: &M,
    lots: &[PlanLot],
    water: Option<&PlanWater>,
    target: &PlanTarget,
) -> Result<BlendPlan> {
    if lots.len() > MAX_PLAN_LOTS {
        return Err(Error::Invalid(format!(
            "a plan takes at most {MAX_PLAN_LOTS} lots, got {}",
            lots.len()
        )));
    }
    if lots.is_empty() && water.is_none() {
        return Err(Error::Invalid(
            "a plan needs at least one lot or water".into(),
        ));
    }
    let w_t = m
        .mass_fraction(target.strength)
        .map_err(|e| e.context("target strength"))?;
    let volume = in_range("target volume", target.volume_20, 0.0, MAX_AMOUNT, "L")?;
    require_positive("the target volume", volume, "L")?;
    let total = volume * m.density(w_t, T_REF_C)? / 1000.0;
    let alcohol = total * w_t;

    let mut sources = Vec::with_capacity(lots.len() + 1);
    for (i, lot) in lots.iter().enumerate() {
        let name = format!("lot {}", i + 1);
        let s = source(
            m,
            name.clone(),
            lot.strength,
            lot.t,
            lot.limit,
            lot.cost_per_l,
        )
        .map_err(|e| e.context(name))?;
        sources.push(s);
    }
    if let Some(wa) = water {
        let s = source(
            m,
            "water".into(),
            Composition::W(0.0),
            wa.t,
            wa.limit,
            wa.cost_per_l,
        )
        .map_err(|e| e.context("water"))?;
        sources.push(s);
    }

    let water_cap = water.and(sources.last()).map(|s| s.cap);
    check_feasible(m, &sources, total, w_t, water_cap)?;
    let x = optimise(&sources, total, alcohol).ok_or_else(|| {
        // The feasibility check passed, so this is a numerical failure.
        Error::Infeasible(format!(
            "no plan found within rounding for {} at {volume} L; \
             the lots' strengths may be too close to the target to separate",
            describe(m, w_t)
        ))
    })?;

    let mut items = Vec::with_capacity(sources.len());
    for (s, &mass) in sources.iter().zip(&x) {
        let volume_20 = volume_at(m, mass, s.w, T_REF_C)?;
        let volume_at_t = match s.t {
            Some(t) => Some(volume_at(m, mass, s.w, t)?),
            None => None,
        };
        items.push(PlanItem {
            mass,
            volume_20,
            volume_at_t,
            cost: s.cost_per_l * volume_20,
        });
    }
    let resolved: Vec<Resolved> = sources
        .iter()
        .zip(&x)
        .map(|(s, &mass)| Resolved { mass, w: s.w })
        .collect();
    let blend = blend_resolved(m, &resolved)?;
    let total_cost = items.iter().map(|i| i.cost).sum();
    let water = if water.is_some() { items.pop() } else { None };
    Ok(BlendPlan {
        lots: items,
        water,
        total_cost,
        blend,
    })
}

fn source<M: Mixture + ?Sized>(
    m: &M,
    name: String,
    strength: Composition,
    t: Option<f64>,
    limit: Option<Amount>,
    cost_per_l: f64,
) -> Result<Source> {
    let w = m.mass_fraction(strength)?;
    if let Some(t) = t {
        m.check_t(t)?;
    }
    let cap = match limit {
        Some(a) => a.mass(m, w).map_err(|e| e.context("limit"))?,
        None => f64::INFINITY,
    };
    let cost_per_l = in_range("cost per litre", cost_per_l, 0.0, MAX_COST, "per L")?;
    let cost = cost_per_l * 1000.0 / m.density(w, T_REF_C)?;
    Ok(Source {
        name,
        w,
        cap,
        cost,
        t,
        cost_per_l,
    })
}

/// Whether any blend of the sources reaches the target, and if not, why.
/// The reachable mass of component 1 for a total mass M spans the
/// weakest-first fill to the strongest-first fill.
fn check_feasible<M: Mixture + ?Sized>(
    m: &M,
    sources: &[Source],
    total: f64,
    w_t: f64,
    water_cap: Option<f64>,
) -> Result<()> {
    let usable: Vec<&Source> = sources.iter().filter(|s| s.cap > 0.0).collect();
    let Some(strongest) = usable.iter().copied().max_by(|a, b| a.w.total_cmp(&b.w)) else {
        return Err(Error::Infeasible(
            "every lot's limit is zero: there is nothing to blend".into(),
        ));
    };
    let weakest = usable
        .iter()
        .copied()
        .min_by(|a, b| a.w.total_cmp(&b.w))
        .unwrap_or(strongest);
    if w_t > strongest.w + W_EPS {
        return Err(Error::Infeasible(format!(
            "the target {} is stronger than every lot; the strongest is {} at {}",
            describe(m, w_t),
            strongest.name,
            describe(m, strongest.w)
        )));
    }
    if w_t < weakest.w - W_EPS {
        return Err(Error::Infeasible(format!(
            "the target {} is weaker than every lot{}; the weakest is {} at {}",
            describe(m, w_t),
            match water_cap {
                None => " and no water is allowed",
                Some(c) if c <= 0.0 => " and the water's limit is zero",
                Some(_) => "",
            },
            weakest.name,
            describe(m, weakest.w)
        )));
    }
    let available: f64 = sources.iter().map(|s| s.cap).sum();
    if available < total * (1.0 - 1e-12) {
        return Err(Error::Infeasible(format!(
            "not enough material: all sources together hold {available:.6} kg, \
             the target needs {total:.6} kg"
        )));
    }
    let all: Vec<usize> = (0..sources.len()).collect();
    let (lo, hi) = extreme_fills(sources, &all, total).ok_or_else(|| {
        Error::Infeasible(format!(
            "not enough material: the target needs {total:.6} kg"
        ))
    })?;
    let f = |x: &[f64]| -> f64 { x.iter().zip(sources).map(|(x, s)| x * s.w).sum() };
    let (f_lo, f_hi) = (f(&lo), f(&hi));
    let tol = 1e-10 * total;
    if total * w_t > f_hi + tol {
        return Err(Error::Infeasible(format!(
            "not enough strong material within the limits: the strongest blend of \
             {total:.6} kg the sources can make is {}, the target is {}",
            describe(m, f_hi / total),
            describe(m, w_t)
        )));
    }
    if total * w_t < f_lo - tol {
        return Err(Error::Infeasible(format!(
            "not enough weak material (water or weaker lots) within the limits: \
             the weakest blend of {total:.6} kg the sources can make is {}, the target is {}",
            describe(m, f_lo / total),
            describe(m, w_t)
        )));
    }
    Ok(())
}

/// Fills `amount` kg from the sources `idx`, weakest first and strongest
/// first (ties by cost); `None` when their limits together fall short.
fn extreme_fills(sources: &[Source], idx: &[usize], amount: f64) -> Option<(Vec<f64>, Vec<f64>)> {
    let mut up: Vec<usize> = idx.to_vec();
    up.sort_by(|&a, &b| {
        let (sa, sb) = (&sources[a], &sources[b]);
        sa.w.total_cmp(&sb.w).then(sa.cost.total_cmp(&sb.cost))
    });
    let mut down = up.clone();
    down.sort_by(|&a, &b| {
        let (sa, sb) = (&sources[a], &sources[b]);
        sb.w.total_cmp(&sa.w).then(sa.cost.total_cmp(&sb.cost))
    });
    let fill = |order: &[usize]| -> Option<Vec<f64>> {
        let mut x = vec![0.0; sources.len()];
        let mut left = amount;
        for &k in order {
            if left <= 0.0 {
                break;
            }
            let take = left.min(sources[k].cap);
            x[k] = take;
            left -= take;
        }
        (left <= 1e-12 * amount.max(f64::MIN_POSITIVE)).then_some(x)
    };
    Some((fill(&up)?, fill(&down)?))
}

/// Amounts of the sources `idx` totalling `amount` kg with `alcohol` kg of
/// component 1, or `None` if their limits do not allow it. Any feasible point
/// of that face will do: the callers pass sources whose costs tie.
fn interpolate(
    sources: &[Source],
    idx: &[usize],
    amount: f64,
    alcohol: f64,
    tol: f64,
) -> Option<Vec<f64>> {
    if amount < -tol {
        return None;
    }
    let amount = amount.max(0.0);
    let (lo, hi) = extreme_fills(sources, idx, amount)?;
    let f = |x: &[f64]| -> f64 { x.iter().zip(sources).map(|(x, s)| x * s.w).sum() };
    let (f_lo, f_hi) = (f(&lo), f(&hi));
    if alcohol < f_lo - tol || alcohol > f_hi + tol {
        return None;
    }
    let theta = if f_hi - f_lo > 0.0 {
        ((alcohol - f_lo) / (f_hi - f_lo)).clamp(0.0, 1.0)
    } else {
        0.0
    };
    Some(
        lo.iter()
            .zip(&hi)
            .map(|(a, b)| (1.0 - theta) * a + theta * b)
            .collect(),
    )
}

/// The cheapest feasible candidate over all basis pairs (see the module doc).
fn optimise(sources: &[Source], total: f64, alcohol: f64) -> Option<Vec<f64>> {
    let n = sources.len();
    let tol = 1e-10 * total;
    let cmax = sources.iter().map(|s| s.cost).fold(0.0, f64::max);
    let mut best: Option<(f64, Vec<f64>)> = None;
    let mut consider = |x: Vec<f64>| {
        if let Some(x) = to_vertex(sources, x, total, alcohol) {
            let cost: f64 = x.iter().zip(sources).map(|(x, s)| x * s.cost).sum();
            if best.as_ref().map_or(true, |(c, _)| cost < *c) {
                best = Some((cost, x));
            }
        }
    };

    // Every source tied: also covers the case where all share one strength
    // and no pair can form a basis.
    let all: Vec<usize> = (0..n).collect();
    if let Some(x) = interpolate(sources, &all, total, alcohol, tol) {
        consider(x);
    }

    let mut tied = Vec::with_capacity(n);
    for i in 0..n {
        for j in i + 1..n {
            let (si, sj) = (&sources[i], &sources[j]);
            if (si.w - sj.w).abs() <= W_EPS {
                continue;
            }
            // Prices of the two constraints: cᵢ = λ + μ wᵢ for both basics.
            let mu = (si.cost - sj.cost) / (si.w - sj.w);
            let lambda = si.cost - mu * si.w;
            let tol_d = 1e-10 * (cmax + lambda.abs() + mu.abs());
            let mut x = vec![0.0; n];
            let (mut amount, mut alc) = (total, alcohol);
            tied.clear();
            let mut dual_feasible = true;
            for (k, s) in sources.iter().enumerate() {
                let d = if k == i || k == j {
                    0.0
                } else {
                    s.cost - lambda - mu * s.w
                };
                if d > tol_d {
                    continue;
                } else if d < -tol_d {
                    if s.cap.is_infinite() {
                        dual_feasible = false;
                        break;
                    }
                    x[k] = s.cap;
                    amount -= s.cap;
                    alc -= s.cap * s.w;
                } else {
                    tied.push(k);
                }
            }
            if !dual_feasible {
                continue;
            }
            if let Some(xt) = interpolate(sources, &tied, amount, alc, tol) {
                for &k in &tied {
                    x[k] = xt[k];
                }
                consider(x);
            }
        }
    }
    best.map(|(_, x)| x)
}

/// Moves a feasible point to a vertex (at most two sources strictly between
/// their bounds, of different strengths) without raising the cost, then
/// re-solves the free amounts from the two constraints so they hold to
/// rounding. `None` if the point is not feasible after all.
fn to_vertex(sources: &[Source], mut x: Vec<f64>, total: f64, alcohol: f64) -> Option<Vec<f64>> {
    let n = sources.len();
    let snap = 1e-12 * total;
    let snap_all = |x: &mut Vec<f64>| {
        for (xk, s) in x.iter_mut().zip(sources) {
            if xk.abs() < snap {
                *xk = 0.0;
            } else if s.cap.is_finite() && (*xk - s.cap).abs() < snap {
                *xk = s.cap;
            }
        }
    };
    let free = |x: &[f64]| -> Vec<usize> {
        (0..n)
            .filter(|&k| x[k] > 0.0 && x[k] < sources[k].cap)
            .collect()
    };
    snap_all(&mut x);
    for _ in 0..=n {
        let f = free(&x);
        let dir: Vec<(usize, f64)> = match f.as_slice() {
            [] | [_] => break,
            [a, b] => {
                if (sources[*a].w - sources[*b].w).abs() > W_EPS {
                    break;
                }
                vec![(*a, 1.0), (*b, -1.0)]
            }
            [a, b, c, ..] => {
                let (wa, wb, wc) = (sources[*a].w, sources[*b].w, sources[*c].w);
                if (wa - wb).abs() <= W_EPS {
                    vec![(*a, 1.0), (*b, -1.0)]
                } else {
                    // Null vector of [[1,1,1],[wa,wb,wc]].
                    vec![(*a, wb - wc), (*b, wc - wa), (*c, wa - wb)]
                }
            }
        };
        let g: f64 = dir.iter().map(|&(k, d)| d * sources[k].cost).sum();
        let sign = if g > 0.0 { -1.0 } else { 1.0 };
        let mut step = f64::INFINITY;
        let mut block = None;
        for &(k, d) in &dir {
            let d = sign * d;
            let room = if d < 0.0 {
                x[k] / -d
            } else if d > 0.0 && sources[k].cap.is_finite() {
                (sources[k].cap - x[k]) / d
            } else {
                f64::INFINITY
            };
            if room < step {
                step = room;
                block = Some((k, d < 0.0));
            }
        }
        let (kb, to_zero) = block?;
        for &(k, d) in &dir {
            x[k] += step * sign * d;
        }
        x[kb] = if to_zero { 0.0 } else { sources[kb].cap };
        snap_all(&mut x);
    }

    // Re-solve the free amounts exactly.
    let f = free(&x);
    let fixed_amount: f64 = (0..n).filter(|k| !f.contains(k)).map(|k| x[k]).sum();
    let fixed_alc: f64 = (0..n)
        .filter(|k| !f.contains(k))
        .map(|k| x[k] * sources[k].w)
        .sum();
    let (r, e) = (total - fixed_amount, alcohol - fixed_alc);
    match f.as_slice() {
        [a] => x[*a] = r,
        [a, b] => {
            let (wa, wb) = (sources[*a].w, sources[*b].w);
            if (wa - wb).abs() > W_EPS {
                x[*a] = (e - wb * r) / (wa - wb);
                x[*b] = r - x[*a];
            }
        }
        _ => {}
    }
    snap_all(&mut x);
    let tol = 1e-9 * total;
    let ok_bounds = x
        .iter()
        .zip(sources)
        .all(|(&xk, s)| xk >= 0.0 && xk <= s.cap && xk.is_finite());
    let sum: f64 = x.iter().sum();
    let alc: f64 = x.iter().zip(sources).map(|(x, s)| x * s.w).sum();
    (ok_bounds && (sum - total).abs() <= tol && (alc - alcohol).abs() <= tol).then_some(x)
}
