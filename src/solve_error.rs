//! The error type of the numerical layer, shared by the linear algebra, the steady state and
//! the bound (its own module so that `linalg` and `steady` do not import each other).
//!
//! Owns only the type: what failed and why, in words a user can act on. It computes nothing.

/// Errors of the numerical layer.
#[derive(Debug, thiserror::Error)]
pub enum SolveError {
    #[error("the sparse factorisation failed: {0}")]
    Factorisation(String),
    #[error("the steady state could not be resolved: {0}")]
    Unresolved(String),
    #[error("the conic solver (Clarabel) did not solve the bound program: status {0}")]
    Conic(String),
    #[error("the bound could not be certified: {0}")]
    Uncertified(String),
    /// The bound program's round-off, not the optimisation, keeps the gap above the limit.
    #[error("the bound is not determined by double precision: {0}")]
    NotDetermined(String),
}
