# stance-toolbox — the two commands: `make demo` and `make test`.
SHELL := /bin/bash
CARGO ?= cargo
OUT := out
SAMPLE := sample-gpkg
BIN := target/release
TEST_OUT := target/test-output

.PHONY: demo test deps venv build build-debug sample bench reference fmt clean

deps:
	@.ci/install-deps

venv: deps
	@.ci/make-venv .venv

build: deps
	$(CARGO) build --release --workspace

build-debug: deps
	$(CARGO) build --workspace

# The main job end to end on the committed sample: import the CSV with every check, then each
# analysis tool that exists, into out/demo.gpkg.
demo: build
	@mkdir -p $(OUT)
	@rm -f $(OUT)/demo.gpkg
	$(BIN)/stance import --input $(SAMPLE)/veldmark_records.csv --output $(OUT)/demo.gpkg --name records \
	  --time-field time --author-field author --text-field text \
	  --quality-field quality --min-quality place --max-per-author 40 --rejects records_rejected \
	  > $(OUT)/import.json
	@echo "wrote $(OUT)/demo.gpkg:"; ogrinfo -q $(OUT)/demo.gpkg | sed 's/^/  /'
	@echo "summaries: $(OUT)/import.json"

test: venv build-debug
	$(CARGO) fmt --all --check
	$(CARGO) clippy --workspace --all-targets -- -D warnings
	@rm -rf $(TEST_OUT)
	STANCE_TEST_OUT=$(abspath $(TEST_OUT)) STANCE_REQUIRE_REFERENCE=1 $(CARGO) test --workspace
	$(MAKE) demo
	.ci/validate-all $(TEST_OUT) $(OUT) $(SAMPLE)

# Regenerates the committed sample (same seed, same data).
sample: build
	@rm -f $(SAMPLE)/veldmark.gpkg $(SAMPLE)/veldmark_records.csv
	$(BIN)/stance synth --output $(SAMPLE)/veldmark.gpkg --points 20000 --seed 2026 \
	  --csv $(SAMPLE)/veldmark_records.csv > /dev/null

bench: build venv
	tests/bench/import_vs_ogr2ogr.sh

# Reruns the scripts that produce the reference numbers (R spdep/spatstat, PySAL, SciPy, KDEpy).
reference:
	.ci/make-reference

fmt:
	$(CARGO) fmt --all

clean:
	rm -rf $(OUT) $(TEST_OUT)
