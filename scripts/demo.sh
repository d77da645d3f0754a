#!/usr/bin/env bash
# Regenerates results/ from the shipped example models: steady state and certified bound (with
# the attaining design, speed table and chart; the rate-capped design where the model sets
# [pathways] rate_cap) for every model in problems/.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --quiet
for model in problems/*.toml; do
  ./target/release/ergopath steady "$model" --save > /dev/null
  ./target/release/ergopath bound "$model" --save > /dev/null
  echo "results/$(basename "$model" .toml)/ regenerated"
done
