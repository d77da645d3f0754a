//! Sparse LU factorisation (faer) behind a small interface: factor once, solve many times.
//!
//! Owns the choice of factorisation parameters and the reuse of a symbolic analysis across
//! matrices of one sparsity pattern. Nothing here knows about networks.

use crate::solve_error::SolveError;
use faer::dyn_stack::{MemBuffer, MemStack};
use faer::sparse::linalg::lu::{
    factorize_symbolic_lu, LuRef, LuSymbolicParams, NumericLu, SymbolicLu,
};
use faer::sparse::linalg::SupernodalThreshold;
use faer::sparse::{SparseColMat, Triplet};
use faer::{Conj, MatMut, Par};

/// faer picks the supernodal LU when its estimated flops per factor entry exceed this multiple
/// of its base ratio. Its default (1) chose supernodal for ring-plus-band generators and then
/// failed to allocate workspace at 10^5 states; forcing simplicial made expander-like matrices
/// 40x slower. Measured on 2 cores (`ergopath bench`): threshold 16 gives banded 10^5 states in
/// 0.76 s and random-chord 10^4 states in 2.6 s, the best of both (4: 0.89 s / 2.9 s; 64:
/// 0.73 s / 99 s).
const SUPERNODAL_THRESHOLD: SupernodalThreshold = SupernodalThreshold(16.0);

/// LU factors of a square sparse matrix.
pub struct SparseLu {
    symbolic: SymbolicLu<usize>,
    numeric: NumericLu<usize, f64>,
}

/// The symbolic analysis (fill-reducing ordering, elimination structure) of the last pattern
/// factored through it. Newton's method factors one pattern many times; the ordering is paid
/// for once and only the numeric factorisation is repeated.
#[derive(Default)]
pub struct SymbolicReuse {
    last: Option<(Vec<usize>, Vec<usize>, SymbolicLu<usize>)>,
    /// How many symbolic analyses were computed (for tests and benchmarks).
    pub analyses: usize,
}

impl SymbolicReuse {
    /// The analysis of `matrix`'s pattern: the kept one if the pattern is the same.
    fn analysis(
        &mut self,
        matrix: &SparseColMat<usize, f64>,
    ) -> Result<SymbolicLu<usize>, SolveError> {
        let pattern = matrix.symbolic();
        if let Some((columns, rows, symbolic)) = &self.last {
            if columns == pattern.col_ptr() && rows == pattern.row_idx() {
                return Ok(symbolic.clone());
            }
        }
        let params = LuSymbolicParams {
            supernodal_flop_ratio_threshold: SUPERNODAL_THRESHOLD,
            ..Default::default()
        };
        let symbolic = factorize_symbolic_lu(pattern, params).map_err(failed)?;
        self.analyses += 1;
        self.last = Some((
            pattern.col_ptr().to_vec(),
            pattern.row_idx().to_vec(),
            symbolic.clone(),
        ));
        Ok(symbolic)
    }
}

fn failed(e: impl std::fmt::Debug) -> SolveError {
    SolveError::Factorisation(format!("{e:?}"))
}

impl SparseLu {
    /// Factors the `n x n` matrix given by triplets (duplicates are summed).
    pub fn factor(n: usize, triplets: &[Triplet<usize, usize, f64>]) -> Result<Self, SolveError> {
        Self::factor_reusing(n, triplets, &mut SymbolicReuse::default())
    }

    /// [`SparseLu::factor`], taking the symbolic analysis from `reuse` when the pattern is
    /// the one factored last (and keeping this one's otherwise).
    pub fn factor_reusing(
        n: usize,
        triplets: &[Triplet<usize, usize, f64>],
        reuse: &mut SymbolicReuse,
    ) -> Result<Self, SolveError> {
        let matrix =
            SparseColMat::<usize, f64>::try_new_from_triplets(n, n, triplets).map_err(failed)?;
        let symbolic = reuse.analysis(&matrix)?;
        let mut numeric = NumericLu::new();
        let par = Par::Seq;
        let mut work = MemBuffer::try_new(
            symbolic.factorize_numeric_lu_scratch::<f64>(par, Default::default()),
        )
        .map_err(failed)?;
        symbolic
            .factorize_numeric_lu(
                &mut numeric,
                matrix.as_ref(),
                par,
                MemStack::new(&mut work),
                Default::default(),
            )
            .map_err(failed)?;
        Ok(Self { symbolic, numeric })
    }

    /// Overwrites `rhs` (n x k) with the solution of `A x = rhs`.
    pub fn solve_in_place(&self, rhs: MatMut<'_, f64>) {
        let par = Par::Seq;
        let mut work = MemBuffer::new(
            self.symbolic
                .solve_in_place_scratch::<f64>(rhs.ncols(), par),
        );
        LuRef::new_unchecked(&self.symbolic, &self.numeric).solve_in_place_with_conj(
            Conj::No,
            rhs,
            par,
            MemStack::new(&mut work),
        );
    }
}

