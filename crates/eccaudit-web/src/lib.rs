//! eccaudit-web: the thin wasm-bindgen adapter between the page and eccaudit-core.
