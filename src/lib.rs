//! plumbline: a benchmark harness for probability-calibration methods.
//!
//! The modules follow the data flow: `suite` (TOML → validated plan) →
//! `data` (score files, open datasets) → `models` (base classifiers) → `split`
//! (seeds and draws) → `calibrate` (methods) → `metrics` → `run` (parallel
//! executor) → `stats` (paired intervals, across-task tests, thresholds) →
//! `report` (tables and figures). `commands` holds the subcommands, one
//! file each, above everything else. `multiclass` holds multiclass metrics
//! and calibration maps as a library only, not yet used by the commands.

pub mod analysis;
pub mod atomic;
pub mod calibrate;
pub mod commands;
pub mod data;
pub mod limits;
pub mod mapfile;
pub mod metrics;
pub mod models;
pub mod multiclass;
pub mod report;
pub mod results;
pub mod run;
pub mod scale;
pub mod simulate;
pub mod split;
pub mod stats;
pub mod suite;
