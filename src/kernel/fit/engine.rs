//! The fitting procedure: checks the spec and rows, fits the pure-component
//! curves, builds the excess design, selects terms and temperature order,
//! and assembles the model and its report.

use nalgebra::{DMatrix, DVector};

use super::lsq::{self, Reduced, Solution};
use super::model::{Estimate, Excess, FittedMixture, Provenance, PureCurve, PureOrigin};
use super::report::{num, AiccEntry, Coefficient, FitReport, PureReport, RowResidual};
use super::{
    check_component, Fit, FitRow, FitSpec, OrderChoice, PureSource, TermChoice, MAX_PURE_DEGREE,
    MAX_TERMS, MAX_T_ORDER, T_DISTINCT_C,
};
use crate::kernel::error::{Error, Result};
use crate::kernel::model::{Mixture, Validity};

/// Fits a binary mixture to `rows` as `spec` says. See the module doc of
/// [`crate::kernel::fit`](mod@crate::kernel::fit) for the model, the weights and the AICc rule.
pub fn fit(spec: &FitSpec, rows: &[FitRow]) -> Result<Fit> {
    check_spec(spec)?;
    let weighted = check_rows(rows)?;
    let m = [spec.components[0].molar_mass, spec.components[1].molar_mass];

    let mix: Vec<usize> = (0..rows.len())
        .filter(|&i| rows[i].w > 0.0 && rows[i].w < 1.0)
        .collect();
    if mix.is_empty() {
        return Err(Error::Fit(
            "no mixture rows: every row is a pure component (w = 0 or w = 1); \
             at least one row with 0 < w < 1 is needed"
                .into(),
        ));
    }
    let mix_t: Vec<f64> = mix.iter().map(|&i| rows[i].t).collect();
    let t0 = match spec.t_center {
        Some(t) => t,
        None => mix_t.iter().sum::<f64>() / mix_t.len() as f64,
    };
    let n_temps = count_distinct(&mix_t, T_DISTINCT_C);
    let (t_lo, t_hi) = span(&mix_t);

    // ---- pure-component curves ------------------------------------------
    let mut warnings = Vec::new();
    let mut pure_curves = Vec::with_capacity(2);
    let mut pure_reports = Vec::with_capacity(2);
    let mut pure_row_stats: Vec<RowStat> = Vec::new();
    for i in 0..2 {
        let (curve, report, stats) = pure_curve(
            spec,
            rows,
            i,
            t0,
            weighted,
            n_temps,
            (t_lo, t_hi),
            &mut warnings,
        )?;
        pure_curves.push(curve);
        pure_reports.push(report);
        pure_row_stats.extend(stats);
    }
    let pure_curves: [PureCurve; 2] = [pure_curves[0].clone(), pure_curves[1].clone()];

    // ---- excess volumes of the mixture rows -----------------------------
    let n = mix.len();
    let mut xs = Vec::with_capacity(n);
    let mut taus = Vec::with_capacity(n);
    let mut y = Vec::with_capacity(n);
    let mut sw = Vec::with_capacity(n);
    for &i in &mix {
        let r = rows[i];
        let s = r.w / m[0] + (1.0 - r.w) / m[1];
        let x = r.w / m[0] / s;
        let vm = 1000.0 / (s * r.rho);
        let v1 = 1000.0 * m[0] / pure_curves[0].density.eval(r.t).0;
        let v2 = 1000.0 * m[1] / pure_curves[1].density.eval(r.t).0;
        if !(v1.is_finite() && v2.is_finite() && v1 > 0.0 && v2 > 0.0) {
            return Err(Error::FitRow {
                row: i + 1,
                message: format!(
                    "the pure-density curves give no positive density at {} °C",
                    r.t
                ),
            });
        }
        xs.push(x);
        taus.push(r.t - t0);
        y.push(vm - x * v1 - (1.0 - x) * v2);
        // The density is what was measured: a density error δρ moves the
        // row's V^E by (∂V^E/∂ρ) δρ = −(V_m/ρ) δρ, so u(V^E) = V_m u(ρ)/ρ and
        // the weight's square root is its inverse. Without stated u(ρ) every
        // row is taken to have the same (unknown) u(ρ), set to 1 here; its
        // size cancels from the coefficients and the covariance, which is
        // scaled by the observed scatter, so this is a least-squares fit in
        // density and σ comes out in kg/m³.
        sw.push(r.rho / (vm * r.u_rho.unwrap_or(1.0)));
    }

    // ---- candidates ------------------------------------------------------
    let q_cap = MAX_T_ORDER.min(n_temps - 1);
    let orders: Vec<usize> = match spec.t_order {
        OrderChoice::Fixed(q) => {
            if q > n_temps - 1 {
                return Err(if n_temps == 1 {
                    Error::Fit(format!(
                        "the mixture rows are all at one temperature ({} °C): temperature order {q} \
                         needs rows at {} or more temperatures; use order 0",
                        t_lo,
                        q + 1
                    ))
                } else {
                    Error::Fit(format!(
                        "temperature order {q} needs mixture rows at {} or more distinct \
                         temperatures, the data have {n_temps}",
                        q + 1
                    ))
                });
            }
            vec![q]
        }
        OrderChoice::Auto => (0..=q_cap).collect(),
    };
    let term_counts: Vec<usize> = match spec.terms {
        TermChoice::Fixed(k) => vec![k],
        TermChoice::Auto { max } => (1..=max.min(MAX_TERMS)).collect(),
    };
    let single = orders.len() == 1 && term_counts.len() == 1;
    let n_max = *term_counts.iter().max().unwrap_or(&1);
    let q_max = *orders.iter().max().unwrap_or(&0);
    let q1_max = q_max + 1;
    if single {
        let p = n_max * q1_max;
        if n < p + 1 {
            return Err(Error::Fit(format!(
                "{n} mixture rows are too few for {n_max} Redlich–Kister terms × {q1_max} \
                 temperature coefficients = {p} coefficients: at least {} rows are needed",
                p + 1
            )));
        }
    } else {
        let p_min = term_counts[0] * (orders[0] + 1);
        if n < p_min + 3 {
            return Err(Error::Fit(format!(
                "{n} mixture rows are too few for automatic selection: the smallest candidate \
                 ({} terms, order {}) needs at least {} rows; add rows or fix the term count \
                 and temperature order",
                term_counts[0],
                orders[0],
                p_min + 3
            )));
        }
    }

    let big_p = n_max * q1_max;
    let mut a = DMatrix::zeros(n, big_p);
    let mut phi = vec![0.0; big_p];
    for i in 0..n {
        design_row(xs[i], taus[i], n_max, q_max, &mut phi);
        for c in 0..big_p {
            a[(i, c)] = sw[i] * phi[c];
        }
    }
    let yw = DVector::from_iterator(n, (0..n).map(|i| sw[i] * y[i]));
    let y_norm2 = yw.norm_squared();
    let reduced = Reduced::new(a, &yw);

    let mut table = Vec::new();
    let mut best: Option<(usize, f64)> = None;
    let mut solutions: Vec<Option<Solution>> = Vec::new();
    let mut last_condition = f64::NAN;
    for &k in &term_counts {
        for &q in &orders {
            let p = k * (q + 1);
            let cols = subset(k, q, q1_max);
            let mut entry = AiccEntry {
                terms: k,
                t_order: q,
                parameters: p,
                rss: None,
                aicc: None,
                note: String::new(),
                chosen: false,
            };
            let sol = if n < p + 1 {
                entry.note = "too few rows".into();
                None
            } else {
                match reduced.solve(&cols) {
                    Ok(s) => Some(s),
                    Err(cond) => {
                        last_condition = cond;
                        entry.note = format!("rank-deficient (condition {cond:.2e})");
                        None
                    }
                }
            };
            if let Some(s) = &sol {
                entry.rss = Some(s.rss);
                let kk = (p + 1) as f64;
                let nn = n as f64;
                if n > p + 2 {
                    let floor = (64.0 * f64::EPSILON).powi(2) * y_norm2;
                    let rss = s.rss.max(floor).max(f64::MIN_POSITIVE);
                    let aicc =
                        nn * (rss / nn).ln() + 2.0 * kk + 2.0 * kk * (kk + 1.0) / (nn - kk - 1.0);
                    entry.aicc = Some(aicc);
                    if best.map_or(true, |(_, b)| aicc < b) {
                        best = Some((table.len(), aicc));
                    }
                } else if !single {
                    entry.note = "too few rows for AICc".into();
                }
            }
            table.push(entry);
            solutions.push(sol);
        }
    }
    let chosen = if single {
        if solutions[0].is_none() {
            return Err(rank_error(last_condition, n_max, q_max, &xs, n_temps));
        }
        0
    } else {
        match best {
            Some((i, _)) => i,
            None => return Err(rank_error(last_condition, n_max, q_max, &xs, n_temps)),
        }
    };
    table[chosen].chosen = true;
    let terms = table[chosen].terms;
    let t_order = table[chosen].t_order;
    let p = terms * (t_order + 1);
    let sol = solutions[chosen]
        .take()
        .expect("chosen candidate has a solution");
    let dof = n - p;
    let sigma2 = sol.rss / dof as f64;
    let cov: Vec<f64> = sol.cov_unscaled.iter().map(|c| c * sigma2).collect();

    // ---- the model -------------------------------------------------------
    let w_all: Vec<f64> = rows.iter().map(|r| r.w).collect();
    let (w_lo, w_hi) = span(&w_all);
    let data_range = Validity {
        w_min: w_lo,
        w_max: w_hi,
        t_min: t_lo,
        t_max: t_hi,
    };
    let model = FittedMixture {
        name: spec.name.clone(),
        components: spec.components.clone(),
        pure: pure_curves,
        excess: Excess {
            t0,
            terms,
            t_order,
            coef: sol.coef.clone(),
            cov: cov.clone(),
        },
        data_range,
        validity: data_range,
        provenance: Provenance {
            source: spec.source.clone(),
            date: spec.date.clone(),
            rows: rows.to_vec(),
        },
    };

    // ---- residuals -------------------------------------------------------
    let mut residuals: Vec<RowResidual> = rows
        .iter()
        .enumerate()
        .map(|(i, r)| RowResidual {
            row: i,
            w: r.w,
            x: model.x_from_w(r.w),
            t: r.t,
            pure: !(r.w > 0.0 && r.w < 1.0),
            ve_residual: None,
            rho_residual: r.rho - model.rho(r.w, r.t),
            leverage: 0.0,
            studentized: 0.0,
            limit: f64::INFINITY,
            outlier: false,
        })
        .collect();
    let mut phi_full = vec![0.0; terms * (t_order + 1)];
    let mut ss_ve = 0.0;
    let mut ss_rho = 0.0;
    let sigma = sigma2.sqrt();
    for (ii, &i) in mix.iter().enumerate() {
        design_row(xs[ii], taus[ii], terms, t_order, &mut phi_full);
        let fitted: f64 = phi_full.iter().zip(&sol.coef).map(|(f, c)| f * c).sum();
        let e = y[ii] - fitted;
        let aw: Vec<f64> = phi_full.iter().map(|f| f * sw[ii]).collect();
        let h = sol.leverage(&aw);
        let rr = &mut residuals[i];
        rr.ve_residual = Some(e);
        rr.leverage = h;
        // V^E and density residuals have opposite signs (ρ = 1000 M̄/V_m);
        // report the studentized residual with the density's sign.
        rr.studentized = -studentize(sw[ii] * e, sigma, h, dof);
        rr.limit = super::outlier_limit(dof);
        ss_ve += e * e;
        ss_rho += rr.rho_residual * rr.rho_residual;
    }
    for st in pure_row_stats {
        let r = &mut residuals[st.row];
        r.leverage = st.leverage;
        r.studentized = st.studentized;
        r.limit = st.limit;
    }
    let mut outliers = Vec::new();
    for r in residuals.iter_mut() {
        r.outlier = r.studentized.abs() > r.limit;
        if r.outlier {
            outliers.push(r.row);
        }
    }
    let largest_residual = residuals
        .iter()
        .max_by(|a, b| a.rho_residual.abs().total_cmp(&b.rho_residual.abs()))
        .map(|r| r.row)
        .unwrap_or(0);

    let q1 = t_order + 1;
    let coefficients = (0..p)
        .map(|c| Coefficient {
            k: c / q1,
            j: c % q1,
            value: sol.coef[c],
            u: cov[c * p + c].max(0.0).sqrt(),
        })
        .collect();

    let report = FitReport {
        name: spec.name.clone(),
        components: spec.components.clone(),
        rows: rows.len(),
        mixture_rows: n,
        weighted,
        terms,
        t_order,
        terms_auto: matches!(spec.terms, TermChoice::Auto { .. }),
        order_auto: matches!(spec.t_order, OrderChoice::Auto),
        t_center: t0,
        coefficients,
        pure: [pure_reports[0].clone(), pure_reports[1].clone()],
        dof,
        residual_sd_ve: (ss_ve / dof as f64).sqrt(),
        residual_sd_rho: (ss_rho / dof as f64).sqrt(),
        birge_ratio: weighted.then_some(sigma),
        largest_residual,
        residuals,
        outliers,
        condition_number: sol.condition,
        data_range,
        aicc_table: table,
        warnings,
    };
    Ok(Fit { model, report })
}

