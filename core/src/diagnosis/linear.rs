//! Linear data reconciliation: residuals, their covariance, and the three
//! tests of gross-error detection (global test, measurement test, GLR for
//! a single bias), for up to [`MAX_ROWS`] relations among up to
//! [`MAX_COLS`] measured quantities. No heap: fixed arrays, sizes at run
//! time.
//!
//! With `A` the sensitivity of the residuals to the measurement errors and
//! `Σ` the errors' variances, `V = A Σ Aᵀ` is the residuals' covariance.
//! For residuals `r`:
//! - global test `γ = rᵀ V⁻¹ r`;
//! - estimated errors (adjustments) `a = Σ Aᵀ V⁻¹ r`, with covariance
//!   `W = Σ Aᵀ V⁻¹ A Σ`, and the measurement test `z_j = |a_j| / √W_jj`;
//! - GLR for a bias in quantity `j`, signature `f_j = A[:, j]`:
//!   `T_j = (f_jᵀ V⁻¹ r)² / (f_jᵀ V⁻¹ f_j)`, estimate
//!   `b_j = (f_jᵀ V⁻¹ r) / (f_jᵀ V⁻¹ f_j)`.

use crate::num::{Real, above};

use super::error::DiagnosisError;

/// Most relations (rows).
pub const MAX_ROWS: usize = 4;
/// Most measured quantities (columns).
pub const MAX_COLS: usize = 8;

/// A linear system of relations among measured quantities.
///
/// The classic example: a splitter, stream 1 in, streams 2 and 3 out,
/// measured 100.0, 64.0 and 38.0 with standard deviations 2, 1 and 1:
///
/// ```
/// use heatbound::diagnosis::linear::System;
/// let s = System::new(&[&[1.0, -1.0, -1.0]], &[4.0, 1.0, 1.0])?;
/// let y = [100.0, 64.0, 38.0];
/// let r = [y[0] - y[1] - y[2]];                 // −2.0
/// let rec = s.reconcile(&r)?;
/// let x: Vec<f64> = (0..3).map(|j| y[j] - rec.adjustments[j]).collect();
/// assert!((x[0] - (x[1] + x[2])).abs() < 1e-12); // the balance holds
/// assert!((x[0] - 101.3333333333).abs() < 1e-9); // the larger variance moves most
/// assert!((rec.gamma - 4.0 / 6.0).abs() < 1e-12);
/// # Ok::<(), heatbound::diagnosis::DiagnosisError>(())
/// ```
#[derive(Clone, Debug, PartialEq)]
pub struct System<R: Real = f64> {
    rows: usize,
    cols: usize,
    a: [[R; MAX_COLS]; MAX_ROWS],
    var: [R; MAX_COLS],
    v: [[R; MAX_ROWS]; MAX_ROWS],
    v_inv: [[R; MAX_ROWS]; MAX_ROWS],
}

/// What the tests say about one set of residuals.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Reconciled<R: Real = f64> {
    /// The global test statistic `rᵀ V⁻¹ r`.
    pub gamma: R,
    /// The estimated errors `a = Σ Aᵀ V⁻¹ r`, first `cols` used; the
    /// reconciled values are the measurements minus these.
    pub adjustments: [R; MAX_COLS],
    /// The measurement test `|a_j| / √W_jj` (0 where `W_jj` is 0).
    pub z: [R; MAX_COLS],
    /// The GLR statistic `T_j` for a single bias in quantity `j` (0 where
    /// the quantity does not move any relation).
    pub glr: [R; MAX_COLS],
    /// The GLR estimate of that bias.
    pub glr_bias: [R; MAX_COLS],
}

impl<R: Real> System<R> {
    /// The system of relations with sensitivities `a` (one slice per row,
    /// one value per measured quantity) and error variances `variances`.
    pub fn new(a: &[&[R]], variances: &[R]) -> Result<System<R>, DiagnosisError> {
        let rows = a.len();
        let cols = variances.len();
        if rows == 0 || rows > MAX_ROWS || cols == 0 || cols > MAX_COLS {
            return Err(DiagnosisError::Size);
        }
        let mut m = [[R::ZERO; MAX_COLS]; MAX_ROWS];
        for (dst, src) in m.iter_mut().zip(a) {
            if src.len() != cols {
                return Err(DiagnosisError::Size);
            }
            for (d, s) in dst.iter_mut().zip(src.iter()) {
                *d = *s;
            }
        }
        let mut var = [R::ZERO; MAX_COLS];
        for (d, s) in var.iter_mut().zip(variances) {
            *d = *s;
        }
        Self::from_parts(rows, cols, m, var)
    }

