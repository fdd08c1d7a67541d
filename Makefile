# stance-toolbox — the two commands: `make demo` and `make test`.
SHELL := /bin/bash
CARGO ?= cargo
OUT := out
SAMPLE := sample-gpkg
BIN := target/release
TEST_OUT := target/test-output

.PHONY: demo test test-cluster deps venv build build-debug sample bench reference fuzz fmt clean

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
	  --quality-field quality --min-quality town --max-per-author 40 --rejects records_rejected \
	  > $(OUT)/import.json
	$(BIN)/stance density --input $(OUT)/demo.gpkg --layer records --output $(OUT)/demo.gpkg --name density \
	  --bandwidth cv --compare support,oppose -q > $(OUT)/density.json
	@for s in oppose neutral support diff sqrtdiff share log_ratio log_ratio_p_upper log_ratio_p_lower; do \
	  overlay=""; case $$s in diff|log_ratio*) overlay="--overlay density_tolerance";; esac; \
	  $(BIN)/stance render --input $(OUT)/demo.gpkg --output $(OUT)/demo.gpkg --surface density_$$s $$overlay \
	    --title "Veldmark levy debate: density_$$s" --png $(OUT)/density_$$s.png -q > /dev/null || exit 1; \
	done
	$(BIN)/stance scan --input $(OUT)/demo.gpkg --layer records --output $(OUT)/demo.gpkg --name scan \
	  --model ordinal --toward both --max-radius-m 12000 --centres-cell-m 2000 --replicates 199 \
	  --report-p 0.05 -q > $(OUT)/scan.json
	$(BIN)/stance render --input $(OUT)/demo.gpkg --output $(OUT)/demo.gpkg --surface density_diff \
	  --overlay scan_clusters --title "Veldmark: ordinal scan clusters (p < 0.05) over support - oppose density" \
	  --png $(OUT)/scan_clusters.png -q > /dev/null
	$(BIN)/stance weights --input $(SAMPLE)/veldmark.gpkg --layer veldmark_districts --id-field code \
	  --output $(OUT)/demo.gpkg --name district_weights -q > $(OUT)/weights.json
	$(BIN)/stance rates --input $(OUT)/demo.gpkg --layer records --areas veldmark_districts \
	  --areas-file $(SAMPLE)/veldmark.gpkg --case-class oppose --at-risk-classes all --id-field code \
	  --weights district_weights --weights-file $(OUT)/demo.gpkg --surface density_diff \
	  --output $(OUT)/demo.gpkg --name district_rates -q > $(OUT)/rates.json
	$(BIN)/stance moran --input $(OUT)/demo.gpkg --layer district_rates --field rate_eb_global \
	  --weights district_weights --output $(OUT)/demo.gpkg --name district_moran -q > $(OUT)/moran.json
	$(BIN)/stance render --input $(OUT)/demo.gpkg --output $(OUT)/demo.gpkg --areas district_rates \
	  --field rate_eb_global --title "Veldmark: opposition share per district, empirical Bayes" \
	  --png $(OUT)/district_rates.png -q > /dev/null
	$(BIN)/stance render --input $(OUT)/demo.gpkg --output $(OUT)/demo.gpkg --areas district_moran \
	  --field cluster --categorical --title "Veldmark: local Moran's I clusters of opposition share" \
	  --png $(OUT)/district_clusters.png -q > /dev/null
	$(BIN)/stance local --input $(OUT)/demo.gpkg --layer district_rates --statistic gi-star \
	  --field rate_eb_global --weights district_weights --permutations 9999 \
	  --output $(OUT)/demo.gpkg --name district_hotspots -q > $(OUT)/hotspots.json
	$(BIN)/stance render --input $(OUT)/demo.gpkg --output $(OUT)/demo.gpkg --areas district_hotspots \
	  --field hot_cold --categorical --title "Veldmark: hot and cold spots of opposition share (Gi*)" \
	  --png $(OUT)/district_hotspots.png -q > /dev/null
	$(BIN)/stance local --input $(OUT)/demo.gpkg --layer district_rates --statistic join-count \
	  --field rate_eb_global --rule "> 0.4" --weights district_weights --permutations 9999 \
	  --output $(OUT)/demo.gpkg --name district_joins -q > $(OUT)/joins.json
	$(BIN)/stance scan --input $(OUT)/demo.gpkg --layer records --output $(OUT)/demo.gpkg --name mix \
	  --model multinomial --max-radius-m 12000 --centres-cell-m 2000 --replicates 999 \
	  --report-p 0.05 -q > $(OUT)/mix.json
	$(BIN)/stance render --input $(OUT)/demo.gpkg --output $(OUT)/demo.gpkg --surface density_diff \
	  --overlay mix_clusters --title "Veldmark: multinomial scan clusters (p < 0.05) over support - oppose density" \
	  --png $(OUT)/mix_clusters.png -q > /dev/null
	$(BIN)/stance density --input $(OUT)/demo.gpkg --layer records --output $(OUT)/demo.gpkg --name types \
	  --cell-m 500 --type-probabilities --permutations 99 -q > $(OUT)/types.json
	$(BIN)/stance render --input $(OUT)/demo.gpkg --output $(OUT)/demo.gpkg --surface types_prob_oppose \
	  --overlay types_prob_tolerance --title "Veldmark: probability that a record opposes, where it departs from constant" \
	  --png $(OUT)/types_prob_oppose.png -q > /dev/null
	$(BIN)/stance labels --input $(SAMPLE)/veldmark.gpkg --layer veldmark_records --label-fields label_a,label_b \
	  --reference-field stance --reference-sample 500 --areas veldmark_districts --correct-field label_b \
	  --output $(OUT)/demo.gpkg --name labels -q > $(OUT)/labels.json
	$(BIN)/stance render --input $(OUT)/demo.gpkg --output $(OUT)/demo.gpkg --areas labels_areas \
	  --field all_agree_share --title "Veldmark: share of records on which both classifiers agree" \
	  --png $(OUT)/labels_agreement.png -q > /dev/null
	@for f in stance label_a label_b; do \
	  $(BIN)/stance scan --input $(SAMPLE)/veldmark.gpkg --layer veldmark_records --stance-field $$f \
	    --model ordinal --toward both --max-radius-m 12000 --centres-cell-m 2000 --replicates 199 \
	    --report-p 0.05 --output $(OUT)/demo.gpkg --name scan_$$f -q > /dev/null || exit 1; \
	done
	$(BIN)/stance labels --input $(SAMPLE)/veldmark.gpkg --layer veldmark_records --label-fields label_a,label_b \
	  --compare-layers scan_stance_clusters,scan_label_a_clusters,scan_label_b_clusters \
	  --compare-file $(OUT)/demo.gpkg --compare-side-field leans_to \
	  --output $(OUT)/demo.gpkg --name labels_robust -q > $(OUT)/labels_robust.json
	$(BIN)/stance render --input $(OUT)/demo.gpkg --output $(OUT)/demo.gpkg --surface density_diff \
	  --overlay labels_robust_clusters --title "Veldmark: ordinal clusters under the truth and two classifiers" \
	  --png $(OUT)/labels_robust.png -q > /dev/null
	$(BIN)/stance density --input $(OUT)/demo.gpkg --layer records --output $(OUT)/demo.gpkg --name density_month \
	  --bandwidth-m 3000 --compare support,oppose --time-field time_utc --slice month --permutations 0 \
	  -q > $(OUT)/density_month.json
	$(BIN)/stance render --input $(OUT)/demo.gpkg --output $(OUT)/demo.gpkg --surface density_month_diff --each-period \
	  --title "Veldmark: support - oppose density by month" --png $(OUT)/density_diff_by_month.png -q > /dev/null
	$(BIN)/stance scan --input $(OUT)/demo.gpkg --layer records --output $(OUT)/demo.gpkg --name burst \
	  --model space-time-permutation --time-field time_utc --period month --max-duration 3 \
	  --max-radius-m 12000 --centres-cell-m 2000 --replicates 999 --report-p 0.05 -q > $(OUT)/burst.json
	$(BIN)/stance render --input $(OUT)/demo.gpkg --output $(OUT)/demo.gpkg --surface density_month_diff_2026_06 \
	  --overlay burst_clusters --title "Veldmark: space-time clusters (p < 0.05) over June's support - oppose density" \
	  --png $(OUT)/burst_clusters.png -q > /dev/null
	$(BIN)/stance trend --input $(OUT)/demo.gpkg --layer records --areas veldmark_districts \
	  --areas-file $(SAMPLE)/veldmark.gpkg --id-field code --time-field time_utc --period month \
	  --case-class oppose --at-risk-classes all --clusters burst_clusters \
	  --output $(OUT)/demo.gpkg --name trend -q > $(OUT)/trend.json
	$(BIN)/stance render --input $(OUT)/demo.gpkg --output $(OUT)/demo.gpkg --periods trend_periods \
	  --title "Veldmark: opposition share by month, whole region and space-time clusters" \
	  --png $(OUT)/share_by_month.png -q > /dev/null
	$(BIN)/stance render --input $(OUT)/demo.gpkg --output $(OUT)/demo.gpkg --areas trend_areas --field trend \
	  --title "Veldmark: trend of the opposition share per district" --png $(OUT)/trend_map.png -q > /dev/null
	@tools/serve/demo.sh $(BIN)/stance $(OUT)
	@echo "wrote $(OUT)/demo.gpkg:"; ogrinfo -q $(OUT)/demo.gpkg | sed 's/^/  /'
	@echo "previews: $$(ls $(OUT)/*.png | tr '\n' ' ')"
	@echo "summaries: $$(ls $(OUT)/*.json | tr '\n' ' ')"

