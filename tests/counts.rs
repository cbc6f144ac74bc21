//! Counts against published values, closed forms and brute force.