    /// The same from fixed arrays: the first `rows` rows and `cols` columns
    /// of `a`, and the first `cols` variances.
    pub fn from_parts(
        rows: usize,
        cols: usize,
        a: [[R; MAX_COLS]; MAX_ROWS],
        var: [R; MAX_COLS],
    ) -> Result<System<R>, DiagnosisError> {
        if rows == 0 || rows > MAX_ROWS || cols == 0 || cols > MAX_COLS {
            return Err(DiagnosisError::Size);
        }
        let finite = a
            .iter()
            .take(rows)
            .all(|r| r.iter().take(cols).all(|x| x.is_finite()))
            && var
                .iter()
                .take(cols)
                .all(|v| v.is_finite() && *v >= R::ZERO);
        if !finite {
            return Err(DiagnosisError::NotFinite);
        }
        let mut v = [[R::ZERO; MAX_ROWS]; MAX_ROWS];
        for (i, vi) in v.iter_mut().enumerate().take(rows) {
            for (k, vik) in vi.iter_mut().enumerate().take(rows) {
                *vik = sum((0..cols).map(|j| a[i][j] * var[j] * a[k][j]));
            }
        }
        let v_inv = invert(&v, rows).ok_or(DiagnosisError::Singular)?;
        Ok(Self {
            rows,
            cols,
            a,
            var,
            v,
            v_inv,
        })
    }

    /// Relations.
    pub const fn rows(&self) -> usize {
        self.rows
    }

    /// Measured quantities.
    pub const fn cols(&self) -> usize {
        self.cols
    }

    /// The covariance of the residuals, `V = A Σ Aᵀ` (first `rows`).
    pub const fn covariance(&self) -> &[[R; MAX_ROWS]; MAX_ROWS] {
        &self.v
    }

    /// The standard uncertainty of residual `i`, `√V_ii`.
    pub fn u(&self, i: usize) -> R {
        match self.v.get(i).and_then(|r| r.get(i)) {
            Some(v) if *v > R::ZERO => v.sqrt(),
            _ => R::ZERO,
        }
    }

    /// `V⁻¹ x` for a residual vector `x`.
    fn solve(&self, x: &[R]) -> [R; MAX_ROWS] {
        let mut p = [R::ZERO; MAX_ROWS];
        for (i, pi) in p.iter_mut().enumerate().take(self.rows) {
            *pi = sum(
                (0..self.rows).map(|k| self.v_inv[i][k] * x.get(k).copied().unwrap_or(R::ZERO))
            );
        }
        p
    }

    /// Column `j` of `A` (the first `rows` entries; zeros past `cols`).
    pub fn column(&self, j: usize) -> [R; MAX_ROWS] {
        let mut f = [R::ZERO; MAX_ROWS];
        for (i, fi) in f.iter_mut().enumerate().take(self.rows) {
            *fi = self.a[i].get(j).copied().unwrap_or(R::ZERO);
        }
        f
    }

    /// `xᵀ V⁻¹ y`.
    pub fn weighted(&self, x: &[R], y: &[R]) -> R {
        let p = self.solve(y);
        sum((0..self.rows).map(|i| x.get(i).copied().unwrap_or(R::ZERO) * p[i]))
    }

    /// The tests on residuals `r` (one per row).
    pub fn reconcile(&self, r: &[R]) -> Result<Reconciled<R>, DiagnosisError> {
        if r.len() != self.rows {
            return Err(DiagnosisError::Size);
        }
        if !r.iter().all(|x| x.is_finite()) {
            return Err(DiagnosisError::NotFinite);
        }
        let p = self.solve(r);
        let gamma = sum((0..self.rows).map(|i| r[i] * p[i]));
        let mut out = Reconciled {
            gamma,
            adjustments: [R::ZERO; MAX_COLS],
            z: [R::ZERO; MAX_COLS],
            glr: [R::ZERO; MAX_COLS],
            glr_bias: [R::ZERO; MAX_COLS],
        };
        for j in 0..self.cols {
            let f = self.column(j);
            let num = sum((0..self.rows).map(|i| f[i] * p[i]));
            let den = self.weighted(&f[..self.rows], &f[..self.rows]);
            out.adjustments[j] = self.var[j] * num;
            let w_jj = self.var[j] * self.var[j] * den;
            if w_jj > R::ZERO {
                out.z[j] = out.adjustments[j].abs() / w_jj.sqrt();
            }
            if den > R::ZERO {
                out.glr[j] = num * num / den;
                out.glr_bias[j] = num / den;
            }
        }
        Ok(out)
    }
}

