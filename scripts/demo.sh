#!/usr/bin/env bash
# Regenerates results/ from the shipped example models: for every model in problems/, the
# steady state, the certified bound (attaining design, speed table, chart; the rate-capped
# design where [pathways] sets rate_cap), the ranked designs within the model's [pathways]
# budget and a sweep of the rate cap, network diagrams (baseline, the bound's optimal
# distribution, its attaining design and the three best ranked designs); then a comparison of
# all the models. Every --save also rebuilds the folder's report.md and report.html; last, a
# screenshot of each model's page goes to results/<model>/report.png (skipped without chromium).
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --quiet
bin=./target/release/ergopath
# Written first: every --save below rebuilds results/flicker/report.md, which includes it.
mkdir -p results/flicker
$bin design problems/flicker.toml --blind --quiet > results/flicker/design-blind.txt
for model in problems/*.toml; do
  $bin steady "$model" --save > /dev/null
  $bin bound "$model" --save > /dev/null
  $bin sensitivity "$model" --save > /dev/null
  $bin design "$model" --save --quiet > /dev/null
  $bin sweep "$model" --over rate-cap=1..1e6 --points 13 --save --quiet > /dev/null
  name=$(basename "$model" .toml)
  for of in baseline bound design; do
    $bin draw "$model" --of "$of" --save > /dev/null
  done
  ranked=$(grep -c '"rank":' "results/$name/design.json" || true)
  for rank in $(seq 1 $(( ranked < 3 ? ranked : 3 ))); do
    $bin draw "$model" --design "results/$name/design.json" --rank "$rank" --save > /dev/null
  done
  echo "results/$name/ regenerated"
done
$bin regimes problems/ring6.toml --scale stored --from 0.01 --to 1000 --points 11 --save > /dev/null
$bin regimes problems/walker.toml --scale stored --from 0.01 --to 1000 --points 11 --save > /dev/null
$bin regimes problems/photoswitch.toml --scale stored --from 0.01 --to 1000 --points 11 --save > /dev/null
echo "regimes sweeps regenerated"
# Only the walker states uncertainties (invented spreads, see its file).
$bin uncertainty problems/walker.toml --samples 1000 --seed 7 --save --quiet > /dev/null
echo "results/walker/uncertainty regenerated"
$bin compare problems/*.toml --save --quiet > /dev/null
echo "results/compare/ regenerated"
# Screenshots of each model's report.html (headless Chromium; the page is self-contained).
browser=$(command -v chromium || command -v chromium-browser || true)
if [ -z "$browser" ]; then
  echo "note: chromium not found, results/*/report.png not regenerated"
else
  profile=$(mktemp -d)
  for model in problems/*.toml; do
    name=$(basename "$model" .toml)
    "$browser" --headless=new --disable-gpu --no-sandbox --no-first-run --user-data-dir="$profile" \
      --hide-scrollbars --window-size=1200,2400 --screenshot="$PWD/results/$name/report.png" \
      "file://$PWD/results/$name/report.html" > /dev/null 2>&1
  done
  rm -rf "$profile"
  echo "results/*/report.png regenerated"
fi
