# Stairstep. `make run` builds everything and serves the page; `make test` runs every test. See README.md.
.PHONY: run test setup wasm page cli bench clean

run:
	bash scripts/run.sh

test:
	bash scripts/test.sh

setup:
	bash scripts/setup.sh

wasm: setup
	bash scripts/build-wasm.sh

page: wasm
	node scripts/build-page.mjs --wasm-dir build/wasm --out dist/stairstep.html

cli:
	cargo build --release

# Benchmarks: one table of side-by-side ratios (see scripts/bench.sh); QUICK=1 for a fast smoke run.
bench:
	bash scripts/bench.sh $(if $(QUICK),--quick)

clean:
	rm -rf build target/wasm-build
