//! The ethanol–water reference model: the international alcoholometric
//! formula (OIML R 22, 1975; also the annex of EU Council Directive
//! 76/766/EEC). ρ(w, t) in kg/m³ for mass fraction of ethanol w (0–1) and
//! temperature t (−20 to +40 °C):
//!
//! ρ = Σ_{k=1}^{12} A_k w^{k−1} + Σ_{k=1}^{6} B_k (t−20)^k
//!   + Σ_{i=1}^{5} Σ_{k=1}^{m_i} C_{i,k} w^k (t−20)^i
//!
//! with m = (11, 10, 9, 4, 2). The derivatives are exact (the polynomial
//! differentiated term by term).

use std::sync::OnceLock;

use super::bulk;
use super::error::{Error, Result};
use super::model::{Component, Mixture, Validity, T_PROOF_C, T_REF_C};
use super::solve;

/// A_1 … A_12, kg/m³.
const A: [f64; 12] = [
    9.982012300e2,
    -1.929769495e2,
    3.891238958e2,
    -1.668103923e3,
    1.352215441e4,
    -8.829278388e4,
    3.062874042e5,
    -6.138381234e5,
    7.470172998e5,
    -5.478461354e5,
    2.234460334e5,
    -3.903285426e4,
];

/// B_1 … B_6, kg/m³/K^k.
const B: [f64; 6] = [
    -2.0618513e-1,
    -5.2682542e-3,
    3.6130013e-5,
    -3.8957702e-7,
    7.1693540e-9,
    -9.9739231e-11,
];

const C1: [f64; 11] = [
    1.693443461530087e-1,
    -1.046914743455169e1,
    7.196353469546523e1,
    -7.047478054272792e2,
    3.924090430035045e3,
    -1.210164659068747e4,
    2.248646550400788e4,
    -2.605562982188164e4,
    1.852373922069467e4,
    -7.420201433430137e3,
    1.285617841998974e3,
];
// Digits as printed in the standard, trailing zeros included.
#[allow(clippy::excessive_precision)]
const C2: [f64; 10] = [
    -1.193013005057010e-2,
    2.517399633803461e-1,
    -2.170575700536993,
    1.353034988843029e1,
    -5.029988758547014e1,
    1.096355666577570e2,
    -1.422753946421155e2,
    1.080435942856230e2,
    -4.414153236817392e1,
    7.442971530188783,
];
// Digits as printed in the standard, trailing zeros included.
#[allow(clippy::excessive_precision)]
const C3: [f64; 9] = [
    -6.802995733503803e-4,
    1.876837790289664e-2,
    -2.002561813734156e-1,
    1.022992966719220,
    -2.895696483903638,
    4.810060584300675,
    -4.672147440794683,
    2.458043105903461,
    -5.411227621436812e-1,
];
// Digits as printed in the standard, trailing zeros included.
#[allow(clippy::excessive_precision)]
const C4: [f64; 4] = [
    4.075376675622027e-6,
    -8.763058573471110e-6,
    6.515031360099368e-6,
    -1.515784836987210e-6,
];
const C5: [f64; 2] = [-2.788074354782409e-8, 1.345612883493354e-8];

/// Molar mass of ethanol C₂H₅OH, g/mol, from the IUPAC conventional
/// standard atomic weights (C 12.011, H 1.008, O 15.999).
pub const M_ETHANOL: f64 = 2.0 * 12.011 + 6.0 * 1.008 + 15.999;
/// Molar mass of water H₂O, g/mol, from the same atomic weights.
pub const M_WATER: f64 = 2.0 * 1.008 + 15.999;

/// Σ c_k w^k for k = 1..=n (no constant term), and its derivative in w.
#[inline(always)]
fn poly_w<const N: usize>(c: &[f64; N], w: f64) -> (f64, f64) {
    // Horner on p(w) = c_1 + c_2 w + … ; value = w p(w), derivative = p + w p'.
    let mut p = 0.0;
    let mut dp = 0.0;
    for &ck in c.iter().rev() {
        dp = dp * w + p;
        p = p * w + ck;
    }
    (w * p, p + w * dp)
}

