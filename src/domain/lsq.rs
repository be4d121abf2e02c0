//! Ordinary least squares for the small regression models of the domain (stage response, HST):
//! coefficients, residuals, R² and the residual standard deviation.
//!
//! Owns the numerics only; which columns make up a model belongs to the model's module.
//!
//! Why a hand-written solver: a Householder QR is a few dozen lines, adds no dependency, and is
//! numerically sound for these problems (it never forms XᵀX, whose condition number is the
//! square of X's). Each column is first divided by its largest magnitude, so columns in very
//! different units (a constant, a level in metres, a time in days) do not spoil the rank test
//! or the conditioning. No column pivoting: a column that is (nearly) a combination of earlier
//! ones shows up as a small diagonal of R and is reported as rank deficiency rather than
//! silently dropped.

use thiserror::Error;

/// Relative size below which a diagonal element of R counts as zero: `|R_kk| < RANK_TOL ·
/// max_j |R_jj|` means the columns are linearly dependent for practical purposes.
pub const RANK_TOL: f64 = 1e-10;

/// Why a least-squares fit failed.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum LsqError {
    /// Rows of different lengths, no columns, or `y` of a different length than the rows.
    #[error("design matrix and observations do not match in shape")]
    Shape,
    /// Not more observations than coefficients, so no residual σ can be estimated.
    #[error("least squares needs more observations than coefficients: n = {n}, p = {p}")]
    TooFewRows { n: usize, p: usize },
    /// A value is NaN or infinite.
    #[error("design matrix or observations contain NaN or infinity")]
    NonFinite,
    /// Column `column` is zero or a linear combination of the earlier columns.
    #[error("design matrix is rank deficient at column {column}")]
    RankDeficient { column: usize },
}

/// A least-squares fit `y ≈ X·c`.
#[derive(Debug, Clone, PartialEq)]
pub struct Fit {
    /// Coefficients, one per column of the design matrix.
    pub coefficients: Vec<f64>,
    /// Residuals `y − X·c`, one per row.
    pub residuals: Vec<f64>,
    /// Coefficient of determination `1 − SSE/SST` about the mean of y. Meaningful when the
    /// design has a constant column. When y is constant (SST = 0) it is 1 for an exact fit
    /// and 0 otherwise.
    pub r_squared: f64,
    /// Residual standard deviation `sqrt(SSE/(n − p))`.
    pub sigma: f64,
    /// Number of observations.
    pub n: usize,
}

