//! The integration tests, in one binary: each file here was its own test crate,
//! and every crate linked the whole library and its dependencies again, which
//! was most of `cargo test`'s time on this machine. Run one file's tests with
//! `cargo test --test it screens::` (the module path is the file's name).
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

mod common;

mod bad_input;
mod balance;
mod crash_rounds;
mod demo_plant;
mod faraday_end_to_end;
mod forecast_upgrade;
mod import_paths;
mod learn;
mod log_undo_check;
mod parsers_fuzz;
mod plan;
mod plan_curve;
mod plan_decisions;
mod report;
mod report_browser;
mod restore_backup;
mod screens;
mod store_curve;
mod terminal;
mod timeline;
mod tmux_end_to_end;
