//! Command-line error handling.
