//! ergopath: harvesting power of Markov jump networks, the universal bound on what added
//! pathways can add to it, and designs that reach that bound.
//!
//! Data flows model -> steady -> bound -> design -> report; see DEVELOPERS.md for the map.
//! [`commands`] holds one entry point per CLI command, so the binary only parses flags.

pub mod bench;
pub mod bound;
pub mod commands;
pub mod fluctuation;
pub mod fuzzing;
pub mod linalg;
pub mod model;
pub mod numeric;
pub mod progress;
#[cfg(feature = "python")]
mod python;
pub mod report;
pub mod rng;
pub mod search;
pub mod sensitivity;
pub mod steady;
pub mod units;

pub use commands::Error;
