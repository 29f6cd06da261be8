#!/usr/bin/env bash
# eccaudit's own set-up: installs what building and testing need, idempotently.
#
#   scripts/setup.sh [--no-browser]
#
# 1. a wasm32-unknown-unknown toolchain: the rustup target when it is
#    installed, otherwise Debian's rustc-web with std built from source
#    (scripts/setup-wasm.sh, the route of ../shared/toolchain);
# 2. wasm-bindgen-cli at exactly the version in Cargo.lock;
# 3. Debian's chromium + chromium-driver, and the browser-test driver
#    (playwright-core from npm, no browser download) under tests/browser;
# 4. Debian's slurmctld, slurmd, slurm-client and munge (as root), for the
#    Slurm job-array test.
#
# It writes target/wasm-env.sh; source it in a subshell before a wasm build.
set -euo pipefail
cd "$(dirname "$0")/.."

log() { printf '[setup] %s\n' "$*" >&2; }

# apt_ensure PACKAGE… and wasm_bindgen_version CARGO_LOCK.
. scripts/setup-common.sh

NO_BROWSER=0
[[ "${1:-}" == "--no-browser" ]] && NO_BROWSER=1

WB_VERSION="$(wasm_bindgen_version Cargo.lock)"
[[ -n "$WB_VERSION" ]] || { log "no wasm-bindgen in Cargo.lock"; exit 1; }

ENV_FILE=target/wasm-env.sh
mkdir -p target

if rustup target list --installed 2>/dev/null | grep -qx wasm32-unknown-unknown; then
  # Preferred route: rustup already has the wasm32 std.
  log "using the installed rustup wasm32-unknown-unknown target"
  CARGO_BIN_DIR="${CARGO_HOME:-$HOME/.cargo}/bin"
  if [[ "$(wasm-bindgen --version 2>/dev/null)" != "wasm-bindgen $WB_VERSION" ]]; then
    log "cargo install wasm-bindgen-cli $WB_VERSION"
    cargo install wasm-bindgen-cli --version "=$WB_VERSION" --locked --quiet \
      || cargo install wasm-bindgen-cli --version "=$WB_VERSION" --quiet
  fi
  if [[ $NO_BROWSER == 0 ]]; then
    apt_ensure chromium chromium-driver
  fi
  cat > "$ENV_FILE" <<ENV
# wasm32-unknown-unknown build environment (rustup target). Source it in a subshell.
export PATH="$CARGO_BIN_DIR:\$PATH"
export WASM_CARGO=cargo
export WASM_BUILD_STD=
export CARGO_TARGET_WASM32_UNKNOWN_UNKNOWN_RUNNER=wasm-bindgen-test-runner
export CHROMEDRIVER=/usr/bin/chromedriver
ENV
else
  # Fallback: Debian's rustc-web + std from source (see scripts/setup-wasm.sh).
  log "no rustup wasm32 target: falling back to Debian rustc-web + -Zbuild-std"
  if [[ $NO_BROWSER == 1 ]]; then export SETUP_WASM_NO_BROWSER=1; fi
  bash scripts/setup-wasm.sh Cargo.lock "$ENV_FILE" >/dev/null
fi

if [[ $NO_BROWSER == 0 ]]; then
  if [[ ! -x tests/browser/node_modules/.bin/playwright-core && ! -d tests/browser/node_modules/playwright-core ]]; then
    log "npm ci (tests/browser: playwright-core, no browser download)"
    (cd tests/browser && PLAYWRIGHT_SKIP_BROWSER_DOWNLOAD=1 npm ci --no-audit --no-fund --silent)
  fi
fi
# 4. Slurm and munge, for the job-array test (scripts/slurm/test-survey.sh); root only.
if [[ $(id -u) == 0 ]] && command -v apt-get >/dev/null; then
  apt_ensure slurmctld slurmd slurm-client munge
else
  log "not root or no apt-get: Slurm not installed; the Slurm job-array test will be SKIPPED"
fi
log "ready: $ENV_FILE"
