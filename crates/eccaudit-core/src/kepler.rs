//! Kepler's equation.