/// Externally studentized residual of a weighted residual `e`, or 0 when
/// it is undefined (leverage 1, or fewer than 2 residual degrees of
/// freedom).
fn studentize(e: f64, sigma: f64, h: f64, dof: usize) -> f64 {
    // NaN leverage or σ fall through to 0 as well.
    let usable = h < 1.0 - 1e-10 && sigma > 0.0;
    if dof < 2 || !usable {
        return 0.0;
    }
    let r = e / (sigma * (1.0 - h).sqrt());
    let nu = dof as f64;
    let denom = nu - r * r;
    if denom <= 0.0 {
        return r.signum() * f64::MAX.sqrt();
    }
    r * ((nu - 1.0) / denom).sqrt()
}

/// Unweighted design row: φ_kj = x(1−x)(2x−1)^k τ^j at index k(q+1)+j.
#[inline]
fn design_row(x: f64, tau: f64, terms: usize, q: usize, out: &mut [f64]) {
    let z = 2.0 * x - 1.0;
    let mut zk = x * (1.0 - x);
    for k in 0..terms {
        let mut tj = 1.0;
        for j in 0..=q {
            out[k * (q + 1) + j] = zk * tj;
            tj *= tau;
        }
        zk *= z;
    }
}

/// Column indices of the (terms, q) model inside a design of order q_max.
fn subset(terms: usize, q: usize, q1_max: usize) -> Vec<usize> {
    let mut v = Vec::with_capacity(terms * (q + 1));
    for k in 0..terms {
        for j in 0..=q {
            v.push(k * q1_max + j);
        }
    }
    v
}

