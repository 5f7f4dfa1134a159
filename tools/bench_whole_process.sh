#!/usr/bin/env bash
# Whole-process timings for the README's Performance section. Rerun from the repo root:
#   bash tools/bench_whole_process.sh
# Needs /usr/bin/time (GNU time). Prints the median of 5 runs and the peak resident memory of each job.
# To compare with another build on a machine whose speed drifts (shared virtual machines), give that build's
# binary: `bash tools/bench_whole_process.sh /path/to/old/dipwatch` also runs the CSV job (to a file and to
# /dev/null) and the JSON job (to /dev/null) 5 times with each binary, alternating, and prints both medians (wall
# and user CPU) from the same series. The photometric comparison (noise per event against none) always runs.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --quiet --release --example synthetic_catalogue
cargo build --quiet --release
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
./target/release/examples/synthetic_catalogue 10000 2027 > "$work/cat10k.csv"
./target/release/examples/synthetic_catalogue 100 2027 > "$work/cat100.csv"
cp benches/sites.bench.toml "$work/sites.toml"
run5() { # label, command... (output to a file; OUT=/dev/null to leave the file system out)
  local label=$1; shift
  local times=() mem=0 out=${OUT:-$work/out}
  for _ in 1 2 3 4 5; do
    /usr/bin/time -f "%e %M" -o "$work/t" "$@" > "$out"
    read -r t m < "$work/t"
    times+=("$t"); (( m > mem )) && mem=$m
  done
  local median
  median=$(printf '%s\n' "${times[@]}" | sort -n | sed -n 3p)
  printf '%-60s median %6s s of (%s), peak %d MiB\n' "$label" "$median" "${times[*]}" $((mem / 1024))
}
run5 "plan 10000 targets x 3 sites x 365 nights -> CSV" \
  ./target/release/dipwatch plan --sites "$work/sites.toml" --targets "$work/cat10k.csv" --from 2027-01-01 --days 365 --format csv
run5 "plan 10000 targets x 3 sites x 365 nights -> JSON" \
  ./target/release/dipwatch plan --sites "$work/sites.toml" --targets "$work/cat10k.csv" --from 2027-01-01 --days 365 --format json
OUT=/dev/null run5 "the same CSV job to /dev/null" \
  ./target/release/dipwatch plan --sites "$work/sites.toml" --targets "$work/cat10k.csv" --from 2027-01-01 --days 365 --format csv
OUT=/dev/null run5 "the same JSON job to /dev/null" \
  ./target/release/dipwatch plan --sites "$work/sites.toml" --targets "$work/cat10k.csv" --from 2027-01-01 --days 365 --format json
# The photometric job: a 0.5 m set-up at every site and an invented magnitude (9-15) for every target, against the
# plain job, alternating, 7 runs each, to /dev/null.
awk '/^\[\[site\]\]/ && n++ { print "aperture_m = 0.5" } { print } END { print "aperture_m = 0.5" }' \
  "$work/sites.toml" > "$work/sites_phot.toml"
awk 'BEGIN { OFS = "," } /^#/ { print; next } !h { print $0 ",mag"; h = 1; next } { printf "%s,%.2f\n", $0, 9 + 6 * ((NR * 7919) % 1000) / 1000 }' \
  "$work/cat10k.csv" > "$work/cat10k_mag.csv"
for b in plain phot; do : > "$work/ph.$b"; done
for _ in 1 2 3 4 5 6 7; do
  for b in plain phot; do
    if [ "$b" = plain ]; then s=$work/sites.toml; c=$work/cat10k.csv; else s=$work/sites_phot.toml; c=$work/cat10k_mag.csv; fi
    /usr/bin/time -f "%e %U" -o "$work/t" ./target/release/dipwatch plan --sites "$s" --targets "$c" \
      --from 2027-01-01 --days 365 --format csv > /dev/null
    cat "$work/t" >> "$work/ph.$b"
  done
done
for b in plain phot; do
  printf 'CSV job to /dev/null, %s, alternating: median wall %s s, median user CPU %s s\n' "$b" \
    "$(cut -d' ' -f1 "$work/ph.$b" | sort -n | sed -n 4p)" "$(cut -d' ' -f2 "$work/ph.$b" | sort -n | sed -n 4p)"
done
run5 "tonight, 1 site, 100 targets" \
  ./target/release/dipwatch tonight --sites "$work/sites.toml" --targets "$work/cat100.csv" --site "North Bench" --date 2027-03-10
# GNU time reports 10 ms steps; time `tonight` as 5 batches of 20 runs for a finer median.
per_run=()
for _ in 1 2 3 4 5; do
  s=$(date +%s%N)
  for _ in $(seq 20); do
    ./target/release/dipwatch tonight --sites "$work/sites.toml" --targets "$work/cat100.csv" --site "North Bench" --date 2027-03-10 > /dev/null
  done
  e=$(date +%s%N)
  per_run+=("$(( (e - s) / 20000 ))")
done
printf 'tonight, 1 site, 100 targets: median %s us per run of (%s)\n' "$(printf '%s\n' "${per_run[@]}" | sort -n | sed -n 3p)" "${per_run[*]}"
if [ -n "${1:-}" ]; then
  # CSV to a file, CSV to /dev/null and JSON to /dev/null, each 5 times per binary, alternating.
  for job in csv-file csv-null json-null; do
    fmt=${job%-*}
    for b in old new; do : > "$work/cmp.$b"; done
    for _ in 1 2 3 4 5; do
      for b in old new; do
        bin=./target/release/dipwatch; [ "$b" = old ] && bin=$1
        out=$work/out; [ "${job#*-}" = null ] && out=/dev/null
        /usr/bin/time -f "%e %U" -o "$work/t" "$bin" plan --sites "$work/sites.toml" --targets "$work/cat10k.csv" \
          --from 2027-01-01 --days 365 --format "$fmt" > "$out"
        cat "$work/t" >> "$work/cmp.$b"
      done
    done
    for b in old new; do
      printf '%s job, %s build, alternating: median wall %s s, median user CPU %s s\n' "$job" "$b" \
        "$(cut -d' ' -f1 "$work/cmp.$b" | sort -n | sed -n 3p)" "$(cut -d' ' -f2 "$work/cmp.$b" | sort -n | sed -n 3p)"
    done
  done
fi
echo "machine: $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | sed 's/^ //'), $(free -g | awk '/Mem:/{print $2}') GiB"
