#!/usr/bin/env bash
# Detection benchmark: every scenario of testdata/scenarios/suite.tsv in
# each condition (exact model; realistic: 5-minute logging, 0.01 m
# pressure resolution, true network off by up to 10 %; aged: the same,
# plus the oldest pipe group far rougher than recorded and a link shut in
# truth but open in the records), each through simulate -> replay ->
# score --json, then one table per condition with the measuring-stick
# targets beside the measured figures (scripts/benchdetect).
#
# Usage: scripts/bench-detect.sh            (or: make bench-detect)
# Environment:
#   GO           go command (default go)
#   BENCH_JOBS   parallel runs (default 2: one per core on a 2-core box)
#   BENCH_ONLY   run only manifest lines matching this extended regexp
#                (e.g. 'demo.*leak'); the table then covers those alone
#   BENCH_KEEP   1: keep the work folder (truth, findings, scores, logs;
#                readings are always removed: rerun simulate to get them)
#   BENCH_CALIBRATED  0: skip the calibrated conditions, realistic-calibrated
#                and aged-calibrated: each realistic or aged run's readings
#                of the learning period (before --from, no event in it) go
#                through `plumbline calibrate`, and the same readings are
#                replayed with the calibrated network and its residual
#                scatter by hour (a copy of the configuration pointing at
#                both)
set -euo pipefail

cd "$(dirname "$0")/.."
GO=${GO:-go}
JOBS=${BENCH_JOBS:-2}
ONLY=${BENCH_ONLY:-}
suite=testdata/scenarios/suite.tsv

work=$(mktemp -d "${TMPDIR:-/tmp}/bench-detect.XXXXXX")
if [[ "${BENCH_KEEP:-0}" == 1 ]]; then
	echo "bench-detect: work folder $work (kept)" >&2
else
	trap 'rm -rf "$work"' EXIT
fi

started=$(date +%s)
echo "bench-detect: building" >&2
"$GO" build -o "$work/plumbline" ./daemon
"$GO" build -o "$work/benchdetect" ./scripts/benchdetect
# The true networks of the realistic and aged conditions,
# true-<net>.geojson and true-<net>-aged.geojson (the 5k ones are too
# large to commit; the demo's are also committed for runs by hand).
"$GO" run ./testdata/scenarios/gen -true-networks "$work/true"

# Longest runs first (the 5k town's, then by end time), so the last ones
# to finish are short.
grep -v '^#' "$suite" | { if [[ -n "$ONLY" ]]; then grep -E -- "$ONLY" || true; else cat; fi; } |
	sort -t "$(printf '\t')" -k1,1r -k7,7r >"$work/runs.tsv"
total=$(wc -l <"$work/runs.tsv")
if [[ "$total" -eq 0 ]]; then
	echo "bench-detect: no run matches BENCH_ONLY=$ONLY" >&2
	exit 1
fi
echo "bench-detect: $total runs, $JOBS at a time, in $work" >&2