fn rank_error(cond: f64, terms: usize, q: usize, xs: &[f64], n_temps: usize) -> Error {
    let n_comp = count_distinct(xs, 1e-9);
    let cond = if cond.is_finite() {
        format!("condition number {cond:.2e}")
    } else {
        "singular".to_string()
    };
    Error::Fit(format!(
        "the design matrix is rank-deficient ({cond}): {terms} Redlich–Kister terms need at least \
         {terms} distinct mixture compositions and temperature order {q} needs {} distinct \
         temperatures; the data have {n_comp} compositions at {n_temps} temperatures",
        q + 1
    ))
}

fn check_spec(spec: &FitSpec) -> Result<()> {
    for c in &spec.components {
        check_component(c)?;
    }
    match spec.terms {
        TermChoice::Fixed(k) | TermChoice::Auto { max: k } if k == 0 || k > MAX_TERMS => {
            return Err(Error::Invalid(format!(
                "Redlich–Kister term count must be 1 to {MAX_TERMS}, got {k}"
            )));
        }
        _ => {}
    }
    if let OrderChoice::Fixed(q) = spec.t_order {
        if q > MAX_T_ORDER {
            return Err(Error::Invalid(format!(
                "temperature order must be 0, 1 or 2, got {q}"
            )));
        }
    }
    if let Some(t) = spec.t_center {
        if !t.is_finite() {
            return Err(Error::NotFinite {
                quantity: "centre temperature t0",
                value: t,
            });
        }
    }
    for (i, p) in spec.pure.iter().enumerate() {
        if let PureSource::Given(d) = p {
            d.check(&format!(
                "given density of pure {}",
                spec.components[i].name
            ))?;
        }
    }
    Ok(())
}

