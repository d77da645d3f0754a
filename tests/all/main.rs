//! All integration tests, one binary grouped by topic.

mod bound;
mod common;
mod design;
mod environment;
mod errors;
mod published;
mod reference;
mod regimes;
mod steady_numerics;
