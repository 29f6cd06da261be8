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
pub mod lanes;
pub mod limits;
pub mod lsq;
pub mod model;
pub mod orbit;
pub mod periodogram;
pub mod population;
pub mod posterior;
pub mod priors;
pub mod random;
pub mod sampler;
pub mod spec;
pub mod stats;
pub mod survey;
pub mod table;
/// Simulated tables for the workspace's own tests (the unit tests, and the integration tests
/// through the `test-support` feature, enabled only from the CLI package's dev-dependencies).
#[cfg(any(test, feature = "test-support"))]
#[doc(hidden)]
pub mod test_support;

/// Text from an input (a table cell, a file name, a settings value) as an error message shows
/// it: control characters (a newline inside a quoted field, a CR, a NUL) escaped as `\n`,
/// `\r`, `\u{0}`, so that every error stays one line.
pub(crate) fn one_line(text: &str) -> String {
    text.chars()
        .flat_map(|c| {
            let escaped: Vec<char> = if c.is_control() {
                c.escape_default().collect()
            } else {
                vec![c]
            };
            escaped
        })
        .collect()
}

#[cfg(test)]
mod tests {
    #[test]
    fn one_line_escapes_control_characters_and_keeps_other_text() {
        assert_eq!(super::one_line("rv [km/s]"), "rv [km/s]");
        assert_eq!(super::one_line("err\n1.0\r\u{0}é"), "err\\n1.0\\r\\u{0}é");
    }
}
