#!/usr/bin/env bash
# Render the example charts in docs/ to PNG so they can be looked at (and shown in the README).
# Needs the dipwatch sources and rsvg-convert (Debian: apt-get install librsvg2-bin). Rerun from the repo root:
#   bash tools/render_charts.sh
set -euo pipefail
cd "$(dirname "$0")/.."
bin=(cargo run --quiet --release --)
mkdir -p docs
"${bin[@]}" chart night --sites sites.example.toml --targets targets.example.csv --site "Kestrel Moor" \
  --target "Amberfall b" --date 2027-03-07 --out docs/night-chart.svg
"${bin[@]}" chart night --sites sites.example.toml --targets targets.example.csv --site "Quebrada Lenta" \
  --target "Tollund Reach c" --date 2027-03-08 --out docs/night-chart-partial.svg
"${bin[@]}" chart season --sites sites.example.toml --targets targets.example.csv --from 2027-03-01 \
  --to 2027-04-30 --out docs/season-grid.svg
"${bin[@]}" refine --targets targets.example.csv --observed observed.example.csv --target "Amberfall b" \
  --chart docs/oc-chart.svg > /dev/null
for f in docs/*.svg; do
  rsvg-convert --background-color=white "$f" -o "${f%.svg}.png"
done
ls -l docs
