//! Checks of the observers and estimators against definitions, textbook results and
//! published formulas. One module per source file of the crate.

mod charge;
mod common;
mod curie;
mod magnetization;
mod statistics;
