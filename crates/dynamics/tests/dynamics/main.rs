//! Tests of spindrift-dynamics, one module per source file. Physics checks are meant for
//! `cargo test --release`.

mod colouring;
mod common;
mod determinism;
mod heun;
mod initial;
mod metropolis;
mod relax;
mod spin_waves;
