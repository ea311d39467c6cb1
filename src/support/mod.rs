//! Small shared pieces below every other layer: the names of the flags
//! that library messages mention ([`flag`]), numbers as text ([`format`](mod@format)),
//! hashing of inputs ([`hash`]), text made safe for terminals, XML and
//! spreadsheets ([`text`]), many short texts in one allocation
//! ([`texts`]) and the seeded random-number generator of
//! the simulations and permutations ([`rng`]).

pub mod flag;
pub mod format;
pub mod hash;
pub mod rng;
pub mod text;
pub mod texts;