test: venv build-debug
	$(CARGO) fmt --all --check
	$(CARGO) clippy --workspace --all-targets -- -D warnings
	@rm -rf $(TEST_OUT)
	STANCE_TEST_OUT=$(abspath $(TEST_OUT)) STANCE_REQUIRE_REFERENCE=1 $(CARGO) test --workspace
	# The slow property tests (power on the planted burst over 20 seeds, false alarms over 200).
	STANCE_TEST_OUT=$(abspath $(TEST_OUT)) $(CARGO) test -p stance-tests --test scan_spacetime -- --ignored
	STANCE_TEST_OUT=$(abspath $(TEST_OUT)) tests/service/run.sh
	$(MAKE) demo
	.ci/validate-all $(TEST_OUT) $(OUT) $(SAMPLE)
	@if [ -n "$$STANCE_TEST_CLUSTER" ]; then tests/cluster/run.sh; fi

# Sharded runs through a real single-node Slurm (slurm-wlm and munge from Debian, set up here;
# needs root): the merged outputs must equal one-machine runs bit for bit. `make test` runs it
# too when STANCE_TEST_CLUSTER is set.
test-cluster: build-debug
	STANCE_TEST_OUT=$(abspath $(TEST_OUT)) tests/cluster/run.sh

# Regenerates the committed sample (same seed, same data).
sample: build
	@rm -f $(SAMPLE)/veldmark.gpkg $(SAMPLE)/veldmark_records.csv
	$(BIN)/stance synth --output $(SAMPLE)/veldmark.gpkg --points 20000 --seed 2026 \
	  --csv $(SAMPLE)/veldmark_records.csv > /dev/null

bench: build venv
	tests/bench/import_vs_ogr2ogr.sh
	tests/bench/density_vs_python.sh
	tests/bench/scan_vs_numba.sh
	tests/bench/areal_vs_pysal.sh
	tests/bench/service_overhead.sh
	tests/bench/import_dialects.sh
	tests/bench/local_vs_pysal.sh

# Fuzzes the import parsers (time strings, class mappings, row checks) for FUZZ_SECONDS each.
# Needs cargo-fuzz (`cargo install cargo-fuzz`); stable Rust runs it with RUSTC_BOOTSTRAP=1.
FUZZ_SECONDS ?= 60
fuzz:
	command -v cargo-fuzz >/dev/null || $(CARGO) install cargo-fuzz --locked
	cd fuzz && for t in time_strings class_mapping import_rows import_dialect; do \
	  RUSTC_BOOTSTRAP=1 $(CARGO) fuzz run $$t -- -max_total_time=$(FUZZ_SECONDS) || exit 1; done

# Reruns the scripts that produce the reference numbers (R spdep/spatstat, PySAL, SciPy, KDEpy).
reference:
	.ci/make-reference

fmt:
	$(CARGO) fmt --all

clean:
	rm -rf $(OUT) $(TEST_OUT)
