//! Recovering h(t) from a capture: read the record, condition it, fit its modes, remove the
//! pulse, compare with the model.

pub mod capture;
pub mod deconvolve;
pub mod error;
pub mod layout;
pub mod pencil;
pub mod stats;
pub mod varpro;
