//! Sparse symmetric matrices for the finite-element system: the compressed-row pattern of a
//! triangle mesh, assembly slots, fixed values (Dirichlet rows and columns), and a conjugate
//! gradient solver preconditioned by an incomplete Cholesky factor (Jacobi when that breaks
//! down).
//!
//! Owns: linear algebra only. Must not: know about heads, permeability or boundaries.

use thiserror::Error;

/// A square sparse matrix in compressed-row form with sorted columns in each row.
#[derive(Debug, Clone, PartialEq)]
pub struct Csr {
    /// Start of each row in `col`/`val`, plus the end.
    pub row_ptr: Vec<usize>,
    /// Column of each stored entry.
    pub col: Vec<usize>,
    /// Value of each stored entry.
    pub val: Vec<f64>,
    /// Position of the diagonal entry of each row.
    pub diag: Vec<usize>,
}

impl Csr {
    /// The pattern of a mesh of `n` nodes with `triangles` (all zero), and for each element the
    /// positions of its 3 × 3 entries (row-major).
    #[must_use]
    pub fn pattern(n: usize, triangles: &[[usize; 3]]) -> (Self, Vec<[usize; 9]>) {
        let mut adj: Vec<Vec<usize>> = (0..n).map(|i| vec![i]).collect();
        for t in triangles {
            for &a in t {
                for &b in t {
                    adj[a].push(b);
                }
            }
        }
        let mut row_ptr = Vec::with_capacity(n + 1);
        let mut col = Vec::new();
        row_ptr.push(0);
        for row in &mut adj {
            row.sort_unstable();
            row.dedup();
            col.extend_from_slice(row);
            row_ptr.push(col.len());
        }
        let find = |i: usize, j: usize, col: &[usize]| {
            row_ptr[i] + col[row_ptr[i]..row_ptr[i + 1]].partition_point(|&c| c < j)
        };
        let diag = (0..n).map(|i| find(i, i, &col)).collect();
        let slots = triangles
            .iter()
            .map(|t| {
                let mut s = [0; 9];
                for a in 0..3 {
                    for b in 0..3 {
                        s[3 * a + b] = find(t[a], t[b], &col);
                    }
                }
                s
            })
            .collect();
        let val = vec![0.0; col.len()];
        (
            Self {
                row_ptr,
                col,
                val,
                diag,
            },
            slots,
        )
    }

    /// Number of rows.
    #[must_use]
    pub fn n(&self) -> usize {
        self.diag.len()
    }

    /// `y = A·x`.
    pub fn mul(&self, x: &[f64], y: &mut [f64]) {
        for (i, yi) in y.iter_mut().enumerate() {
            let r = self.row_ptr[i]..self.row_ptr[i + 1];
            *yi = self.col[r.clone()]
                .iter()
                .zip(&self.val[r])
                .map(|(&j, &a)| a * x[j])
                .sum();
        }
    }

    /// Impose `x_i = value` for each `Some(value)` in `fixed`, keeping the matrix symmetric:
    /// the known values move to `rhs` and their rows and columns become identity rows scaled by
    /// the former diagonal.
    pub fn fix_values(&mut self, fixed: &[Option<f64>], rhs: &mut [f64]) {
        for i in 0..self.n() {
            let d = self.diag[i];
            if let Some(v) = fixed[i] {
                let a = self.val[d].abs().max(f64::MIN_POSITIVE);
                for k in self.row_ptr[i]..self.row_ptr[i + 1] {
                    self.val[k] = 0.0;
                }
                self.val[d] = a;
                rhs[i] = a * v;
            } else {
                for k in self.row_ptr[i]..self.row_ptr[i + 1] {
                    if let Some(v) = fixed[self.col[k]] {
                        rhs[i] -= self.val[k] * v;
                        self.val[k] = 0.0;
                    }
                }
            }
        }
    }
}

/// Why an iterative solve failed.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum SolveError {
    /// No convergence within the iteration limit.
    #[error("conjugate gradients did not converge in {iterations} iterations (relative residual {residual:e})")]
    NoConvergence {
        /// Iterations done.
        iterations: usize,
        /// Relative residual reached.
        residual: f64,
    },
    /// The matrix is not positive definite (a floating part of the domain with no fixed head).
    #[error("the system is singular: some part of the domain has no fixed head")]
    Singular,
}

/// Incomplete Cholesky factor with the pattern of the lower triangle, or a Jacobi diagonal when
/// the factorisation meets a non-positive pivot.
enum Precond {
    Ic { l: Vec<f64>, inv_diag: Vec<f64> },
    Jacobi(Vec<f64>),
}

