//! Reports: the text report, the JSON object, the response CSV, and atomic file writes.
//! Each format has its own submodule; they share the cursor readings defined here.

pub mod bundle;
mod csv_out;
pub mod figures;
pub mod files;
pub mod finite;
mod fitting;
pub mod html;
mod json;
pub mod markup;
pub mod recovery;
pub mod sheet;
mod tables;
mod text;
pub mod words;

pub use bundle::{BundleOptions, write_assess_bundle, write_bundle, write_bundle_with};
pub use csv_out::{LOG_POINTS, log_times, response_rows, write_response_csv};
pub use files::write_atomic;
pub use html::{assess_html, plan_html};
pub use json::{assess_json, assess_non_finite, plan_json, plan_non_finite};
pub use sheet::{generator_sheet, stimulus_csv};
pub use text::{assess_text, plan_text};
pub use words::with_unit;

pub use crate::estimate::Cursor;
