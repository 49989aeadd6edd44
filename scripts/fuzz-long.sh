#!/usr/bin/env bash
# fuzz-long.sh [DURATION] — nightly-style fuzzing of every Fuzz target in the
# repository, each for DURATION (a go test -fuzztime value, default 5m).
#
# Targets are found by scanning *_test.go files for "func FuzzXxx(", so a new
# target is picked up without editing this script. Each runs alone
# (go test -run '^$' -fuzz '^FuzzXxx$' -fuzztime DURATION ./pkg). A crash
# makes the fuzzer write the failing input under the package's
# testdata/fuzz/FuzzXxx/ directory; commit it so `go test` replays it as a
# regression seed. (A worker killed from outside, e.g. by SIGQUIT, is also
# recorded as "hung or terminated unexpectedly"; re-run the written input
# with go test -run=FuzzXxx/ID before committing it.) The script goes on with the other targets, prints a table
# (target, status, executions, new interesting inputs) and exits 1 if any
# target failed.
#
# Environment: FUZZ_PARALLEL sets -parallel (default: the number of CPUs),
# FUZZ_MATCH limits the run to targets whose "pkg.Name" matches a regex,
# FUZZ_LOG_DIR keeps the per-target logs (default: a temp dir).
set -u -o pipefail

duration="${1:-5m}"
root="$(cd "$(dirname "$0")/.." && pwd)"
cd "$root"
parallel="${FUZZ_PARALLEL:-$(getconf _NPROCESSORS_ONLN 2>/dev/null || echo 2)}"
match="${FUZZ_MATCH:-.}"
logdir="${FUZZ_LOG_DIR:-$(mktemp -d -t hopwise-fuzz-XXXXXX)}"
mkdir -p "$logdir"

# pkgdir<TAB>FuzzName for every target, sorted, skipping nested modules
# (directories with their own go.mod) which the root module cannot test.
mapfile -t targets < <(
	grep -rEo --include='*_test.go' '^func (Fuzz[A-Za-z0-9_]+)\(' . |
		sed -E 's#^\./(.*)/[^/]+_test\.go:func (Fuzz[A-Za-z0-9_]+)\($#\1\t\2#' |
		while IFS=$'\t' read -r dir name; do
			d="$dir"
			nested=0
			while [ "$d" != "." ] && [ -n "$d" ]; do
				if [ -f "$d/go.mod" ]; then nested=1; break; fi
				d="$(dirname "$d")"
			done
			[ "$nested" = 0 ] && printf '%s\t%s\n' "$dir" "$name"
		done | sort -u
)

if [ "${#targets[@]}" -eq 0 ]; then
	echo "fuzz-long: no Fuzz targets found" >&2
	exit 1
fi

echo "fuzz-long: ${#targets[@]} targets, ${duration} each, -parallel ${parallel}, logs in ${logdir}"
failed=0
summary=()
for t in "${targets[@]}"; do
	dir="${t%%$'\t'*}"
	name="${t##*$'\t'}"
	id="$(basename "$dir").${name}"
	if ! [[ "${dir}.${name}" =~ $match ]]; then
		continue
	fi
	log="$logdir/${dir//\//_}_${name}.log"
	start=$(date +%s)
	if go test -run '^$' -fuzz "^${name}\$" -fuzztime "$duration" -parallel "$parallel" "./$dir" >"$log" 2>&1; then
		status=ok
	else
		status=FAIL
		failed=1
	fi
	secs=$(( $(date +%s) - start ))
	# The fuzzer's last progress line: "fuzz: elapsed: 5m0s, execs: 123 (410/sec), new interesting: 7 (total: 40)".
	last="$(grep -E '^fuzz: elapsed:' "$log" | tail -n 1)"
	execs="$(sed -nE 's/.*execs: ([0-9]+).*/\1/p' <<<"$last")"
	newi="$(sed -nE 's/.*new interesting: ([0-9]+).*/\1/p' <<<"$last")"
	line="$(printf '%-8s %-40s %6ss execs=%-10s new=%s' "$status" "./$dir $name" "$secs" "${execs:-?}" "${newi:-?}")"
	echo "$line"
	summary+=("$line")
	if [ "$status" = FAIL ]; then
		if grep -q 'Failing input written to' "$log"; then
			grep -E -- '--- FAIL|Failing input written to|panic:|hung or terminated' "$log" | head -n 20 | sed 's/^/    /'
		else
			echo "    no failing input: the package did not build or its tests failed; see $log"
			tail -n 5 "$log" | sed 's/^/    /'
		fi
	fi
done

echo
echo "fuzz-long summary (${duration} per target):"
printf '%s\n' "${summary[@]}"
if [ "$failed" != 0 ]; then
	echo "fuzz-long: FAILURES — failing inputs are under testdata/fuzz/ of the packages above" >&2
	exit 1
fi
echo "fuzz-long: all targets passed"
