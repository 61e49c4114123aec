//! # stepgauge-cli
//!
//! The parts of stepgauge that are not the embeddable library (`crates/stepgauge`): the
//! verification suite ([`verification`]) and the convergence studies on the reference problems
//! ([`study`]) that it and `stepgauge compare` are built on. The `stepgauge` binary of this package
//! is the command line, the HTML report and the figures.
//!
//! The committed reference data under `tests/data/` is compiled into this crate (the verification
//! suite's tables), never into the library.

#![deny(missing_docs)]
#![warn(clippy::float_cmp)]
#![cfg_attr(test, allow(clippy::float_cmp))]
#![allow(clippy::needless_range_loop)]

pub mod problems;
pub mod study;
pub mod verification;

/// The README's example is compiled and run as a doctest.
#[cfg(doctest)]
#[doc = include_str!("../README.md")]
struct ReadmeExample;
