//! Small shared pieces below every other layer: the names of the flags
//! that library messages mention ([`flag`]), numbers as text ([`format`](mod@format)),
//! hashing of inputs ([`hash`]), text made safe for terminals, XML and
//! spreadsheets ([`text`]), many short texts in one allocation
//! ([`texts`]), the seeded random-number generator of the simulations and
//! permutations ([`rng`]) and work over a table's rows in fixed pieces on
//! every core ([`pieces`]).

pub mod flag;
pub mod format;
pub mod hash;
pub mod listing;
pub mod pieces;
pub mod rng;
pub mod rows;
pub mod text;
pub mod texts;
