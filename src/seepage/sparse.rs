//! Sparse symmetric matrices for the finite-element system: the compressed-row pattern of a
//! triangle mesh, assembly slots, fixed values (Dirichlet rows and columns), and the direct
//! solve: a sparse Cholesky factor from the `faer` crate with a fill-reducing ordering, the
//! symbolic analysis done once per pattern and the numeric factor redone when values change.
//!
//! Owns: linear algebra only. Must not: know about heads, permeability or boundaries.

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::cholesky::llt::factor::LltRegularization;
use faer::sparse::linalg::cholesky::{
    factorize_symbolic_cholesky, CholeskySymbolicParams, LltRef, SymbolicCholesky,
    SymmetricOrdering,
};
use faer::sparse::{SparseColMatRef, SymbolicSparseColMatRef};
use faer::{Conj, MatMut, Par, Side, Spec};
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

    /// Whether every node is joined through the pattern to a node with a fixed value: else a
    /// floating part leaves the system singular.
    ///
    /// # Errors
    /// [`SolveError::Singular`] when some node is not.
    pub fn check_anchored(&self, fixed: &[bool]) -> Result<(), SolveError> {
        let mut seen = fixed.to_vec();
        let mut stack: Vec<usize> = (0..self.n()).filter(|&i| fixed[i]).collect();
        while let Some(i) = stack.pop() {
            for &j in &self.col[self.row_ptr[i]..self.row_ptr[i + 1]] {
                if !seen[j] {
                    seen[j] = true;
                    stack.push(j);
                }
            }
        }
        if seen.iter().all(|s| *s) {
            Ok(())
        } else {
            Err(SolveError::Singular)
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

/// Why a linear solve failed.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum SolveError {
    /// The matrix is not positive definite (a floating part of the domain with no fixed head).
    #[error("the system is singular: some part of the domain has no fixed head")]
    Singular,
    /// The factorisation could not be set up (out of memory, an index overflow).
    #[error("sparse factorisation failed: {0}")]
    Factorisation(String),
    /// The residual stayed above the tolerance after iterative refinement.
    #[error("the linear solve reached a relative residual of {residual:e} only")]
    Inaccurate {
        /// Relative residual reached.
        residual: f64,
    },
}

/// A sparse Cholesky factor `A = L·Lᵀ` (faer's supernodal or simplicial factorisation) of a
/// matrix with a fixed pattern: the fill-reducing ordering (approximate minimum degree) and the
/// symbolic structure are computed once, then [`Cholesky::factor`] refactorises new values of
/// the same pattern (each outer iteration of the free surface changes values only).
pub struct Cholesky {
    symbolic: SymbolicCholesky<usize>,
    l: Vec<f64>,
    work: MemBuffer,
    factored: bool,
}

impl std::fmt::Debug for Cholesky {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Cholesky")
            .field("n", &self.symbolic.nrows())
            .field("factor_entries", &self.l.len())
            .finish_non_exhaustive()
    }
}

impl Cholesky {
    /// Ordering and symbolic analysis of the pattern of `a` (its lower triangle is read).
    ///
    /// # Errors
    /// [`SolveError::Factorisation`] when faer cannot allocate or index the factor.
    pub fn analyse(a: &Csr) -> Result<Self, SolveError> {
        let n = a.n();
        // The pattern is symmetric, so the compressed rows are also the compressed columns.
        let pattern = SymbolicSparseColMatRef::new_checked(n, n, &a.row_ptr, None, &a.col);
        let symbolic = factorize_symbolic_cholesky(
            pattern,
            Side::Lower,
            SymmetricOrdering::Amd,
            CholeskySymbolicParams::default(),
        )
        .map_err(|e| SolveError::Factorisation(format!("{e:?}")))?;
        let req = symbolic
            .factorize_numeric_llt_scratch::<f64>(Par::Seq, Spec::default())
            .or(symbolic.solve_in_place_scratch::<f64>(1, Par::Seq));
        let work =
            MemBuffer::try_new(req).map_err(|e| SolveError::Factorisation(format!("{e:?}")))?;
        let l = vec![0.0; symbolic.len_val()];
        Ok(Self {
            symbolic,
            l,
            work,
            factored: false,
        })
    }