impl SparseLu {
    /// Overwrites `rhs` (n x k) with the solution of `A^T x = rhs` (the same factors).
    pub fn solve_transpose_in_place(&self, rhs: MatMut<'_, f64>) {
        let par = Par::Seq;
        let mut work = MemBuffer::new(
            self.symbolic
                .solve_transpose_in_place_scratch::<f64>(rhs.ncols(), par),
        );
        LuRef::new_unchecked(&self.symbolic, &self.numeric).solve_transpose_in_place_with_conj(
            Conj::No,
            rhs,
            par,
            MemStack::new(&mut work),
        );
    }
}

/// A square sparse matrix in compressed rows, for matrix-vector products.
pub struct CompressedRows {
    start: Vec<usize>,
    columns: Vec<usize>,
    values: Vec<f64>,
}

impl CompressedRows {
    /// From `(row, column, value)` entries (repeated positions are kept and add up in products).
    pub fn new(n: usize, entries: &[(usize, usize, f64)]) -> Self {
        let mut start = vec![0; n + 1];
        for &(row, _, _) in entries {
            start[row + 1] += 1;
        }
        for i in 0..n {
            start[i + 1] += start[i];
        }
        let mut next = start.clone();
        let mut columns = vec![0; entries.len()];
        let mut values = vec![0.0; entries.len()];
        for &(row, column, value) in entries {
            columns[next[row]] = column;
            values[next[row]] = value;
            next[row] += 1;
        }
        Self {
            start,
            columns,
            values,
        }
    }

    /// `out = A x`.
    fn times(&self, x: &[f64], out: &mut [f64]) {
        for (row, o) in out.iter_mut().enumerate() {
            *o = (self.start[row]..self.start[row + 1])
                .map(|e| self.values[e] * x[self.columns[e]])
                .sum();
        }
    }
}

/// Conjugate gradients for `A x = b` with `A` symmetric positive definite and scaled to unit
/// diagonal (so Jacobi preconditioning is already applied). `None` unless the residual falls
/// below `tolerance * |b|` within `max_iterations`. Reference: Saad, *Iterative Methods for
/// Sparse Linear Systems* (2nd ed., 2003), algorithm 6.18.
pub fn conjugate_gradient(
    a: &CompressedRows,
    b: &[f64],
    tolerance: f64,
    max_iterations: usize,
) -> Option<Vec<f64>> {
    let dot = |x: &[f64], y: &[f64]| x.iter().zip(y).map(|(a, b)| a * b).sum::<f64>();
    let n = b.len();
    let mut x = vec![0.0; n];
    let mut r = b.to_vec();
    let mut direction = r.clone();
    let mut product = vec![0.0; n];
    let target = tolerance * dot(b, b).sqrt();
    let mut rr = dot(&r, &r);
    for _ in 0..max_iterations {
        if rr.sqrt() <= target {
            return Some(x);
        }
        a.times(&direction, &mut product);
        let curvature = dot(&direction, &product);
        if curvature.is_nan() || curvature <= 0.0 {
            return None; // not positive definite in finite precision
        }
        let step = rr / curvature;
        for i in 0..n {
            x[i] += step * direction[i];
            r[i] -= step * product[i];
        }
        let next = dot(&r, &r);
        let beta = next / rr;
        rr = next;
        for i in 0..n {
            direction[i] = r[i] + beta * direction[i];
        }
    }
    (rr.sqrt() <= target).then_some(x)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// CG against nalgebra's dense LU on a seeded symmetric, diagonally dominant matrix with
    /// unit diagonal.
    #[test]
    fn conjugate_gradient_matches_a_dense_solve() {
        let n = 60;
        let mut rng = crate::rng::SplitMix::new(5);
        let mut dense = nalgebra::DMatrix::<f64>::identity(n, n);
        for i in 0..n {
            for _ in 0..3 {
                let j = (rng.next_u64() % n as u64) as usize;
                if j != i {
                    let v = -0.3 * rng.uniform() / 3.0;
                    dense[(i, j)] += v;
                    dense[(j, i)] += v;
                }
            }
        }
        let entries: Vec<(usize, usize, f64)> = (0..n)
            .flat_map(|i| (0..n).map(move |j| (i, j)))
            .filter(|&(i, j)| dense[(i, j)] != 0.0)
            .map(|(i, j)| (i, j, dense[(i, j)]))
            .collect();
        let b: Vec<f64> = (0..n).map(|_| rng.uniform() - 0.5).collect();
        let x = conjugate_gradient(&CompressedRows::new(n, &entries), &b, 1e-13, 200).unwrap();
        let expected = dense.lu().solve(&nalgebra::DVector::from_vec(b)).unwrap();
        for i in 0..n {
            assert!(
                (x[i] - expected[i]).abs() < 1e-11,
                "{i}: {} vs {}",
                x[i],
                expected[i]
            );
        }
    }
}
