//! The Kepler benchmark loop, exported so JavaScript can time it (the core reads no clock).

use eccaudit_core::kepler;
use wasm_bindgen::prelude::*;

/// A fixed set of (M, e) pairs from `kepler::benchmark_inputs`, solved on demand.
#[wasm_bindgen]
pub struct KeplerBench {
    inputs: Vec<(f64, f64)>,
}

#[wasm_bindgen]
impl KeplerBench {
    /// `n` pairs with M uniform in [0, 2π) and e uniform in [0, 0.99], from `seed`.
    #[wasm_bindgen(constructor)]
    pub fn new(n: usize, seed: u64) -> KeplerBench {
        KeplerBench {
            inputs: kepler::benchmark_inputs(n, seed),
        }
    }

    /// Solve every pair once; returns the checksum `kepler::solve_all` gives natively.
    #[wasm_bindgen(js_name = solveAll)]
    pub fn solve_all(&self) -> f64 {
        kepler::solve_all(&self.inputs)
    }
}
