//! Small shared pieces below every other layer: hashing of inputs and the
//! seeded random-number generator of the simulations and permutations.

pub mod flag;
pub mod format;
pub mod hash;
pub mod rng;