    /// Stored entries of the factor `L` (its memory is 8 bytes each, plus the row indices of
    /// the symbolic structure).
    #[must_use]
    pub fn factor_entries(&self) -> usize {
        self.l.len()
    }

    /// Numeric factorisation of `a`, which must have the pattern given to
    /// [`Cholesky::analyse`].
    ///
    /// # Errors
    /// [`SolveError::Singular`] when `a` is not positive definite.
    pub fn factor(&mut self, a: &Csr) -> Result<(), SolveError> {
        let n = a.n();
        let pattern = SymbolicSparseColMatRef::new_checked(n, n, &a.row_ptr, None, &a.col);
        let mat = SparseColMatRef::new(pattern, &a.val);
        self.factored = false;
        self.symbolic
            .factorize_numeric_llt(
                &mut self.l,
                mat,
                Side::Lower,
                LltRegularization::default(),
                Par::Seq,
                MemStack::new(&mut self.work),
                Spec::default(),
            )
            .map_err(|_| SolveError::Singular)?;
        self.factored = true;
        Ok(())
    }

    /// Solve `A·x = b` with the factor of `a`, then refine `x` by the residual until its
    /// relative size is below `tol` (a step or two at most for these well-scaled systems).
    /// Returns the number of solves with the factor.
    ///
    /// # Errors
    /// [`SolveError::Inaccurate`] when refinement does not reach `tol`;
    /// [`SolveError::Singular`] when no factor is in place.
    pub fn solve(
        &mut self,
        a: &Csr,
        b: &[f64],
        x: &mut [f64],
        tol: f64,
    ) -> Result<usize, SolveError> {
        if !self.factored {
            return Err(SolveError::Singular);
        }
        let n = a.n();
        let norm = |v: &[f64]| v.iter().map(|x| x * x).sum::<f64>().sqrt();
        let bnorm = norm(b).max(f64::MIN_POSITIVE);
        x.copy_from_slice(b);
        self.apply(x);
        let mut r = vec![0.0; n];
        let mut residual = f64::INFINITY;
        for solves in 1..=4 {
            a.mul(x, &mut r);
            r.iter_mut().zip(b).for_each(|(r, b)| *r = b - *r);
            residual = norm(&r) / bnorm;
            if !residual.is_finite() {
                return Err(SolveError::Singular);
            }
            if residual <= tol {
                return Ok(solves);
            }
            self.apply(&mut r);
            x.iter_mut().zip(&r).for_each(|(x, d)| *x += d);
        }
        Err(SolveError::Inaccurate { residual })
    }

    /// `v ← A⁻¹·v` with the current factor.
    fn apply(&mut self, v: &mut [f64]) {
        let n = v.len();
        let rhs = MatMut::from_column_major_slice_mut(v, n, 1);
        LltRef::new(&self.symbolic, &self.l).solve_in_place_with_conj(
            Conj::No,
            rhs,
            Par::Seq,
            MemStack::new(&mut self.work),
        );
    }
}

