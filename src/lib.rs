//! dipwatch: plan ground-based follow-up of transiting exoplanets.
//!
//! Data flows one way, and the folders follow it: [`inputs`] (sites, targets, observed times) -> [`ephemeris`]
//! (epochs, sigma) -> [`astro`] (time scales, BJD_TDB -> UTC, civil time; the Sun, the Moon and the target at a
//! site) -> [`engine`] (nights, observable blocks, verdicts and reasons; schedules; ephemeris refinement) ->
//! [`outputs`] (tables, CSV, JSON, calendars, charts). The library only computes; files, the clock and the
//! terminal belong to the binary.

#![warn(clippy::too_many_lines, missing_docs)]

pub mod astro;
pub mod constants;
pub mod engine;
pub mod ephemeris;
pub mod inputs;
pub mod orbit;
pub mod outputs;
pub mod testing;