/// Solve `min ‖y − X·c‖₂` for a design matrix given as rows.
///
/// # Errors
/// `Shape`, `NonFinite`, `TooFewRows` (n ≤ p) or `RankDeficient` (see [`RANK_TOL`]).
pub fn least_squares(rows: &[Vec<f64>], y: &[f64]) -> Result<Fit, LsqError> {
    let n = rows.len();
    let p = rows.first().map_or(0, Vec::len);
    if p == 0 || y.len() != n || rows.iter().any(|r| r.len() != p) {
        return Err(LsqError::Shape);
    }
    if n <= p {
        return Err(LsqError::TooFewRows { n, p });
    }
    if y.iter()
        .chain(rows.iter().flatten())
        .any(|v| !v.is_finite())
    {
        return Err(LsqError::NonFinite);
    }

    // Column-major copy, each column scaled by its largest magnitude.
    let mut a: Vec<Vec<f64>> = (0..p)
        .map(|j| rows.iter().map(|r| r[j]).collect())
        .collect();
    let mut scale = vec![1.0; p];
    for (j, col) in a.iter_mut().enumerate() {
        let m = col.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
        if m == 0.0 {
            return Err(LsqError::RankDeficient { column: j });
        }
        scale[j] = m;
        col.iter_mut().for_each(|v| *v /= m);
    }
    let mut b = y.to_vec();

    // Householder QR: after step k, column k holds R[k][k] at row k and zeros below it; the
    // same reflections applied to b give Qᵀy.
    let mut diag = vec![0.0; p];
    for k in 0..p {
        let norm = a[k][k..].iter().map(|v| v * v).sum::<f64>().sqrt();
        if norm == 0.0 {
            return Err(LsqError::RankDeficient { column: k });
        }
        let alpha = if a[k][k] > 0.0 { -norm } else { norm };
        let mut v: Vec<f64> = a[k][k..].to_vec();
        v[0] -= alpha;
        let vv: f64 = v.iter().map(|x| x * x).sum();
        diag[k] = alpha;
        let (left, right) = a.split_at_mut(k + 1);
        left[k][k] = alpha;
        left[k][k + 1..].iter_mut().for_each(|x| *x = 0.0);
        if vv == 0.0 {
            continue;
        }
        for col in right
            .iter_mut()
            .map(|c| &mut c[k..])
            .chain(std::iter::once(&mut b[k..]))
        {
            let f = 2.0 * v.iter().zip(col.iter()).map(|(a, b)| a * b).sum::<f64>() / vv;
            col.iter_mut().zip(&v).for_each(|(c, vi)| *c -= f * vi);
        }
    }
    let largest = diag.iter().fold(0.0_f64, |m, d| m.max(d.abs()));
    if let Some(column) = diag.iter().position(|d| d.abs() < RANK_TOL * largest) {
        return Err(LsqError::RankDeficient { column });
    }

    // Back substitution R·c' = (Qᵀy)[..p], then undo the column scaling.
    let mut c = vec![0.0; p];
    for k in (0..p).rev() {
        let s: f64 = (k + 1..p).map(|j| a[j][k] * c[j]).sum();
        c[k] = (b[k] - s) / a[k][k];
    }
    c.iter_mut().zip(&scale).for_each(|(ci, s)| *ci /= s);

    // Residuals from the original data, not from Qᵀy, so they are exactly y − X·c.
    let residuals: Vec<f64> = rows
        .iter()
        .zip(y)
        .map(|(r, yi)| yi - r.iter().zip(&c).map(|(x, ci)| x * ci).sum::<f64>())
        .collect();
    let sse: f64 = residuals.iter().map(|r| r * r).sum();
    let mean = y.iter().sum::<f64>() / n as f64;
    let sst: f64 = y.iter().map(|v| (v - mean) * (v - mean)).sum();
    let r_squared = if sst > 0.0 {
        1.0 - sse / sst
    } else if sse == 0.0 {
        1.0
    } else {
        0.0
    };
    Ok(Fit {
        coefficients: c,
        residuals,
        r_squared,
        sigma: (sse / (n - p) as f64).sqrt(),
        n,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn simple_regression_matches_closed_form() {
        // Closed form for y = a + b·x: b = Sxy/Sxx, a = ȳ − b·x̄ (any statistics text).
        let x = [0.0, 1.0, 2.0, 3.0, 4.5, 7.0];
        let y = [1.1, 2.9, 5.2, 6.8, 10.1, 14.9];
        let n = x.len() as f64;
        let (mx, my) = (x.iter().sum::<f64>() / n, y.iter().sum::<f64>() / n);
        let sxy: f64 = x.iter().zip(&y).map(|(a, b)| (a - mx) * (b - my)).sum();
        let sxx: f64 = x.iter().map(|a| (a - mx) * (a - mx)).sum();
        let syy: f64 = y.iter().map(|b| (b - my) * (b - my)).sum();
        let b = sxy / sxx;
        let a = my - b * mx;
        let rows: Vec<Vec<f64>> = x.iter().map(|&xi| vec![1.0, xi]).collect();
        let fit = least_squares(&rows, &y).expect("well posed");
        assert!((fit.coefficients[0] - a).abs() < 1e-12);
        assert!((fit.coefficients[1] - b).abs() < 1e-12);
        // For simple regression R² = Sxy²/(Sxx·Syy).
        assert!((fit.r_squared - sxy * sxy / (sxx * syy)).abs() < 1e-12);
        let sse: f64 = x
            .iter()
            .zip(&y)
            .map(|(xi, yi)| (yi - a - b * xi).powi(2))
            .sum();
        assert!((fit.sigma - (sse / (n - 2.0)).sqrt()).abs() < 1e-12);
        assert_eq!(fit.n, 6);
        for (i, r) in fit.residuals.iter().enumerate() {
            assert!((r - (y[i] - a - b * x[i])).abs() < 1e-12);
        }
    }

    #[test]
    fn exact_cubic_is_recovered_with_badly_scaled_columns() {
        // Time in milliseconds since the epoch next to a constant: column scales 1 and ~1e12.
        let t0 = 1.7e12;
        let coef = [2.5, -3e-9, 4e-18];
        let rows: Vec<Vec<f64>> = (0..40)
            .map(|i| {
                let t = t0 + i as f64 * 3.6e6;
                vec![1.0, t - t0, (t - t0) * (t - t0)]
            })
            .collect();
        let y: Vec<f64> = rows
            .iter()
            .map(|r| r.iter().zip(&coef).map(|(x, c)| x * c).sum())
            .collect();
        let fit = least_squares(&rows, &y).expect("well posed after scaling");
        for (got, want) in fit.coefficients.iter().zip(&coef) {
            assert!(((got - want) / want).abs() < 1e-9, "{got} vs {want}");
        }
        assert!(fit.sigma < 1e-12);
        assert!((fit.r_squared - 1.0).abs() < 1e-12);
    }

    #[test]
    fn dependent_columns_are_rank_deficient() {
        // Third column = 2·first − second.
        let rows: Vec<Vec<f64>> = (0..10)
            .map(|i| {
                let x = i as f64;
                vec![1.0, x, 2.0 - x]
            })
            .collect();
        let y: Vec<f64> = (0..10).map(|i| i as f64 * 0.5).collect();
        assert_eq!(
            least_squares(&rows, &y),
            Err(LsqError::RankDeficient { column: 2 })
        );
        let zero_col: Vec<Vec<f64>> = (0..5).map(|i| vec![1.0, 0.0, i as f64]).collect();
        assert_eq!(
            least_squares(&zero_col, &[1.0; 5]),
            Err(LsqError::RankDeficient { column: 1 })
        );
    }

    #[test]
    fn shape_count_and_finiteness_are_checked() {
        let rows = vec![vec![1.0, 0.0], vec![1.0, 1.0]];
        assert_eq!(
            least_squares(&rows, &[0.0, 1.0]),
            Err(LsqError::TooFewRows { n: 2, p: 2 })
        );
        assert_eq!(least_squares(&rows, &[0.0]), Err(LsqError::Shape));
        assert_eq!(
            least_squares(&[vec![1.0], vec![1.0, 2.0]], &[0.0, 1.0]),
            Err(LsqError::Shape)
        );
        let rows3 = vec![vec![1.0, 0.0], vec![1.0, 1.0], vec![1.0, f64::NAN]];
        assert_eq!(
            least_squares(&rows3, &[0.0, 1.0, 2.0]),
            Err(LsqError::NonFinite)
        );
    }

    #[test]
    fn constant_y_has_r_squared_one_when_fitted() {
        let rows: Vec<Vec<f64>> = (0..4).map(|i| vec![1.0, i as f64]).collect();
        let fit = least_squares(&rows, &[3.0; 4]).expect("well posed");
        assert_eq!(fit.r_squared, 1.0);
        assert!(fit.coefficients[1].abs() < 1e-15);
    }
}
