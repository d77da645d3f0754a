//! Sparse LU factorisation (faer) behind a small interface: factor once, solve many times.
//!
//! Owns the choice of factorisation parameters and the reuse of a symbolic analysis across
//! matrices of one sparsity pattern. Nothing here knows about networks.

use crate::steady::SolveError;
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
