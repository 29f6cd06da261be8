//! eccaudit-core: the science of eccaudit.
//!
//! Everything that decides a number lives here: the Kepler solver, the
//! radial-velocity model, the velocity-table reader. The crate performs no
//! file or network I/O, knows nothing of WebAssembly, starts no threads and
//! reads no clock, so the native command line and the browser page compute
//! identical bits from identical inputs.

pub mod audit;
pub mod constants;
pub mod fit;
pub mod format;
pub mod inject;
pub mod kepler;
pub mod limits;
pub mod lsq;
pub mod model;
pub mod orbit;
pub mod periodogram;
pub mod posterior;
pub mod priors;
pub mod random;
pub mod sampler;
pub mod spec;
pub mod table;