/// Horner value and derivative of Σ a_k w^k for k = 0..N-1.
#[inline(always)]
fn poly0<const N: usize>(a: &[f64; N], w: f64) -> (f64, f64) {
    let mut p = 0.0;
    let mut dp = 0.0;
    for &ak in a.iter().rev() {
        dp = dp * w + p;
        p = p * w + ak;
    }
    (p, dp)
}

/// Density of pure water ρ(0, t): only the A₁ and B terms survive.
#[inline(always)]
fn rho_water(d: f64) -> f64 {
    let mut bt = 0.0;
    for &bk in B.iter().rev() {
        bt = bt * d + bk;
    }
    A[0] + d * bt
}

// ---- inverse table ----------------------------------------------------------
//
// The density solve needs a first guess of w. Over the validity range
// ρ(·, t) falls strictly from ρ(0, t) to ρ(1, t) (see the monotonicity test),
// so s = (ρ(0, t) − ρ)/(ρ(0, t) − ρ(1, t)) runs over [0, 1] and w(s, t) is a
// smooth map of a rectangle. We tabulate w and ∂w/∂s on a grid and
// interpolate cubically in both directions: Hermite in s (with the stored
// slopes), Catmull–Rom in t (slopes from the neighbouring rows; linear
// interpolation in t left a tenth of the cold, water-rich points too far
// off for two Newton steps). Newton then polishes the guess. The table is
// built once, on first use (a few milliseconds), with the bracketed solver.

/// Grid rows in t over −20…40 °C, 1 K apart.
const TAB_NT: usize = 61;
/// Grid nodes in s over 0…1.
const TAB_NS: usize = 257;

struct InverseTable {
    /// ρ(1, t) = Σ_k e_k (t−20)^k: e₀ = Σ A, e_k = B_k + Σ_j C_{k,j}.
    ethanol: [f64; 7],
    /// Row i (t_i) holds, for node j (s_j), w at 2j and h·∂w/∂s at 2j + 1,
    /// with h = 1/(NS − 1) the s spacing. Fixed-size rows let the compiler
    /// drop the bounds checks within a row.
    rows: Vec<[f64; 2 * TAB_NS]>,
}

fn rho_ethanol_coefficients() -> [f64; 7] {
    let sum = |c: &[f64]| c.iter().sum::<f64>();
    [
        sum(&A),
        B[0] + sum(&C1),
        B[1] + sum(&C2),
        B[2] + sum(&C3),
        B[3] + sum(&C4),
        B[4] + sum(&C5),
        B[5],
    ]
}

fn inverse_table() -> &'static InverseTable {
    static TABLE: OnceLock<InverseTable> = OnceLock::new();
    TABLE.get_or_init(build_inverse_table)
}

fn build_inverse_table() -> InverseTable {
    let h = 1.0 / (TAB_NS - 1) as f64;
    let mut rows = vec![[0.0; 2 * TAB_NS]; TAB_NT];
    for (i, row) in rows.iter_mut().enumerate() {
        let t = -20.0 + 60.0 * i as f64 / (TAB_NT - 1) as f64;
        let (r0, r1) = (EthanolWater::rho_w(0.0, t), EthanolWater::rho_w(1.0, t));
        let f = |w: f64| {
            let (r, dr) = EthanolWater::rho_dw_impl(w, t);
            (-r, -dr)
        };
        // Along a row w rises with s: start each solve from the previous
        // node extended along its slope.
        let mut guess = 0.0;
        for j in 0..TAB_NS {
            let target = r0 - j as f64 * h * (r0 - r1);
            // Cannot fail: the target lies between the ends, where the
            // polynomial is finite.
            let w = solve::solve_increasing(f, -target, 0.0, 1.0, guess, "inverse table")
                .unwrap_or(guess);
            let slope = h * (r1 - r0) / EthanolWater::rho_dw_impl(w, t).1;
            row[2 * j] = w;
            row[2 * j + 1] = slope;
            guess = w + slope;
        }
    }
    InverseTable {
        ethanol: rho_ethanol_coefficients(),
        rows,
    }
}

impl InverseTable {
    #[inline(always)]
    fn rho_ethanol(&self, d: f64) -> f64 {
        let e = &self.ethanol;
        e[0] + d * (e[1] + d * (e[2] + d * (e[3] + d * (e[4] + d * (e[5] + d * e[6])))))
    }

