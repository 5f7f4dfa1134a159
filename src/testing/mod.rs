//! Support for tests and benchmarks, not for users: a deterministic invented catalogue. (The brute-force
//! 1-minute planner that checks the engine lives beside it in `engine::plan`.)

pub mod synthetic;
