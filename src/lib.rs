//! pulseplan: plan the finite pulse that stands in for an impulse when measuring or simulating the
//! impulse response of a linear circuit, and predict exactly how far its response departs from h(t).
//!
//! Flow, one way: [`scenario`] (TOML) → [`network`] (modes) → [`plan`] (pulse) →
//! [`response`] / [`estimate`] (exact responses and errors) → [`report`] (text, JSON, CSV).

pub mod bench;
pub mod cli;
pub mod estimate;
pub mod measure;
pub mod netlist;
pub mod network;
pub mod plan;
pub mod pulse;
pub mod recover_cli;
pub mod report;
pub mod response;
pub mod scenario;
pub mod tolerance;
pub mod units;