impl Precond {
    fn new(a: &Csr) -> Self {
        let n = a.n();
        let mut l = a.val.clone();
        let mut inv_diag = vec![0.0; n];
        // IC(0), row by row over the lower triangle (columns < i, then the diagonal).
        let mut ok = true;
        'rows: for i in 0..n {
            let (s, d) = (a.row_ptr[i], a.diag[i]);
            for k in s..d {
                let j = a.col[k];
                // l_ij = (a_ij − Σ_{m<j} l_im·l_jm) / l_jj
                let mut sum = l[k];
                let (mut p, mut q) = (s, a.row_ptr[j]);
                while p < k && q < a.diag[j] {
                    match a.col[p].cmp(&a.col[q]) {
                        std::cmp::Ordering::Less => p += 1,
                        std::cmp::Ordering::Greater => q += 1,
                        std::cmp::Ordering::Equal => {
                            sum -= l[p] * l[q];
                            p += 1;
                            q += 1;
                        }
                    }
                }
                l[k] = sum * inv_diag[j];
            }
            let pivot = l[d] - l[s..d].iter().map(|v| v * v).sum::<f64>();
            if pivot.is_nan() || pivot <= 1e-14 * a.val[d].abs() {
                ok = false;
                break 'rows;
            }
            l[d] = pivot.sqrt();
            inv_diag[i] = 1.0 / l[d];
        }
        if ok {
            Self::Ic { l, inv_diag }
        } else {
            Self::Jacobi(
                a.diag
                    .iter()
                    .map(|&d| 1.0 / a.val[d].abs().max(f64::MIN_POSITIVE))
                    .collect(),
            )
        }
    }

    fn apply(&self, a: &Csr, r: &[f64], z: &mut [f64]) {
        match self {
            Self::Jacobi(inv) => z
                .iter_mut()
                .zip(r)
                .zip(inv)
                .for_each(|((z, r), d)| *z = r * d),
            Self::Ic { l, inv_diag } => {
                let n = a.n();
                // Forward: L·y = r.
                for i in 0..n {
                    let mut s = r[i];
                    for k in a.row_ptr[i]..a.diag[i] {
                        s -= l[k] * z[a.col[k]];
                    }
                    z[i] = s * inv_diag[i];
                }
                // Backward: Lᵀ·z = y (column-oriented over the rows of L).
                for i in (0..n).rev() {
                    z[i] *= inv_diag[i];
                    let zi = z[i];
                    for k in a.row_ptr[i]..a.diag[i] {
                        z[a.col[k]] -= l[k] * zi;
                    }
                }
            }
        }
    }
}

/// Solve `A·x = b` for symmetric positive definite `A` by preconditioned conjugate gradients,
/// starting from `x` (a warm start), to a relative residual `tol`. Returns the iterations.
///
/// # Errors
/// [`SolveError`] when it does not converge or meets a non-positive curvature.
pub fn pcg(a: &Csr, b: &[f64], x: &mut [f64], tol: f64) -> Result<usize, SolveError> {
    let n = a.n();
    let pre = Precond::new(a);
    let dot = |u: &[f64], v: &[f64]| u.iter().zip(v).map(|(a, b)| a * b).sum::<f64>();
    let bnorm = dot(b, b).sqrt().max(f64::MIN_POSITIVE);
    let mut r = vec![0.0; n];
    a.mul(x, &mut r);
    r.iter_mut().zip(b).for_each(|(r, b)| *r = b - *r);
    let mut z = vec![0.0; n];
    pre.apply(a, &r, &mut z);
    let mut p = z.clone();
    let mut rz = dot(&r, &z);
    let mut ap = vec![0.0; n];
    let max_it = 20 * n + 100;
    for it in 0..max_it {
        let res = dot(&r, &r).sqrt() / bnorm;
        if res <= tol {
            return Ok(it);
        }
        a.mul(&p, &mut ap);
        let pap = dot(&p, &ap);
        if pap.is_nan() || pap <= 0.0 {
            return Err(SolveError::Singular);
        }
        let alpha = rz / pap;
        x.iter_mut().zip(&p).for_each(|(x, p)| *x += alpha * p);
        r.iter_mut().zip(&ap).for_each(|(r, ap)| *r -= alpha * ap);
        pre.apply(a, &r, &mut z);
        let rz_new = dot(&r, &z);
        let beta = rz_new / rz;
        rz = rz_new;
        p.iter_mut().zip(&z).for_each(|(p, z)| *p = z + beta * *p);
    }
    Err(SolveError::NoConvergence {
        iterations: max_it,
        residual: dot(&r, &r).sqrt() / bnorm,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn solves_a_small_mesh_laplacian_with_fixed_ends() {
        // Two triangles of a unit square; the Laplacian with x fixed at 0 and 1.
        let tris = [[0, 1, 2], [0, 2, 3]];
        let (mut a, slots) = Csr::pattern(4, &tris);
        let k = [[1.0, -0.5, -0.5], [-0.5, 0.5, 0.0], [-0.5, 0.0, 0.5]];
        for (t, s) in tris.iter().zip(&slots) {
            let _ = t;
            for i in 0..3 {
                for j in 0..3 {
                    a.val[s[3 * i + j]] += k[i][j];
                }
            }
        }
        let fixed = [Some(0.0), Some(1.0), None, None];
        let mut b = vec![0.0; 4];
        a.fix_values(&fixed, &mut b);
        let mut x = vec![0.0; 4];
        pcg(&a, &b, &mut x, 1e-12).expect("converges");
        assert!((x[0]).abs() < 1e-12 && (x[1] - 1.0).abs() < 1e-12);
        assert!(x.iter().all(|v| v.is_finite()));
    }
}
