#!/usr/bin/env bash
# The service tests (tests/service/test_*.py): OWSLib as an independent OGC API – Processes
# client, curl, load, faults, security and the page in headless Chromium. Installs what they
# need on a fresh Debian 12 (.ci/service-deps) and builds the umbrella if it is missing.
#   STANCE_BIN        the umbrella (default: $CARGO_TARGET_DIR or target, /debug/stance)
#   STANCE_SERVE_CMD  how to start the service (default: "$STANCE_BIN serve")
set -euo pipefail
cd "$(dirname "$0")/../.."
.ci/service-deps
target=${CARGO_TARGET_DIR:-target}
case "$target" in /*) ;; *) target="$PWD/$target" ;; esac
export STANCE_BIN=${STANCE_BIN:-$target/debug/stance}
if [ ! -x "$STANCE_BIN" ]; then cargo build --bin stance; fi
export STANCE_TEST_OUT=${STANCE_TEST_OUT:-$PWD/target/test-output}
mkdir -p "$STANCE_TEST_OUT/service"
exec .venv-service/bin/python -m pytest -p no:cacheprovider -q --durations=0 tests/service "$@"
