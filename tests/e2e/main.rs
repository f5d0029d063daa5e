//! The end-to-end, validation and property tests, in one test binary (one
//! link instead of one per file). Most drive the built `halfwire` binary;
//! each file's header names the published results it checks against.

mod common;

mod aloha;
mod arbitration;
mod bounds;
mod budget;
mod cli;
mod cli_run;
mod cosim;
mod csma;
mod electrical;
mod engine;
mod faults;
mod line_figures;
mod mutation;
mod pictures;
mod polling_queueing;
mod polling_timing;
mod properties;
mod regression;
mod shortcuts;
mod sweep;
mod tdma;
mod token;
mod trust;
mod uart;