    /// w at normalised density s (0–1) and temperature t (°C, in range).
    #[inline(always)]
    fn w_at(&self, s: f64, t: f64) -> f64 {
        let last_row = (TAB_NT - 1) as f64;
        let u = ((t + 20.0) * (last_row / 60.0)).clamp(0.0, last_row);
        let i = (u as usize).min(TAB_NT - 2);
        let ft = u - i as f64;
        // Hermite in s within each row.
        let (j, hs) = hermite_weights(s * (TAB_NS - 1) as f64, TAB_NS);
        let row = |i: usize| hermite_apply(&self.rows[i], j, &hs);
        // Catmull–Rom in t over rows i−1 … i+2, one-sided at the edges.
        let (im, ip) = (i.saturating_sub(1), (i + 2).min(TAB_NT - 1));
        let (p0, p1, p2, p3) = (row(im), row(i), row(i + 1), row(ip));
        let m1 = (p2 - p0) / (i + 1 - im) as f64;
        let m2 = (p3 - p1) / (ip - i) as f64;
        let (g2, g3) = (ft * ft, ft * ft * ft);
        (2.0 * g3 - 3.0 * g2 + 1.0) * p1
            + (g3 - 2.0 * g2 + ft) * m1
            + (-2.0 * g3 + 3.0 * g2) * p2
            + (g3 - g2) * m2
    }
}

/// The interval j (0 ≤ j ≤ n − 2) holding fractional node index `v`
/// (clamped to 0…n − 1) of a row of `n` nodes, and the cubic Hermite
/// weights there for (value j, spacing × slope j, value j + 1, spacing ×
/// slope j + 1).
#[inline(always)]
fn hermite_weights(v: f64, n: usize) -> (usize, [f64; 4]) {
    let last = (n - 1) as f64;
    let v = v.clamp(0.0, last);
    let j = (v as usize).min(n - 2);
    let f = v - j as f64;
    let (f2, f3) = (f * f, f * f * f);
    (
        j,
        [
            2.0 * f3 - 3.0 * f2 + 1.0,
            f3 - 2.0 * f2 + f,
            -2.0 * f3 + 3.0 * f2,
            f3 - f2,
        ],
    )
}

/// The Hermite interpolant on interval `j` of a row stored as in
/// [`InverseTable::rows`] (value at 2j, spacing × slope at 2j + 1).
#[inline(always)]
fn hermite_apply(row: &[f64], j: usize, hs: &[f64; 4]) -> f64 {
    let n = &row[2 * j..2 * j + 4];
    hs[0] * n[0] + hs[1] * n[1] + hs[2] * n[2] + hs[3] * n[3]
}

// ---- % vol guess tables -----------------------------------------------------
//
// The % vol solve (w ρ(w, t_ref) = (% vol/100) ρ(1, t_ref)) gets its first
// guess from a table of w and dw/d(% vol) at evenly spaced % vol nodes for
// each of the two usual reference temperatures, interpolated by cubic
// Hermite like the rows of the density table. With 257 nodes the guess is
// within ~1e-8 of the root (see the guess test), so one Newton step
// reaches the root and a second confirms it. Other reference temperatures
// get no guess and take the bracketed solve. Built once, on first use.

/// % vol nodes over 0…100.
const ABV_NS: usize = 257;
/// The reference temperatures with a table: 20 °C (% vol) and 60 °F (proof).
const ABV_T_REFS: [f64; 2] = [T_REF_C, T_PROOF_C];

fn abv_tables() -> &'static [[f64; 2 * ABV_NS]; 2] {
    static TABLES: OnceLock<[[f64; 2 * ABV_NS]; 2]> = OnceLock::new();
    TABLES.get_or_init(|| ABV_T_REFS.map(build_abv_row))
}

