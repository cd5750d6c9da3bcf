//! Errors of the theory module.

/// Why an expectation could not be computed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum TheoryError {
    /// The sample size is too small (or too large) for the quantity asked.
    #[error("sample size {n} is outside the allowed range {allowed}")]
    SampleSize {
        /// The sample size given.
        n: u32,
        /// The allowed range, in words.
        allowed: &'static str,
    },
    /// A real parameter is NaN, infinite, or out of range.
    #[error("{name} = {value} is outside the allowed range {allowed}")]
    Parameter {
        /// Name of the parameter.
        name: &'static str,
        /// The offending value.
        value: f64,
        /// The allowed range, in words.
        allowed: &'static str,
    },
    /// A migration matrix that is not square, has the wrong size, or whose rows are not
    /// probability vectors.
    #[error("bad migration matrix: {reason}")]
    MigrationMatrix {
        /// What is wrong, in words.
        reason: &'static str,
    },
    /// The linear system has no unique solution (for example, lineages that can never meet).
    #[error("the linear system is singular: some expected time is infinite or undefined")]
    Singular,
    /// The look-back law must have bounded support no longer than `limit`.
    #[error("the look-back law must be bounded by {limit} generations (max look-back: {max:?})")]
    LookBack {
        /// The law's maximal look-back, `None` when unbounded.
        max: Option<u64>,
        /// The largest supported value.
        limit: u64,
    },
    /// The quantity needs E\[R] < infinity.
    #[error("the look-back law has an infinite mean")]
    InfiniteMean,
    /// The quantity needs a law that does not depend on time.
    #[error("the look-back law depends on time")]
    TimeDependent,
}

/// Checks that `value` is finite and satisfies `ok`.
pub(crate) fn check(
    name: &'static str,
    value: f64,
    allowed: &'static str,
    ok: impl Fn(f64) -> bool,
) -> Result<f64, TheoryError> {
    if value.is_finite() && ok(value) { Ok(value) } else { Err(TheoryError::Parameter { name, value, allowed }) }
}
