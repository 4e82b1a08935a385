//! Weighted linear least squares for the fitting engine, on top of
//! `nalgebra`. The design is reduced once by a Householder QR; every
//! candidate column subset is then solved by an SVD of its small slice of
//! R, which gives coefficients, the unscaled covariance (JᵀWJ)⁻¹ = V S⁻² Vᵀ
//! and the condition number without ever forming the normal equations.
//!
//! Columns are scaled to unit length before the SVD, so the condition
//! number measures collinearity of the terms rather than their units, and
//! the rank test is not fooled by a column of (t − t₀)² that is large
//! only because of its unit.

use nalgebra::{DMatrix, DVector, SVD};

/// Condition numbers above this count as rank-deficient: beyond it fewer
/// than six significant digits of the coefficients survive rounding.
pub const MAX_CONDITION: f64 = 1e10;

/// A design already multiplied by the square-root weights, reduced by QR.
pub struct Reduced {
    /// Upper-triangular R (P × P; rows beyond the row count are zero).
    r: DMatrix<f64>,
    /// The first P entries of Qᵀy.
    qty: DVector<f64>,
    /// Squared norm of the part of y orthogonal to every column.
    rss_perp: f64,
}

/// The solution for one column subset.
pub struct Solution {
    /// Coefficients, in subset order.
    pub coef: Vec<f64>,
    /// (JᵀWJ)⁻¹, p × p, row-major; multiply by σ² for the covariance.
    pub cov_unscaled: Vec<f64>,
    /// Weighted residual sum of squares χ².
    pub rss: f64,
    /// Condition number of the column-scaled weighted design.
    pub condition: f64,
    /// Maps a weighted design row to the vector whose squared norm is the
    /// leverage: M = S⁻¹ Vᵀ D⁻¹ (p × p, row-major).
    leverage_map: Vec<f64>,
}

impl Reduced {
    /// Reduces the weighted design `a` (n × P) and weighted data `y`.
    pub fn new(a: DMatrix<f64>, y: &DVector<f64>) -> Reduced {
        let p = a.ncols();
        let n = a.nrows();
        let qr = a.qr();
        let mut qy = y.clone();
        qr.q_tr_mul(&mut qy);
        let r_small = qr.r();
        // With fewer rows than columns R is n × P; pad to P × P so every
        // subset problem has the same shape (the padding rows are zero).
        let mut r = DMatrix::zeros(p, p);
        let k = n.min(p);
        r.view_mut((0, 0), (k, p))
            .copy_from(&r_small.view((0, 0), (k, p)));
        let mut qty = DVector::zeros(p);
        qty.rows_mut(0, k).copy_from(&qy.rows(0, k));
        let rss_perp = if n > p {
            qy.rows(p, n - p).norm_squared()
        } else {
            0.0
        };
        Reduced { r, qty, rss_perp }
    }

    /// Solves for the columns `cols` (indices into the reduced design).
    /// `None` when the subset is rank-deficient (condition above
    /// [`MAX_CONDITION`]) or the SVD fails to converge; the condition
    /// number is returned in the error slot so callers can report it.
    pub fn solve(&self, cols: &[usize]) -> Result<Solution, f64> {
        let p = cols.len();
        let big = self.r.nrows();
        let mut rs = DMatrix::zeros(big, p);
        let mut scale = vec![0.0; p];
        for (j, &c) in cols.iter().enumerate() {
            let col = self.r.column(c);
            let norm = col.norm();
            scale[j] = if norm > 0.0 { norm } else { 1.0 };
            rs.set_column(j, &(col / scale[j]));
        }
        let svd = SVD::try_new(rs, true, true, f64::EPSILON, 200).ok_or(f64::INFINITY)?;
        let s = &svd.singular_values;
        let smax = s.max();
        let smin = s.min();
        let condition = if smin > 0.0 {
            smax / smin
        } else {
            f64::INFINITY
        };
        // A NaN condition number is refused too.
        let acceptable = condition <= MAX_CONDITION;
        if !acceptable {
            return Err(condition);
        }
        let (Some(u), Some(vt)) = (svd.u.as_ref(), svd.v_t.as_ref()) else {
            return Err(f64::INFINITY);
        };
        // β_scaled = V S⁻¹ Uᵀ qty; β = D⁻¹ β_scaled.
        let uty = u.transpose() * &self.qty;
        let mut coef = vec![0.0; p];
        for j in 0..p {
            let mut acc = 0.0;
            for k in 0..p {
                acc += vt[(k, j)] * uty[k] / s[k];
            }
            coef[j] = acc / scale[j];
        }
        // Residual inside the column space of R plus the orthogonal part.
        let mut rss = self.rss_perp;
        for i in 0..big {
            let mut fit = 0.0;
            for (j, &c) in cols.iter().enumerate() {
                fit += self.r[(i, c)] * coef[j];
            }
            let e = self.qty[i] - fit;
            rss += e * e;
        }
        let mut cov_unscaled = vec![0.0; p * p];
        for a in 0..p {
            for b in 0..p {
                let mut acc = 0.0;
                for k in 0..p {
                    acc += vt[(k, a)] * vt[(k, b)] / (s[k] * s[k]);
                }
                cov_unscaled[a * p + b] = acc / (scale[a] * scale[b]);
            }
        }
        let mut leverage_map = vec![0.0; p * p];
        for k in 0..p {
            for j in 0..p {
                leverage_map[k * p + j] = vt[(k, j)] / (s[k] * scale[j]);
            }
        }
        Ok(Solution {
            coef,
            cov_unscaled,
            rss,
            condition,
            leverage_map,
        })
    }
}

impl Solution {
    /// Leverage h = aᵀ(JᵀWJ)⁻¹a of one weighted design row `a` (subset
    /// order).
    pub fn leverage(&self, a: &[f64]) -> f64 {
        let p = a.len();
        let mut h = 0.0;
        for k in 0..p {
            let row = &self.leverage_map[k * p..(k + 1) * p];
            let m: f64 = row.iter().zip(a).map(|(r, x)| r * x).sum();
            h += m * m;
        }
        h
    }
}

/// Solves a small dense weighted problem directly (used for the pure
/// component curves and the local regressions of the cross-check).
pub fn solve_dense(a: DMatrix<f64>, y: &DVector<f64>) -> Result<Solution, f64> {
    let p = a.ncols();
    Reduced::new(a, y).solve(&(0..p).collect::<Vec<_>>())
}