fn build_abv_row(t: f64) -> [f64; 2 * ABV_NS] {
    let h = 100.0 / (ABV_NS - 1) as f64;
    let rho1 = EthanolWater::rho_w(1.0, t);
    let f = |w: f64| {
        let (r, dr) = EthanolWater::rho_dw_impl(w, t);
        (w * r, r + w * dr)
    };
    let mut row = [0.0; 2 * ABV_NS];
    let mut guess = 0.0;
    for j in 0..ABV_NS {
        let target = j as f64 * h / 100.0 * rho1;
        // Cannot fail: the target lies between the ends, where the
        // polynomial is finite.
        let w = solve::solve_increasing(f, target, 0.0, 1.0, guess, "% vol table").unwrap_or(guess);
        // d(% vol)/dw = 100 (ρ + w ∂ρ/∂w)/ρ₁.
        let slope = h * rho1 / (100.0 * f(w).1);
        row[2 * j] = w;
        row[2 * j + 1] = slope;
        guess = w + slope;
    }
    row
}

// ---- bulk density solve -----------------------------------------------------

/// Newton step (in w) below which the bulk solve accepts a point: the
/// point solve's kind of rule (stop once the step is below a tolerance),
/// with the step applied. Why that is safe on its own, whatever happened
/// before: over the validity range 6.03 ≤ |∂ρ/∂w| ≤ 319 and |∂²ρ/∂w²| ≤ 1317
/// (scanned on a 1e-4 × 0.1 K grid). A step below 1e-11 means a residual
/// below 3.2e-9 kg/m³, so the point it starts from is within 5.3e-10 of the
/// root (mean value theorem), and the Newton step from there leaves at most
/// 1317/(2·6.03) × (5.3e-10)² ≈ 3e-17 — below the rounding floor of ρ itself
/// (≤ ~4e-10 kg/m³, ≤ 7e-11 in w).
const ACCEPT_STEP: f64 = 1e-11;

/// Extra Newton steps for the few points (cold, water-rich, where ρ is
/// flattest in w) that two steps from the table guess do not settle.
const STRAGGLER_STEPS: usize = 4;

/// Points solved together; the Newton passes run over whole chunks so the
/// compiler can vectorise the density evaluations.
const LANES: usize = 64;

impl EthanolWater {
    /// The bulk density solve (see [`Mixture::w_from_density_slice`]):
    /// guess from the table, two Newton passes over a chunk of points at
    /// once (a few more for the points that need them), then each point is
    /// accepted by its last step (see `ACCEPT_STEP`) or
    /// handed to the bracketed point solve, which also produces the error
    /// for an invalid or unreachable point.
    fn w_from_density_chunks(&self, rho: &[f64], t: &[f64], out: &mut [f64]) -> Result<()> {
        bulk::same_lengths(("density", rho.len()), ("t", t.len()), out.len())?;
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the CPU has AVX2, checked just above.
            return unsafe { self.w_from_density_chunks_avx2(rho, t, out) };
        }
        self.w_from_density_chunks_any(rho, t, out)
    }

    /// The same code compiled for AVX2 (4 lanes instead of SSE2's 2). No FMA
    /// is enabled and Rust never fuses a multiply and an add on its own, so
    /// the results are bit for bit those of the baseline build.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    unsafe fn w_from_density_chunks_avx2(
        &self,
        rho: &[f64],
        t: &[f64],
        out: &mut [f64],
    ) -> Result<()> {
        self.w_from_density_chunks_any(rho, t, out)
    }

    #[inline(always)]
    fn w_from_density_chunks_any(&self, rho: &[f64], t: &[f64], out: &mut [f64]) -> Result<()> {
        let tab = inverse_table();
        let v = self.validity();
        let chunks = rho
            .chunks(LANES)
            .zip(t.chunks(LANES))
            .zip(out.chunks_mut(LANES));
        for (c, ((rc, tc), oc)) in chunks.enumerate() {
            // Pass 1, vectorisable: which points take the fast path, and
            // where each sits in the table. The others get harmless
            // stand-in values and go the careful way at the end.
            let mut tt = [20.0; LANES];
            let mut target = [998.0; LANES];
            let mut sv = [0.5; LANES];
            let mut fast = [false; LANES];
            let n = rc.len().min(tc.len());
            for j in 0..n {
                let (r, t) = (rc[j], tc[j]);
                let valid = (t >= v.t_min) & (t <= v.t_max) & r.is_finite();
                let t = if valid { t } else { 20.0 };
                let d = t - 20.0;
                let (r0, r1) = (rho_water(d), tab.rho_ethanol(d));
                let s = (r0 - r) / (r0 - r1);
                // The ends (within the point solve's snap) and anything
                // beyond them go the careful way.
                let snap = solve::END_SNAP * r0;
                let ok = valid & (r0 - r > snap) & (r - r1 > snap);
                fast[j] = ok;
                tt[j] = if ok { t } else { 20.0 };
                target[j] = if ok { r } else { 998.0 };
                sv[j] = if ok { s } else { 0.5 };
            }
            // Pass 2: first guesses from the table (gathers).
            let mut w = [0.5; LANES];
            for j in 0..LANES {
                w[j] = tab.w_at(sv[j], tt[j]);
            }
            let mut step = [0.0; LANES];
            for _ in 0..2 {
                for j in 0..LANES {
                    let (r, dr) = Self::rho_dw_impl(w[j], tt[j]);
                    step[j] = (r - target[j]) / dr;
                    w[j] = (w[j] - step[j]).clamp(0.0, 1.0);
                }
            }
            for j in 0..n {
                if fast[j] && step[j].abs() > ACCEPT_STEP {
                    for _ in 0..STRAGGLER_STEPS {
                        let (r, dr) = Self::rho_dw_impl(w[j], tt[j]);
                        step[j] = (r - target[j]) / dr;
                        w[j] = (w[j] - step[j]).clamp(0.0, 1.0);
                        if step[j].abs() <= ACCEPT_STEP {
                            break;
                        }
                    }
                }
            }
            for j in 0..n {
                oc[j] = if fast[j] && step[j].abs() <= ACCEPT_STEP {
                    w[j]
                } else {
                    self.w_from_density(rc[j], tc[j])
                        .map_err(|e| Error::AtPoint {
                            index: c * LANES + j,
                            source: Box::new(e),
                        })?
                };
            }
        }
        Ok(())
    }
}

