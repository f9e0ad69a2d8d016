//! Integration tests of kinflux, one binary with a module per topic. Each physics check names
//! its published source beside it.

mod util;

mod analytic;
mod case_errors;
mod checkpoint;
mod collisions;
mod couette;
mod fields;
mod free_molecular;
mod gas;
mod invariants;
mod maxwell;
mod slits;
mod slurm;
mod sweeps;
mod transition;
