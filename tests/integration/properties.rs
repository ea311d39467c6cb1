//! Property tests of invariances.
