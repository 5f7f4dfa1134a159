//! The engine: what can be observed and when (`plan`, `almanac`), what to observe when events collide
//! (`schedule`), and ephemerides refined from observed times (`refine`). Pure computation on the inputs and the sky.

pub mod almanac;
pub mod noise;
pub mod plan;
pub mod refine;
pub mod schedule;
pub mod tonight;
pub mod track;