/// The international alcoholometric formula for ethanol (component 1) in
/// water (component 2).
#[derive(Debug, Clone)]
pub struct EthanolWater {
    components: [Component; 2],
}

impl Default for EthanolWater {
    fn default() -> Self {
        Self::new()
    }
}

impl EthanolWater {
    /// The reference model.
    pub fn new() -> Self {
        Self {
            components: [
                Component::new("ethanol", M_ETHANOL),
                Component::new("water", M_WATER),
            ],
        }
    }

    /// (ρ, ∂ρ/∂w, ∂ρ/∂t) in one pass.
    #[inline]
    pub fn eval(w: f64, t: f64) -> (f64, f64, f64) {
        let d = t - 20.0;
        let (a, da) = poly0(&A, w);
        // Temperature-only part Σ B_k d^k and its d-derivative.
        let (mut bt, mut dbt) = (0.0, 0.0);
        for &bk in B.iter().rev() {
            dbt = dbt * d + bt;
            bt = bt * d + bk;
        }
        let (bt, dbt) = (d * bt, bt + d * dbt);
        let (p1, dp1) = poly_w(&C1, w);
        let (p2, dp2) = poly_w(&C2, w);
        let (p3, dp3) = poly_w(&C3, w);
        let (p4, dp4) = poly_w(&C4, w);
        let (p5, dp5) = poly_w(&C5, w);
        // Σ_i P_i(w) d^i by Horner in d.
        let q = ((((p5 * d + p4) * d + p3) * d + p2) * d + p1) * d;
        let dq_dw = ((((dp5 * d + dp4) * d + dp3) * d + dp2) * d + dp1) * d;
        let dq_dd = (((5.0 * p5 * d + 4.0 * p4) * d + 3.0 * p3) * d + 2.0 * p2) * d + p1;
        (a + bt + q, da + dq_dw, dbt + dq_dd)
    }

