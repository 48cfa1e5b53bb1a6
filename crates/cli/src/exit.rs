//! Exit codes of the `spindrift` command, as INTERFACE.md documents them, and the error
//! type that carries one.

/// Done.
pub const OK: u8 = 0;
/// Bad input: config, flags or files.
pub const BAD_INPUT: u8 = 2;
/// Numerical failure: non-finite or diverging spins (the last good state is saved).
pub const NUMERICAL: u8 = 3;
/// Output failure: cannot write.
pub const OUTPUT: u8 = 4;
/// Stopped early on `--max-wall`, with a checkpoint written (BSD `EX_TEMPFAIL`).
pub const WALL_LIMIT: u8 = 75;
/// Stopped by SIGINT, with a checkpoint written (128 + 2).
pub const SIGINT: u8 = 130;
/// Stopped by SIGTERM, with a checkpoint written (128 + 15).
pub const SIGTERM: u8 = 143;

/// A failed command: the exit code and what to tell the user.
#[derive(Debug)]
pub struct Failure {
    /// Exit code.
    pub code: u8,
    /// The error.
    pub error: anyhow::Error,
}

/// Result of a subcommand: an exit code, or a failure with its own.
pub type Outcome = Result<u8, Failure>;

/// Bad input (exit 2).
pub fn bad_input(e: impl Into<anyhow::Error>) -> Failure {
    Failure { code: BAD_INPUT, error: e.into() }
}

/// Output failure (exit 4).
pub fn output(e: impl Into<anyhow::Error>) -> Failure {
    Failure { code: OUTPUT, error: e.into() }
}

/// Numerical failure (exit 3).
pub fn numerical(e: impl Into<anyhow::Error>) -> Failure {
    Failure { code: NUMERICAL, error: e.into() }
}
