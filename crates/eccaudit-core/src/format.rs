//! Numbers as a person typed them: grid values and other short decimals without the float
//! noise of their arithmetic (0.15, not 0.15000000000000002), shared by the statement, the
//! summaries, the figures and the page.

/// A grid value (an injected e, K, a step) in the shortest decimal that survives rounding to
/// twelve significant digits: `0.15000000000000002` → `0.15`, `0.6` → `0.6`, `2` → `2`,
/// `-0` → `0`. Non-finite values print as Rust prints them.
pub fn grid_value(value: f64) -> String {
    if !value.is_finite() {
        return value.to_string();
    }
    if value == 0.0 {
        return "0".to_string();
    }
    // Twelve significant digits in scientific form, parsed back: the nearest double to that
    // decimal prints (shortest round trip) as the decimal itself.
    let rounded: f64 = format!("{value:.11e}").parse().unwrap_or(value);
    rounded.to_string()
}

/// A list of grid values, comma-separated ("0, 0.05, 0.1").
pub fn grid_list(values: &[f64]) -> String {
    values
        .iter()
        .map(|&v| grid_value(v))
        .collect::<Vec<_>>()
        .join(", ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn grid_values_print_as_typed() {
        assert_eq!(
            grid_value(3.0 * 0.05),
            "0.15000000000000002".replace("000000000000002", "")
        );
        assert_eq!(grid_value(0.1 + 0.2), "0.3");
        assert_eq!(grid_value(12.0 * 0.05), "0.6");
        assert_eq!(grid_value(2.0), "2");
        assert_eq!(grid_value(-0.0), "0");
        assert_eq!(grid_value(23.7), "23.7");
        assert_eq!(grid_value(1e-7), "0.0000001");
        assert_eq!(grid_value(f64::NAN), "NaN");
        assert_eq!(grid_list(&[0.0, 0.05 * 3.0, 0.45]), "0, 0.15, 0.45");
    }
}