    /// ρ(w, t) alone (unchecked).
    #[inline(always)]
    fn rho_w(w: f64, t: f64) -> f64 {
        let d = t - 20.0;
        let a = poly0(&A, w).0;
        let mut bt = 0.0;
        for &bk in B.iter().rev() {
            bt = bt * d + bk;
        }
        let p1 = poly_w(&C1, w).0;
        let p2 = poly_w(&C2, w).0;
        let p3 = poly_w(&C3, w).0;
        let p4 = poly_w(&C4, w).0;
        let p5 = poly_w(&C5, w).0;
        a + d * bt + ((((p5 * d + p4) * d + p3) * d + p2) * d + p1) * d
    }

    #[inline(always)]
    fn rho_dw_impl(w: f64, t: f64) -> (f64, f64) {
        let d = t - 20.0;
        let (a, da) = poly0(&A, w);
        let mut bt = 0.0;
        for &bk in B.iter().rev() {
            bt = bt * d + bk;
        }
        let (p1, dp1) = poly_w(&C1, w);
        let (p2, dp2) = poly_w(&C2, w);
        let (p3, dp3) = poly_w(&C3, w);
        let (p4, dp4) = poly_w(&C4, w);
        let (p5, dp5) = poly_w(&C5, w);
        let q = ((((p5 * d + p4) * d + p3) * d + p2) * d + p1) * d;
        let dq = ((((dp5 * d + dp4) * d + dp3) * d + dp2) * d + dp1) * d;
        (a + d * bt + q, da + dq)
    }
}

impl Mixture for EthanolWater {
    fn name(&self) -> &str {
        "ethanol-water (OIML R 22)"
    }

    fn components(&self) -> &[Component; 2] {
        &self.components
    }

    fn validity(&self) -> Validity {
        Validity {
            w_min: 0.0,
            w_max: 1.0,
            t_min: -20.0,
            t_max: 40.0,
        }
    }

    // Always inlined so that bulk loops (compiled for AVX2 as well) vectorise.
    #[inline(always)]
    fn rho(&self, w: f64, t: f64) -> f64 {
        Self::rho_w(w, t)
    }

    #[inline(always)]
    fn drho_dw(&self, w: f64, t: f64) -> f64 {
        Self::rho_dw_impl(w, t).1
    }

    #[inline]
    fn drho_dt(&self, w: f64, t: f64) -> f64 {
        Self::eval(w, t).2
    }

    #[inline]
    fn rho_dw(&self, w: f64, t: f64) -> (f64, f64) {
        Self::rho_dw_impl(w, t)
    }

    /// Closed forms: ρ(0, t) needs only A₁ and the B terms, ρ(1, t) a
    /// degree-6 polynomial in t with precomputed coefficient sums.
    #[inline]
    fn rho_at_ends(&self, t: f64) -> (f64, f64) {
        let d = t - 20.0;
        (rho_water(d), inverse_table().rho_ethanol(d))
    }

    /// Chunked and vectorised (notes at `ACCEPT_STEP` in this file); every
    /// result is within 1e-10 of the root, like the point solve's, and bad
    /// points get the point solve's errors.
    fn w_from_density_slice(&self, rho: &[f64], t: &[f64], out: &mut [f64]) -> Result<()> {
        self.w_from_density_chunks(rho, t, out)
    }

    /// From the precomputed tables at 20 °C and 60 °F (notes at `ABV_NS` in
    /// this file); `None` at any other reference temperature.
    #[inline]
    fn guess_w_from_abv(&self, abv: f64, t_ref: f64) -> Option<f64> {
        let i = ABV_T_REFS.iter().position(|&t| t == t_ref)?;
        if !abv.is_finite() {
            return None;
        }
        let (j, hs) = hermite_weights(abv * ((ABV_NS - 1) as f64 / 100.0), ABV_NS);
        Some(hermite_apply(&abv_tables()[i], j, &hs).clamp(0.0, 1.0))
    }

    /// From the precomputed table (notes at `TAB_NT` in this file): close
    /// enough that Newton usually needs two steps.
    #[inline]
    fn guess_w_from_density(&self, rho: f64, t: f64) -> Option<f64> {
        let tab = inverse_table();
        let d = t - 20.0;
        let (r0, r1) = (rho_water(d), tab.rho_ethanol(d));
        let s = (r0 - rho) / (r0 - r1);
        if !(s.is_finite() && t.is_finite()) {
            return None;
        }
        Some(tab.w_at(s.clamp(0.0, 1.0), t))
    }
}
