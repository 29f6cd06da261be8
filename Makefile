# eccaudit: the two commands most people need are `make serve` and `make test`.
PORT ?= 8765

.PHONY: serve test setup wasm bench clean

## Build the page and serve it on http://127.0.0.1:$(PORT)/ with the demo data loaded.
serve: wasm
	node scripts/serve.mjs $(PORT)

## Every test: native, wasm in headless Chromium, the page, and the Python package.
test:
	bash scripts/test.sh

## Install the toolchain pieces (idempotent).
setup:
	bash scripts/setup.sh

## Build the wasm adapter into www/pkg.
wasm: setup
	bash scripts/build-wasm.sh

## Benchmarks: native, then the same loops as wasm under node.
bench: wasm
	cargo run --release --quiet -- bench
	node scripts/bench-wasm.mjs

clean:
	cargo clean
	rm -rf www/pkg
