//! ergopath: harvesting power of Markov jump networks, the universal bound on what added
//! pathways can add to it, and designs that reach that bound.
//!
//! Data flows model -> steady -> bound -> design -> report; see DEVELOPERS.md for the map.
//! [`commands`] holds one entry point per CLI command, so the binary only parses flags; each
//! has a twin on a model in memory (`steady_on`, `bound_on`, `design_on`, ...), which is the
//! API for other callers (the Python package is built on it).
//!
//! The stages on their own, on a model built from text (no file is read or written):
//!
//! ```
//! use ergopath::model::{Model, PairSelection};
//! let text = r#"
//! [[state]]
//! name = "a"
//! [[state]]
//! name = "b"
//! energy = 1.0
//! [[state]]
//! name = "c"
//! [[transition]]
//! from = "a"
//! to = "b"
//! forward = 2.0
//! drive = 3.0
//! work = 1.5
//! [[transition]]
//! from = "b"
//! to = "c"
//! forward = 1.0
//! backward = 0.5
//! [[transition]]
//! from = "c"
//! to = "a"
//! forward = 1.0
//! drive = 0.0
//! "#;
//! let model = Model::parse(text, std::path::Path::new("ring.toml"))?;
//! let state = ergopath::steady::solve(&model.network, &Default::default())?;
//! let power = ergopath::steady::observe(&model.network, &state.probabilities).power;
//! let bound = ergopath::bound::solve(&model.network, &PairSelection::All, &Default::default())?;
//! assert!(bound.certified_upper >= bound.power && bound.power >= power);
//! # Ok::<(), ergopath::Error>(())
//! ```
//!
//! A whole command on that model, with a caller's stop flag (set here before the run, so the
//! search stops at once):
//!
//! ```
//! # let text = "[[state]]\nname = \"a\"\n[[state]]\nname = \"b\"\n[[transition]]\nfrom = \"a\"\nto = \"b\"\nforward = 2.0\ndrive = 3.0\nwork = 1.0\n";
//! use ergopath::commands::{self, DesignRequest, Format, SearchKnobs};
//! use ergopath::model::Model;
//! let model = Model::parse(text, std::path::Path::new("pair.toml"))?;
//! let json = commands::bound_on(&model, &commands::BoundRequest { target: 0.99, format: Format::Json, ..Default::default() })?;
//! assert!(json.contains("\"certified_upper\""));
//! let stop = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(true));
//! let knobs = SearchKnobs { control: ergopath::search::Control { stop: Some(stop), observer: None }, ..Default::default() };
//! let request = DesignRequest { knobs, format: Format::Json, ..Default::default() };
//! let budget = commands::BudgetFlags { rate_cap: Some("10/s".parse()?), ..Default::default() };
//! let stopped = commands::design_on(&model, None, &DesignRequest { budget, ..request });
//! assert_eq!(stopped.map_err(|e| e.exit_code()), Err(130));
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

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
pub mod solve_error;
pub mod steady;
pub mod uncertainty;
pub mod units;

pub use commands::Error;
