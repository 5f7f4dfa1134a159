//! Support for tests and benchmarks, not for users: the brute-force 1-minute references the engine is checked
//! and timed against, and a deterministic invented catalogue.

pub mod oracle;
pub mod synthetic;
