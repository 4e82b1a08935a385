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

use super::model::{Component, Mixture, Validity};

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

    #[inline]
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

    #[inline]
    fn rho(&self, w: f64, t: f64) -> f64 {
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

    #[inline]
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
}
