#!/usr/bin/env bash
# Records the --json answer of every command on both demos (through the
# binary) and on two generated instances with node limits (through the
# library, examples/record_outputs.rs). Compare two recordings with
# `diff -r`: a change of structure must leave them byte-identical.
# Usage: scripts/record-outputs.sh OUT_DIR
set -euo pipefail
cd "$(dirname "$0")/.."
out=$(realpath -m "${1:?usage: scripts/record-outputs.sh OUT_DIR}")
mkdir -p "$out"
cargo build --release --quiet
bin=target/release/exmesh
for demo in plateau-masts delta-substations; do
  p=problems/$demo/problem.toml
  o=$out/$demo
  first=$(grep -m1 '^id *=' "$p" | sed 's/.*"\(.*\)".*/\1/')
  $bin excitation "$p" --json >"$o-excitation.json" || true
  $bin plan "$p" --json --out "$o-plan-file.json" >"$o-plan.json" || true
  $bin check "$p" --plan "$o-plan-file.json" --json >"$o-check.json" || true
  $bin check "$p" --installed --json >"$o-check-installed.json" || true
  $bin budget "$p" --json >"$o-budget.json" || true
  $bin retire "$p" --node "$first" --plan "$o-plan-file.json" --json >"$o-retire.json" || true
  $bin stress "$p" --plan "$o-plan-file.json" --json >"$o-stress.json" || true
  $bin simulate "$p" --plan "$o-plan-file.json" --json >"$o-simulate.json" || true
done
cargo run --release --quiet --example record_outputs -- "$out"
