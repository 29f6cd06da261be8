// Fixed-seed random numbers for test and benchmark tables: the same text on every run and machine.

/**
 * Uniform deviates in [0, 1) from a 32-bit seed: mulberry32 (a small public-domain generator;
 * common practice for reproducible test data, not for science — the page's own numbers all come
 * from the wasm core's generator).
 */
export function uniforms(seed) {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/**
 * Standard normal deviates from a uniform source by the Box–Muller transform (Box & Muller 1958,
 * Ann. Math. Stat. 29, 610), one deviate per pair of uniforms; 1 − u keeps the logarithm finite.
 */
export function gaussians(uniform) {
  return () => Math.sqrt(-2 * Math.log(1 - uniform())) * Math.cos(2 * Math.PI * uniform());
}
