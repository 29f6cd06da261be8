#!/usr/bin/env bash
# Build the wasm adapter (crates/eccaudit-web) and generate its JS glue in www/pkg.
#
#   scripts/build-wasm.sh
#
# wasm builds use their own target directory (target/wasm) because the
# fallback toolchain is a different rustc from the native one.
set -euo pipefail
cd "$(dirname "$0")/.."
[[ -f target/wasm-env.sh ]] || bash scripts/setup.sh
(
  # shellcheck disable=SC1091
  . target/wasm-env.sh
  export CARGO_TARGET_DIR=target/wasm
  # shellcheck disable=SC2086
  "$WASM_CARGO" build --quiet --release --target wasm32-unknown-unknown -p eccaudit-web $WASM_BUILD_STD
  wasm-bindgen --target web --no-typescript --out-dir www/pkg \
    target/wasm/wasm32-unknown-unknown/release/eccaudit_web.wasm
)
printf '[build-wasm] www/pkg/eccaudit_web_bg.wasm: %s bytes\n' "$(wc -c < www/pkg/eccaudit_web_bg.wasm)" >&2
