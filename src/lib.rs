//! dipwatch: plan ground-based follow-up of transiting exoplanets.
//!
//! Data flows one way: inputs (sites, targets) -> ephemeris (epochs, sigma) -> time (BJD_TDB -> UTC) -> sky
//! (Sun, Moon, target geometry at a site) -> verdicts (observable blocks, reasons) -> outputs.
//! The library only computes; files, the clock and the terminal belong to the binary.

pub mod almanac;
pub mod astro;
pub mod calendar;
pub mod chart;
pub mod civil;
pub mod constants;
pub mod ephemeris;
pub mod inputs;
pub mod names;
pub mod plan;
pub mod refine;
pub mod report;
pub mod schedule;
pub mod synthetic;
