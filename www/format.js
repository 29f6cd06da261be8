// eccaudit page: how numbers are shown, one home each. Every number comes from the wasm core;
// this only turns it into text ("–" where there is none).

/** `value` to `digits` decimals, or "–" when it is absent or not finite. */
export function fixed(value, digits = 2) {
  if (value === null || value === undefined) return "–";
  const number = Number(value);
  return Number.isFinite(number) ? number.toFixed(digits) : "–";
}

/**
 * `value ± error`. With `digits`, both to that many decimals. Without, the error to two
 * significant digits and the value to match (common practice), or the value alone to
 * `fallbackDigits` when there is no positive finite error; "–" when there is no value.
 */
export function withError(value, error, { digits, fallbackDigits = 2 } = {}) {
  if (digits !== undefined) return `${fixed(value, digits)} ± ${fixed(error, digits)}`;
  if (value === null || value === undefined) return "–";
  if (error === null || error === undefined || !Number.isFinite(error) || error <= 0) {
    return fixed(value, fallbackDigits);
  }
  const places = Math.min(8, Math.max(0, 1 - Math.floor(Math.log10(error))));
  return `${value.toFixed(places)} ± ${error.toFixed(places)}`;
}

/** `value` to `significant` significant digits, or "–" when it is absent or not finite. */
export function significant(value, digits) {
  if (value === null || value === undefined || !Number.isFinite(value)) return "–";
  return value.toPrecision(digits);
}

/**
 * A grid value as typed (0.15, not 0.15000000000000002): twelve significant digits, as the
 * core's `format::grid_value`.
 */
export const gridValue = (v) => (Number.isFinite(v) ? String(Number(v.toPrecision(12))) : "–");

/** A rate with its standard error in percent ("12.5% ± 1.3"), or "–". */
export const rate = (r) => (r ? `${(100 * r.value).toFixed(1)}% ± ${(100 * r.standard_error).toFixed(1)}` : "–");

/** Seconds as text for a time left: "42 s" or "3 min 5 s"; "…" when not known. */
export function duration(seconds) {
  if (!Number.isFinite(seconds)) return "…";
  if (seconds < 60) return `${Math.ceil(seconds)} s`;
  return `${Math.floor(seconds / 60)} min ${Math.round(seconds % 60)} s`;
}

/** Seconds as a clock: "m:ss", or "h h mm min" from an hour on; "–" when not known. */
export function clockText(seconds) {
  if (!Number.isFinite(seconds)) return "–";
  const s = Math.max(0, Math.round(seconds));
  const m = Math.floor(s / 60);
  return m >= 60 ? `${Math.floor(m / 60)} h ${String(m % 60).padStart(2, "0")} min` : `${m}:${String(s % 60).padStart(2, "0")}`;
}