/// `Σ x`.
fn sum<R: Real>(x: impl Iterator<Item = R>) -> R {
    x.fold(R::ZERO, |s, v| s + v)
}

/// `m⁻¹` for the leading `n × n` block of a covariance matrix; `None` when
/// it is singular. The matrix is first scaled to unit diagonal (residuals
/// in watts, W/K and kelvin differ by orders of magnitude), then inverted by
/// Gauss–Jordan elimination with partial pivoting; a pivot below `1e-6`
/// (of the unit diagonal) counts as singular: two relations that say the
/// same thing.
fn invert<R: Real>(m: &[[R; MAX_ROWS]; MAX_ROWS], n: usize) -> Option<[[R; MAX_ROWS]; MAX_ROWS]> {
    let mut d = [R::ZERO; MAX_ROWS];
    for i in 0..n {
        let v = m[i][i];
        if !above(v, R::ZERO) || !v.is_finite() {
            return None;
        }
        d[i] = v.sqrt();
    }
    let mut a = [[R::ZERO; MAX_ROWS]; MAX_ROWS];
    let mut inv = [[R::ZERO; MAX_ROWS]; MAX_ROWS];
    for i in 0..n {
        for k in 0..n {
            a[i][k] = m[i][k] / (d[i] * d[k]);
        }
        inv[i][i] = R::ONE;
    }
    let tiny = R::from_f64(1e-6);
    for col in 0..n {
        let mut pivot = col;
        for r in col + 1..n {
            if a[r][col].abs() > a[pivot][col].abs() {
                pivot = r;
            }
        }
        if !above(a[pivot][col].abs(), tiny) {
            return None;
        }
        a.swap(col, pivot);
        inv.swap(col, pivot);
        let p = a[col][col];
        for k in 0..n {
            a[col][k] = a[col][k] / p;
            inv[col][k] = inv[col][k] / p;
        }
        for r in 0..n {
            let f = a[r][col];
            if r != col && f != R::ZERO {
                for k in 0..n {
                    a[r][k] = a[r][k] - f * a[col][k];
                    inv[r][k] = inv[r][k] - f * inv[col][k];
                }
            }
        }
    }
    for i in 0..n {
        for k in 0..n {
            inv[i][k] = inv[i][k] / (d[i] * d[k]);
            if !inv[i][k].is_finite() {
                return None;
            }
        }
    }
    Some(inv)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn inverse_of_a_known_matrix() {
        // [[4, 2], [2, 3]]⁻¹ = [[3, −2], [−2, 4]] / 8.
        let mut m = [[0.0_f64; MAX_ROWS]; MAX_ROWS];
        m[0][0] = 4.0;
        m[0][1] = 2.0;
        m[1][0] = 2.0;
        m[1][1] = 3.0;
        let inv = invert(&m, 2).unwrap();
        assert!((inv[0][0] - 0.375).abs() < 1e-15);
        assert!((inv[0][1] + 0.25).abs() < 1e-15);
        assert!((inv[1][1] - 0.5).abs() < 1e-15);
        let mut s = [[0.0_f64; MAX_ROWS]; MAX_ROWS];
        s[0][0] = 1.0;
        s[0][1] = 1.0;
        s[1][0] = 1.0;
        s[1][1] = 1.0;
        assert!(invert(&s, 2).is_none());
    }

    #[test]
    fn sizes_and_values_are_checked() {
        assert_eq!(
            System::<f64>::new(&[], &[1.0]).unwrap_err(),
            DiagnosisError::Size
        );
        assert_eq!(
            System::new(&[&[1.0, 2.0]], &[1.0]).unwrap_err(),
            DiagnosisError::Size
        );
        assert_eq!(
            System::new(&[&[f64::NAN]], &[1.0]).unwrap_err(),
            DiagnosisError::NotFinite
        );
        // A relation no uncertain quantity enters has no covariance.
        assert_eq!(
            System::new(&[&[1.0, 0.0]], &[0.0, 1.0]).unwrap_err(),
            DiagnosisError::Singular
        );
    }
}
