//! Reporting: figures of merit, the JSON audit trail, the terminal summary and the plots.
//!
//! Takes the per-burst results of the analysis and gives the report document
//! (schema `iqaudit.report/4`), the terminal summary and the plots.

pub mod annotations;
pub mod capture_plots;
pub mod compare;
pub mod json_schema;
pub mod metrics;
pub mod plots;
pub mod provenance;
pub mod schema;
pub mod svg;
pub mod text;
