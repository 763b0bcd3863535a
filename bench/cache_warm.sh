#!/usr/bin/env bash
# Benchmark: cold run (empty cache) against warm rerun (every fit cached) on a
# 60 000-row invented table, 10-fold x 3 repeats, 12 polynomial degrees and
# 5 neighbour counts. Prints the median of several runs of each.
#
# Usage: bench/cache_warm.sh [ROWS] [RUNS] [KNN_FEATURES]
#   defaults: 60000, 3, "outdoor_c"; pass '"outdoor_c", "wind_ms"' for the
#   two-feature neighbour search (a full scan per query: a much slower cold run).
set -euo pipefail
cd "$(dirname "$0")/.."
rows=${1:-60000}
runs=${2:-3}
knn_features=${3:-'"outdoor_c"'}

cargo build --release --quiet
bin=$PWD/target/release/heldout
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

python3 demo-data/make_heat_demand.py --rows "$rows" --wind-gaps 0 --out "$work/big.csv"
cat > "$work/big.toml" <<SPEC
[experiment]
name = "bench-cache"
seed = 11

[data]
table = "big.csv"
target = "demand_mwh"
features = ["outdoor_c", "wind_ms"]
key = "meter_id"

[split]
holdout = 0.2
folds = 10
repeats = 3

[[candidate]]
family = "polynomial"
features = ["outdoor_c"]
degree = [1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12]

[[candidate]]
family = "nearest-neighbors"
features = [$knn_features]
k = [1, 5, 20, 50, 100]

[[candidate]]
family = "linear"
SPEC

seconds() { date +%s.%N; }
median() { sort -g | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}'; }

cold=()
warm=()
for i in $(seq "$runs"); do
  rm -rf "$work/cache" "$work/out"
  t0=$(seconds); "$bin" run "$work/big.toml" --cache "$work/cache" --out "$work/out" --quiet --allow-outside; t1=$(seconds)
  "$bin" run "$work/big.toml" --cache "$work/cache" --out "$work/out" --quiet --allow-outside; t2=$(seconds)
  cold+=("$(echo "$t1 - $t0" | bc -l)")
  warm+=("$(echo "$t2 - $t1" | bc -l)")
done
cold_median=$(printf '%s\n' "${cold[@]}" | median)
warm_median=$(printf '%s\n' "${warm[@]}" | median)
echo "rows=$rows runs=$runs nproc=$(nproc) knn features: $knn_features"
echo "cold runs (s): ${cold[*]}"
echo "warm runs (s): ${warm[*]}"
printf 'median cold %.3f s, median warm %.3f s, warm/cold = %.2f %%\n' \
  "$cold_median" "$warm_median" "$(echo "100 * $warm_median / $cold_median" | bc -l)"
