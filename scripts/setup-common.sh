#!/usr/bin/env bash
# Shared by scripts/setup.sh and scripts/setup-wasm.sh (sourced, not run): installing Debian
# packages idempotently and reading the wasm-bindgen version from a Cargo.lock. The caller
# defines `log MESSAGE`.

# Debian packages: `apt-get update` once, before the first install of this run.
APT_UPDATED=0
apt_ensure() {
  local missing=() p
  for p in "$@"; do
    dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q 'install ok installed' || missing+=("$p")
  done
  [[ ${#missing[@]} -eq 0 ]] && return 0
  if [[ $APT_UPDATED -eq 0 ]]; then
    log "apt-get update"
    apt-get update -qq
    APT_UPDATED=1
  fi
  log "apt-get install ${missing[*]}"
  DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null
}

# The exact version of the wasm-bindgen package in the Cargo.lock FILE (empty when absent).
wasm_bindgen_version() {
  awk '
    /^\[\[package\]\]/ { inpkg = 0 }
    /^name = "wasm-bindgen"$/ { inpkg = 1; next }
    inpkg && /^version = / { gsub(/"/, "", $3); print $3; exit }
  ' "$1"
}