/// Checks every row; returns whether the rows carry density uncertainties.
fn check_rows(rows: &[FitRow]) -> Result<bool> {
    let weighted = rows.first().is_some_and(|r| r.u_rho.is_some());
    for (i, r) in rows.iter().enumerate() {
        let bad = |message: String| Error::FitRow {
            row: i + 1,
            message,
        };
        for (name, v) in [
            ("mass fraction w", r.w),
            ("density", r.rho),
            ("temperature", r.t),
        ] {
            if !v.is_finite() {
                return Err(bad(format!("{name} must be a finite number, got {v}")));
            }
        }
        if !(0.0..=1.0).contains(&r.w) {
            return Err(bad(format!(
                "mass fraction w = {} is outside the valid range 0 to 1",
                r.w
            )));
        }
        if r.rho <= 0.0 {
            return Err(bad(format!(
                "density must be positive (kg/m³), got {}",
                r.rho
            )));
        }
        match (r.u_rho, weighted) {
            (Some(u), true) => {
                if !(u.is_finite() && u > 0.0) {
                    return Err(bad(format!(
                        "density uncertainty must be a positive finite number of kg/m³, got {u}"
                    )));
                }
            }
            (None, false) => {}
            _ => {
                return Err(bad(
                    "either every row gives a density uncertainty or none does".into(),
                ))
            }
        }
    }
    Ok(weighted)
}

