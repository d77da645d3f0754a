//! All integration tests, one binary grouped by topic.

mod bound;
mod budget_units;
mod cautions;
mod common;
mod corpus;
mod design;
mod draw;
mod environment;
mod errors;
mod exact_reference;
mod extremes;
mod first_use;
mod fuzzing;
mod invariants;
mod library_api;
mod plots;
mod precision;
mod published;
mod reference;
mod regimes;
mod report_html;
mod resume;
mod safe_files;
mod sensitivity;
mod steady_numerics;
mod uncertainty;
