//! The astronomy and time core: pure functions, units in names, sources in doc comments.

pub mod atmosphere;
pub mod bands;
pub mod barycentric;
pub mod civil;
pub mod crossings;
pub mod frames;
pub mod sky;
pub mod tables;
pub mod time;
