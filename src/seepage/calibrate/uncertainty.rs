//! The standard errors of a least-squares fit from its final Jacobian: `cov = s²·(JᵀJ)⁻¹` with
//! `s² = SSE/(n − p)`, computed on the Jacobian with each column divided by its norm, so
//! parameters in different units (log10 factors, metres) neither spoil the singularity test
//! nor each other's errors. A parameter no residual depends on (a zero column: a dry boundary,
//! a zone no tip sees) is not determined by itself and leaves the others' errors alone; when the
//! remaining columns are dependent (only permeability ratios matter) none of them is determined.
//!
//! Owns the numerics only; the warnings' wording is the fit's.

/// A column whose norm is below this (residual units per parameter unit: metres per log10
/// unit, metres per metre) counts as zero: no residual depends on the parameter. A solve is
/// deterministic, so a parameter with no effect gives an exactly zero difference; this only
/// keeps rounding from counting as an effect.
pub const NO_EFFECT: f64 = 1e-9;

/// Pivots below this in the column-normalised `JᵀJ` (whose diagonal is 1) count as zero.
const SINGULAR: f64 = 1e-10;

/// What the final Jacobian says about the parameters.
#[derive(Debug, Clone, PartialEq)]
pub struct Uncertainty {
    /// Per parameter: its standard error, when determined.
    pub std_errors: Vec<Option<f64>>,
    /// Per parameter: no residual depends on it.
    pub no_effect: Vec<bool>,
    /// The parameters with an effect cannot be separated from each other.
    pub dependent: bool,
    /// Not more residuals than parameters: no residual variance to scale with.
    pub too_few: bool,
}

/// Standard errors from the Jacobian `jac` (rows: residuals) and the sum of squared residuals.
#[must_use]
pub fn uncertainty(jac: &[Vec<f64>], sse: f64) -> Uncertainty {
    let n = jac.len();
    let np = jac.first().map_or(0, Vec::len);
    let norms: Vec<f64> = (0..np)
        .map(|j| jac.iter().map(|r| r[j] * r[j]).sum::<f64>().sqrt())
        .collect();
    let no_effect: Vec<bool> = norms.iter().map(|d| *d < NO_EFFECT).collect();
    let used: Vec<usize> = (0..np).filter(|&j| !no_effect[j]).collect();
    let scaled: Vec<Vec<f64>> = used
        .iter()
        .map(|&a| {
            used.iter()
                .map(|&b| jac.iter().map(|r| r[a] * r[b]).sum::<f64>() / (norms[a] * norms[b]))
                .collect()
        })
        .collect();
    let inverse = invert(&scaled);
    let too_few = n <= np;
    let s2 = (!too_few).then(|| sse / (n - np) as f64);
    let mut std_errors = vec![None; np];
    if let (Some(inv), Some(s2)) = (&inverse, s2) {
        for (k, &j) in used.iter().enumerate() {
            std_errors[j] = Some((s2 * inv[k][k]).sqrt() / norms[j]);
        }
    }
    Uncertainty {
        std_errors,
        no_effect,
        dependent: inverse.is_none(),
        too_few,
    }
}

/// Inverse of a small symmetric positive definite matrix with unit diagonal by Gauss–Jordan;
/// `None` if singular (an empty matrix inverts to itself).
fn invert(a: &[Vec<f64>]) -> Option<Vec<Vec<f64>>> {
    let n = a.len();
    let mut m: Vec<Vec<f64>> = a
        .iter()
        .enumerate()
        .map(|(i, r)| {
            let mut row = r.clone();
            row.extend((0..n).map(|j| f64::from(u8::from(i == j))));
            row
        })
        .collect();
    for c in 0..n {
        let p = (c..n).max_by(|&x, &y| m[x][c].abs().total_cmp(&m[y][c].abs()))?;
        if m[p][c].abs() <= SINGULAR {
            return None;
        }
        m.swap(c, p);
        let d = m[c][c];
        m[c].iter_mut().for_each(|v| *v /= d);
        for r in 0..n {
            if r != c {
                let f = m[r][c];
                let row_c = m[c].clone();
                m[r].iter_mut().zip(&row_c).for_each(|(v, w)| *v -= f * w);
            }
        }
    }
    Some(m.into_iter().map(|r| r[n..].to_vec()).collect())
}

#[cfg(test)]
mod tests {
    //! Against hand-worked two-parameter cases.

    use super::*;

    /// A straight line y = a + b·x through four points: the textbook errors of ordinary least
    /// squares, SE(b) = s/√Sxx and SE(a) = s·√(1/n + x̄²/Sxx) (any regression text).
    #[test]
    fn a_straight_line_has_the_textbook_standard_errors() {
        let x = [0.0, 1.0, 2.0, 3.0];
        let jac: Vec<Vec<f64>> = x.iter().map(|&x| vec![1.0, x]).collect();
        let sse = 0.2;
        let u = uncertainty(&jac, sse);
        let s = (sse / 2.0_f64).sqrt();
        let (mean, sxx) = (1.5_f64, 5.0_f64);
        let b = s / sxx.sqrt();
        let a = s * (0.25 + mean * mean / sxx).sqrt();
        let got = u.std_errors;
        assert!((got[0].unwrap() - a).abs() < 1e-12 && (got[1].unwrap() - b).abs() < 1e-12);
        assert!(!u.dependent && !u.too_few);
    }

    #[test]
    fn a_column_in_other_units_gives_the_same_errors_rescaled() {
        let x = [0.0, 1.0, 2.0, 3.0];
        let plain: Vec<Vec<f64>> = x.iter().map(|&x| vec![1.0, x]).collect();
        let scaled: Vec<Vec<f64>> = x.iter().map(|&x| vec![1e-6, x * 1e4]).collect();
        let (p, s) = (uncertainty(&plain, 0.2), uncertainty(&scaled, 0.2));
        let rel =
            |a: Option<f64>, b: Option<f64>, f: f64| (a.unwrap() / (b.unwrap() * f) - 1.0).abs();
        assert!(rel(s.std_errors[0], p.std_errors[0], 1e6) < 1e-9);
        assert!(rel(s.std_errors[1], p.std_errors[1], 1e-4) < 1e-9);
    }

    #[test]
    fn a_parameter_without_effect_is_not_determined_and_leaves_the_other_alone() {
        let jac = vec![vec![1.0, 0.0], vec![2.0, 0.0], vec![3.0, 0.0]];
        let u = uncertainty(&jac, 0.5);
        assert_eq!(u.no_effect, vec![false, true]);
        assert_eq!(u.std_errors[1], None);
        let s = (0.5_f64 / 1.0).sqrt();
        assert!((u.std_errors[0].unwrap() - s / 14f64.sqrt()).abs() < 1e-12);
        assert!(!u.dependent);
    }

    #[test]
    fn dependent_columns_determine_none_of_them() {
        let jac = vec![vec![1.0, -1.0], vec![2.0, -2.0], vec![0.5, -0.5]];
        let u = uncertainty(&jac, 0.1);
        assert!(u.dependent);
        assert_eq!(u.std_errors, vec![None, None]);
    }

    #[test]
    fn as_many_parameters_as_residuals_has_no_errors() {
        let u = uncertainty(&[vec![1.0, 0.0], vec![0.0, 1.0]], 0.0);
        assert!(u.too_few && !u.dependent);
        assert_eq!(u.std_errors, vec![None, None]);
    }
}