# one_run runs one manifest line; a failure is recorded in the run's
# folder (file "failed") and does not stop the others.
one_run() {
	local net=$1 cond=$2 scen=$3 network=$4 config=$5 from=$6 to=$7
	local name dir t0 truenet=()
	name=$(basename "$scen" .yaml)
	dir="$WORK/res/$net/$cond/$name"
	mkdir -p "$dir"
	t0=$(date +%s)
	case "$cond" in
	realistic) truenet=(--true-network "$WORK/true/true-$net.geojson") ;;
	exact) ;;
	*) truenet=(--true-network "$WORK/true/true-$net-$cond.geojson") ;;
	esac
	if "$WORK/plumbline" simulate --network "$network" --scenario "$scen" "${truenet[@]}" \
		--out "$dir/readings.csv" --truth "$dir/truth.json" >"$dir/simulate.log" 2>&1 &&
		"$WORK/plumbline" replay --config "$config" --source "$dir/readings.csv" \
			--findings "$dir/findings.json" --no-store --quiet >"$dir/replay.log" 2>&1 &&
		"$WORK/plumbline" score --truth "$dir/truth.json" --findings "$dir/findings.json" \
			--network "$network" --from "$from" --to "$to" --json >"$dir/score.json.part" 2>"$dir/score.log"; then
		mv "$dir/score.json.part" "$dir/score.json"
		status=ok
	else
		cat "$dir"/*.log >"$dir/failed" 2>/dev/null || true
		status=FAILED
	fi
	if [[ "$cond" != exact && "${BENCH_CALIBRATED:-1}" != 0 && -f "$dir/readings.csv" ]]; then
		calibrated_run "$net" "$cond" "$scen" "$network" "$config" "$from" "$to" "$dir/readings.csv"
	fi
	rm -f "$dir/readings.csv"
	echo "bench-detect: $net/$cond/$name $status in $(($(date +%s) - t0)) s" >&2
}

# calibrated_run replays a realistic or aged run's readings with the
# network calibrated on its learning period (everything before the
# score's --from): the condition <cond>-calibrated.
calibrated_run() {
	local net=$1 cond=$2 scen=$3 network=$4 config=$5 from=$6 to=$7 readings=$8
	local name dir t0 cfgdir
	name=$(basename "$scen" .yaml)
	dir="$WORK/res/$net/$cond-calibrated/$name"
	mkdir -p "$dir"
	t0=$(date +%s)
	cfgdir=$(cd "$(dirname "$config")" && pwd)
	# A copy of the configuration beside the calibrated network: network
	# and data_dir made absolute, the noise file added.
	sed -e "s|^network: *\(.*\)$|network: $cfgdir/\1|" -e "s|^data_dir: *\(.*\)$|data_dir: $dir/data|" \
		"$config" >"$dir/recorded.yaml"
	if "$WORK/plumbline" calibrate --config "$dir/recorded.yaml" --source "$readings" --to "$from" \
		--out "$dir/calibrated.geojson" --report "$dir/calibration.json" >"$dir/calibrate.log" 2>&1 &&
		sed -e "s|^network: .*$|network: $dir/calibrated.geojson|" "$dir/recorded.yaml" >"$dir/config.yaml" &&
		printf 'calibration:\n  noise_file: %s\n' "$dir/calibrated.noise.json" >>"$dir/config.yaml" &&
		"$WORK/plumbline" replay --config "$dir/config.yaml" --source "$readings" \
			--findings "$dir/findings.json" --no-store --quiet >"$dir/replay.log" 2>&1 &&
		"$WORK/plumbline" score --truth "$(dirname "$readings")/truth.json" --findings "$dir/findings.json" \
			--network "$network" --from "$from" --to "$to" --json >"$dir/score.json.part" 2>"$dir/score.log"; then
		mv "$dir/score.json.part" "$dir/score.json"
		status=ok
	else
		cat "$dir"/*.log >"$dir/failed" 2>/dev/null || true
		status=FAILED
	fi
	echo "bench-detect: $net/$cond-calibrated/$name $status in $(($(date +%s) - t0)) s" >&2
}
export -f one_run calibrated_run
export WORK="$work"

# xargs keeps at most $JOBS runs going; each line is one run's 7 fields.
tr '\t' '\n' <"$work/runs.tsv" | xargs -d '\n' -n 7 -P "$JOBS" bash -c 'one_run "$@"' _

echo "bench-detect: runs done in $(($(date +%s) - started)) s" >&2
{
	head -2 "$suite"
	cat "$work/runs.tsv"
	if [[ "${BENCH_CALIBRATED:-1}" != 0 ]]; then
		awk -F '\t' -v OFS='\t' '$2 != "exact" { $2 = $2 "-calibrated"; print }' "$work/runs.tsv"
	fi
} >"$work/suite.tsv"
"$work/benchdetect" -suite "$work/suite.tsv" -results "$work/res" -true "$work/true"
# CPU time of everything this script waited for (bash's times: the
# second line is the children's user and system time).
times >"$work/times"
cpu=$(tail -1 "$work/times")
echo
echo "($total runs on $(nproc) cores, $JOBS at a time, in $(($(date +%s) - started)) s; CPU user, system: $cpu)"