/// Solve `A·x = b` once for symmetric positive definite `A` to a relative residual `tol`
/// (analysis, factorisation and solve; `x` need not hold a start).
///
/// # Errors
/// [`SolveError`] from the factorisation or the solve.
pub fn solve_spd(a: &Csr, b: &[f64], x: &mut [f64], tol: f64) -> Result<usize, SolveError> {
    let mut chol = Cholesky::analyse(a)?;
    chol.factor(a)?;
    chol.solve(a, b, x, tol)
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
        solve_spd(&a, &b, &mut x, 1e-12).expect("solves");
        assert!((x[0]).abs() < 1e-12 && (x[1] - 1.0).abs() < 1e-12);
        assert!(x.iter().all(|v| v.is_finite()));
    }

    /// A triangle's corner coordinates.
    type Corners = [(f64, f64); 3];

    /// A strip of `m` unit squares, each cut into two triangles; node `2i` at (i, 0) and `2i+1`
    /// at (i, 1). Returns the triangles and their coordinates.
    fn strip(m: usize) -> (Vec<[usize; 3]>, Vec<Corners>) {
        let mut tris = Vec::new();
        let mut xy = Vec::new();
        for i in 0..m {
            let x = i as f64;
            let (a, b, c, d) = (2 * i, 2 * i + 2, 2 * i + 3, 2 * i + 1);
            tris.push([a, b, c]);
            xy.push([(x, 0.0), (x + 1.0, 0.0), (x + 1.0, 1.0)]);
            tris.push([a, c, d]);
            xy.push([(x, 0.0), (x + 1.0, 1.0), (x, 1.0)]);
        }
        (tris, xy)
    }

    /// Conductance matrix of a linear triangle with isotropic `k`.
    fn laplace(p: [(f64, f64); 3], k: f64) -> [f64; 9] {
        let b = [p[1].1 - p[2].1, p[2].1 - p[0].1, p[0].1 - p[1].1];
        let c = [p[2].0 - p[1].0, p[0].0 - p[2].0, p[1].0 - p[0].0];
        let area = (b[1] * c[2] - b[2] * c[1]) / 2.0;
        let mut m = [0.0; 9];
        for i in 0..3 {
            for j in 0..3 {
                m[3 * i + j] = k * (b[i] * b[j] + c[i] * c[j]) / (4.0 * area);
            }
        }
        m
    }

    fn assemble(
        a: &mut Csr,
        slots: &[[usize; 9]],
        xy: &[[(f64, f64); 3]],
        k: impl Fn(usize) -> f64,
    ) {
        a.val.iter_mut().for_each(|v| *v = 0.0);
        for (e, s) in slots.iter().enumerate() {
            for (slot, v) in s.iter().zip(laplace(xy[e], k(e))) {
                a.val[*slot] += v;
            }
        }
    }

    #[test]
    fn refactorises_new_values_of_the_same_pattern() {
        let m = 8;
        let (tris, xy) = strip(m);
        let n = 2 * (m + 1);
        let (pattern, slots) = Csr::pattern(n, &tris);
        let fixed: Vec<Option<f64>> = (0..n)
            .map(|i| match i / 2 {
                0 => Some(0.0),
                j if j == m => Some(1.0),
                _ => None,
            })
            .collect();
        let mut chol = Cholesky::analyse(&pattern).expect("analysis");
        assert!(chol.factor_entries() >= n);
        // Uniform: the head is linear, x / m.
        let mut a = pattern.clone();
        assemble(&mut a, &slots, &xy, |_| 1.0);
        let mut b = vec![0.0; n];
        a.fix_values(&fixed, &mut b);
        chol.factor(&a).expect("factor");
        let mut x = vec![0.0; n];
        chol.solve(&a, &b, &mut x, 1e-13).expect("solve");
        for (i, h) in x.iter().enumerate() {
            assert!(
                (h - (i / 2) as f64 / m as f64).abs() < 1e-12,
                "node {i}: {h}"
            );
        }
        // The left half twice as permeable: in series, the head at the middle is 1/3.
        let mut a = pattern.clone();
        assemble(&mut a, &slots, &xy, |e| if e < m { 2.0 } else { 1.0 });
        let mut b = vec![0.0; n];
        a.fix_values(&fixed, &mut b);
        chol.factor(&a).expect("factor");
        chol.solve(&a, &b, &mut x, 1e-13).expect("solve");
        assert!((x[m] - 1.0 / 3.0).abs() < 1e-12 && (x[m + 1] - 1.0 / 3.0).abs() < 1e-12);
    }

    #[test]
    fn a_floating_part_is_singular() {
        // Two strips side by side with no element in common: the second has no fixed value.
        let (mut tris, _) = strip(3);
        let (other, _) = strip(2);
        tris.extend(other.iter().map(|t| t.map(|i| i + 8)));
        let (a, _) = Csr::pattern(14, &tris);
        let mut fixed = vec![false; 14];
        fixed[0] = true;
        assert_eq!(a.check_anchored(&fixed), Err(SolveError::Singular));
        fixed[13] = true;
        assert_eq!(a.check_anchored(&fixed), Ok(()));
    }

    #[test]
    fn a_negative_pivot_or_no_factor_is_singular() {
        let (tris, xy) = strip(3);
        let (mut a, slots) = Csr::pattern(8, &tris);
        let mut chol = Cholesky::analyse(&a).expect("analysis");
        let mut x = vec![0.0; 8];
        assert_eq!(
            chol.solve(&a, &[1.0; 8], &mut x, 1e-12),
            Err(SolveError::Singular)
        );
        assemble(&mut a, &slots, &xy, |_| -1.0);
        assert_eq!(chol.factor(&a), Err(SolveError::Singular));
    }
}
