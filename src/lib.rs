//! kinflux: direct simulation Monte Carlo (DSMC) of rarefied gas flow through small apertures.
//!
//! The engine is a library; the `kinflux` binary is a thin command-line layer over it.
//! Modules are named after the physical stage they own, so a reader finds "where molecules hit
//! walls" (`mover`), "where molecules enter" (`reservoir`), "where the flow rate is measured"
//! (`flux`) from the file names alone. Data flow of one run:
//!
//! ```text
//! case.toml --case::load--> Case --numerics::plan--> Plan (domain, weights, time step)
//!   loop (simulation::Simulation::step): inject -> move -> reweight -> tally flux -> monitor
//!   --> summary::Summary (summary.json)
//! ```

pub mod analytic;
pub mod beam;
pub mod bench;
pub mod case;
pub mod checkpoint;
pub mod collide;
pub mod constants;
pub mod crew;
pub mod ensemble;
pub mod error;
pub mod field_output;
pub mod flux;
pub mod gas;
pub mod geometry;
pub mod grid;
pub mod maxwell;
pub mod monitor;
pub mod mover;
pub mod numerics;
pub mod output;
pub mod particles;
pub mod plots;
pub mod reservoir;
pub mod runner;
pub mod sample;
pub mod simulation;
pub mod sizing;
pub mod streams;
pub mod summary;
pub mod sweep;
pub mod units;
pub mod weights;

pub use error::{Error, Result};