/// Number of clusters of values separated by more than `tol`.
pub(crate) fn count_distinct(values: &[f64], tol: f64) -> usize {
    if values.is_empty() {
        return 0;
    }
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    1 + v.windows(2).filter(|p| p[1] - p[0] > tol).count()
}

fn span(v: &[f64]) -> (f64, f64) {
    v.iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &x| {
            (lo.min(x), hi.max(x))
        })
}

/// Leverage, studentized residual and outlier limit of one pure row.
struct RowStat {
    row: usize,
    leverage: f64,
    studentized: f64,
    limit: f64,
}

/// A pure curve, its report and the statistics of each of its rows.
type PureFit = (PureCurve, PureReport, Vec<RowStat>);

/// Fits (or takes) the density curve of pure component `i`; returns the
/// curve, its report and the statistics of each of its rows.
#[allow(clippy::too_many_arguments)]
fn pure_curve(
    spec: &FitSpec,
    rows: &[FitRow],
    i: usize,
    t0: f64,
    weighted: bool,
    mix_temps: usize,
    mix_span: (f64, f64),
    warnings: &mut Vec<String>,
) -> Result<PureFit> {
    let name = &spec.components[i].name;
    let w_pure = if i == 0 { 1.0 } else { 0.0 };
    let idx: Vec<usize> = (0..rows.len()).filter(|&r| rows[r].w == w_pure).collect();
    let temps: Vec<f64> = idx.iter().map(|&r| rows[r].t).collect();
    let distinct = count_distinct(&temps, T_DISTINCT_C);
    let t_span = (!temps.is_empty()).then(|| span(&temps));
    if let PureSource::Given(d) = &spec.pure[i] {
        let report = PureReport {
            component: name.clone(),
            origin: PureOrigin::Given,
            rows: idx.len(),
            distinct_temperatures: distinct,
            t0: d.t0,
            coefficients: d
                .coefficients
                .iter()
                .map(|&c| Estimate { value: c, u: 0.0 })
                .collect(),
            residual_sd: None,
            t_span,
        };
        let curve = PureCurve {
            density: d.clone(),
            cov: None,
            origin: PureOrigin::Given,
        };
        return Ok((curve, report, Vec::new()));
    }
    if idx.is_empty() {
        return Err(Error::Fit(format!(
            "no rows of pure {name} (w = {w_pure}) and no given density for {name}: \
             measure the pure component or give its density"
        )));
    }
    if distinct == 1 && mix_temps > 1 {
        return Err(Error::Fit(format!(
            "the rows of pure {name} are all at one temperature ({} °C) but the mixture rows \
             span {} to {} °C: add pure {name} rows at other temperatures or give its density \
             as a function of temperature",
            temps[0], mix_span.0, mix_span.1
        )));
    }
    let (lo, hi) = span(&temps);
    if lo > mix_span.0 + T_DISTINCT_C || hi < mix_span.1 - T_DISTINCT_C {
        warnings.push(format!(
            "the density curve of pure {name} is fitted over {} to {} °C and extrapolated to \
             the mixture rows' {} to {} °C",
            num(lo),
            num(hi),
            num(mix_span.0),
            num(mix_span.1)
        ));
    }
    let deg = MAX_PURE_DEGREE.min(distinct - 1);
    let p = deg + 1;
    let n = idx.len();
    let sw: Vec<f64> = idx
        .iter()
        .map(|&r| rows[r].u_rho.map_or(1.0, |u| 1.0 / u))
        .collect();
    let mut a = DMatrix::zeros(n, p);
    for (ii, &r) in idx.iter().enumerate() {
        let mut tj = 1.0;
        for j in 0..p {
            a[(ii, j)] = sw[ii] * tj;
            tj *= rows[r].t - t0;
        }
    }
    let y = DVector::from_iterator(
        n,
        idx.iter().enumerate().map(|(ii, &r)| sw[ii] * rows[r].rho),
    );
    let sol = lsq::solve_dense(a.clone(), &y).map_err(|cond| {
        Error::Fit(format!(
            "the density curve of pure {name} cannot be fitted (condition number {cond:.2e})"
        ))
    })?;
    let dof = n - p;
    let sigma2 = if dof > 0 { sol.rss / dof as f64 } else { 0.0 };
    // With no residual degrees of freedom the scatter cannot be measured:
    // stated uncertainties are then taken at face value (σ = 1); without
    // them the curve's uncertainty is unknown.
    let cov = if dof > 0 {
        Some(
            sol.cov_unscaled
                .iter()
                .map(|c| c * sigma2)
                .collect::<Vec<_>>(),
        )
    } else if weighted {
        Some(sol.cov_unscaled.clone())
    } else {
        warnings.push(format!(
            "the density curve of pure {name} passes exactly through its {n} rows: \
             its uncertainty is unknown and left out of the propagated uncertainties"
        ));
        None
    };
    let mut stats = Vec::with_capacity(n);
    let mut ss = 0.0;
    for (ii, &r) in idx.iter().enumerate() {
        let row: Vec<f64> = (0..p).map(|j| a[(ii, j)]).collect();
        let fitted: f64 = row.iter().zip(&sol.coef).map(|(f, c)| f * c).sum::<f64>() / sw[ii];
        let e = rows[r].rho - fitted;
        ss += e * e;
        let h = sol.leverage(&row);
        stats.push(RowStat {
            row: r,
            leverage: h,
            studentized: studentize(sw[ii] * e, sigma2.sqrt(), h, dof),
            limit: super::outlier_limit(dof),
        });
    }
    let coefficients = (0..p)
        .map(|j| Estimate {
            value: sol.coef[j],
            u: cov.as_ref().map_or(0.0, |c| c[j * p + j].max(0.0).sqrt()),
        })
        .collect();
    let report = PureReport {
        component: name.clone(),
        origin: PureOrigin::Fitted,
        rows: n,
        distinct_temperatures: distinct,
        t0,
        coefficients,
        residual_sd: (dof > 0).then(|| (ss / dof as f64).sqrt()),
        t_span,
    };
    let curve = PureCurve {
        density: super::PureDensity::polynomial(t0, sol.coef.clone()),
        cov,
        origin: PureOrigin::Fitted,
    };
    Ok((curve, report, stats))
}
