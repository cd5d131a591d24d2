//! pulseplan: plan the finite pulse that stands in for an impulse when measuring or simulating the
//! impulse response of a linear circuit, and predict exactly how far its response departs from h(t).
//!
//! Modules in their import order, lowest first; a module names only modules above it in this
//! list ([`units`] and [`notice`] are shared by all):
//! [`units`] → [`notice`] → [`pulse`] → [`netlist`] → [`network`] → [`tolerance`] →
//! [`response`] → [`estimate`] → [`fisher`] (the modal fit's Cramér–Rao bounds) → [`plan`] →
//! [`bench`] → [`fitplan`] (planning for the fit reading) → [`measure`] (reading a test back)
//! → [`scenario`] (TOML into the settings types above) → [`pipeline`] (the stages in order) → [`report`] (text, HTML, JSON, CSV,
//! figures) → [`cli`].

pub mod units;

pub mod notice;

pub mod pulse;

pub mod netlist;

pub mod network;

pub mod tolerance;

pub mod response;

pub mod estimate;

pub mod fisher;

pub mod plan;

pub mod bench;

pub mod fitplan;

pub mod measure;

pub mod scenario;

pub mod pipeline;

pub mod report;

pub mod cli;
