//! Placeholder for the Dop853 cross-check path.
