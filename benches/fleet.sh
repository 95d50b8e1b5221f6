#!/usr/bin/env bash
# Fleet-scale speed benchmark for `flue import hourly` and `flue report annual`,
# against a pandas script that only reads the same CSV and sums the same
# yearly totals (benches/pandas_totals.py). See benches/README.md.
#
# usage: benches/fleet.sh [--sizes "100 1000"] [--skip-1000] [--rounds N] [--work DIR] [--keep]
#   --sizes      fleet sizes in units (8,760 rows each); default "100 1000"
#   --skip-1000  drop the 1,000-unit fleet (8.76 M rows, ~600 MB CSV, ~1 GB ledger)
#   --rounds N   timed rounds per size, each running every contender in turn;
#                the table gives each figure's median (default 5)
#   --work DIR   scratch directory (default /tmp/flue-bench); data are removed after each size
#   --keep       keep the generated data and ledgers
# PANDAS_PYTHON=/path/to/python uses an interpreter that already has pandas;
# otherwise system python3 is used if it has pandas, else a venv is made in DIR/venv.
set -euo pipefail

sizes="100 1000"
work=/tmp/flue-bench
keep=0
rounds=5
while [ $# -gt 0 ]; do
    case "$1" in
        --sizes) sizes="$2"; shift 2 ;;
        --skip-1000) sizes="$(echo " $sizes " | sed 's/ 1000 / /g')"; shift ;;
        --work) work="$2"; shift 2 ;;
        --keep) keep=1; shift ;;
        --rounds) rounds="$2"; shift 2 ;;
        -h|--help) sed -n '2,15p' "$0" | sed 's/^# \{0,1\}//'; exit 0 ;;
        *) echo "fleet.sh: unknown argument $1" >&2; exit 2 ;;
    esac
done

repo="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
mkdir -p "$work"
work="$(cd "$work" && pwd)"
[ -x /usr/bin/time ] || { echo "fleet.sh: needs GNU time at /usr/bin/time" >&2; exit 1; }

echo "== build (cargo build --release; generator via cargo bench)"
(cd "$repo" && cargo build --release --quiet)
(cd "$repo" && cargo bench --quiet --bench gen_hourly --no-run 2>/dev/null || cargo bench --bench gen_hourly --no-run)
flue="$repo/target/release/flue"
rev="$(cd "$repo" && git rev-parse --short HEAD 2>/dev/null || echo unknown)"
dirty="$(cd "$repo" && git status --porcelain --untracked-files=no -- src Cargo.toml 2>/dev/null | head -1)"
[ -n "$dirty" ] && rev="$rev+uncommitted"

gen() { # gen UNITS DIR [extra generator args]
    local n="$1" dir="$2"; shift 2
    (cd "$repo" && cargo bench --quiet --bench gen_hourly -- --units "$n" --out "$dir" "$@")
}

echo "== python with pandas"
py="${PANDAS_PYTHON:-}"
if [ -z "$py" ]; then
    if python3 -c 'import pandas' 2>/dev/null; then
        py=python3
    else
        if [ ! -x "$work/venv/bin/python" ] || ! "$work/venv/bin/python" -c 'import pandas' 2>/dev/null; then
            python3 -m venv "$work/venv"
            "$work/venv/bin/pip" install --quiet pandas
        fi
        py="$work/venv/bin/python"
    fi
fi
pandas_version="$("$py" -c 'import pandas; print(pandas.__version__)')"
echo "pandas $pandas_version ($py)"

# timed NAME CMD... : run CMD under GNU time; sets T_WALL (s) and T_RSS (KiB).
timed() {
    local name="$1"; shift
    local tf="$work/time.$name"
    if ! /usr/bin/time -f '%e %M' -o "$tf" "$@" > "$work/out.$name" 2> "$work/err.$name"; then
        echo "fleet.sh: $name failed:" >&2
        tail -20 "$work/err.$name" >&2
        exit 1
    fi
    read -r T_WALL T_RSS < <(tail -1 "$tf")
}

fresh_ledger() { # fresh_ledger DIR -> DIR/flue.db with the site loaded (untimed)
    rm -f "$1/flue.db" "$1/flue.db-wal" "$1/flue.db-shm" "$1/flue.db-journal"
    "$flue" --ledger "$1/flue.db" init > /dev/null
    "$flue" --ledger "$1/flue.db" site load "$1/site.toml" > /dev/null
}

# compare FLUE_JSON PANDAS_JSON : largest relative difference of the fleet totals, in %.
compare() {
    "$py" - "$1" "$2" <<'EOF'
import json, sys
r = json.load(open(sys.argv[1])); p = json.load(open(sys.argv[2]))
keys = ["operating_hours", "heat_input_mmbtu", "so2_tons", "nox_tons", "co2_tons"]
flue = {k: sum(float(u[k]) for u in r["units"]) for k in keys}
worst = 0.0
for k in keys:
    a, b = flue[k], p["totals"][k]
    worst = max(worst, abs(a - b) / abs(b) * 100 if b else abs(a))
print(f"{worst:.6f}")
EOF
}

echo "== totals check: 10 units without blanks, flue vs pandas"
check="$work/check"
rm -rf "$check"
gen 10 "$check" --blank-pct 0 > /dev/null
fresh_ledger "$check"
"$flue" --ledger "$check/flue.db" import hourly "$check/hourly.csv" > /dev/null
"$flue" --ledger "$check/flue.db" report annual --year 2025 --format json > "$check/report.json"
"$py" "$repo/benches/pandas_totals.py" "$check/hourly.csv" "$check/pandas.json"
check_diff="$(compare "$check/report.json" "$check/pandas.json")"
[ "$keep" = 1 ] || rm -rf "$check"

# median V... : the middle value (the lower middle of an even count).
median() { printf '%s\n' "$@" | sort -g | awk '{ v[NR] = $1 } END { print v[int((NR + 1) / 2)] }'; }

declare -A R
for n in $sizes; do
    dir="$work/fleet$n"
    rm -rf "$dir"
    echo "== $n units: generate"
    gen "$n" "$dir"
    rows=$(( $(wc -l < "$dir/hourly.csv") - 1 ))
    mb=$(du -m "$dir/hourly.csv" | cut -f1)
    R[$n,rows]=$rows; R[$n,mb]=$mb
    # Warm the page cache the same way for every contender.
    cat "$dir/hourly.csv" > /dev/null

    # Each round runs every contender once, in turn, so that a slow spell of
    # the machine falls on all of them; the table gives the medians.
    for round in $(seq 1 "$rounds"); do
        echo "== $n units: round $round of $rounds: import, report, import+report, pandas"
        fresh_ledger "$dir"
        timed import "$flue" --ledger "$dir/flue.db" import hourly "$dir/hourly.csv"
        R[$n,iw]+=" $T_WALL"; R[$n,ir]+=" $T_RSS"
        R[$n,db]=$(du -m "$dir/flue.db" | cut -f1)
        timed report "$flue" --ledger "$dir/flue.db" report annual --year 2025 --format json
        R[$n,rw]+=" $T_WALL"; R[$n,rr]+=" $T_RSS"
        cp "$work/out.report" "$dir/report.json"
        fresh_ledger "$dir"
        timed both bash -c '"$1" --ledger "$2/flue.db" import hourly "$2/hourly.csv" > /dev/null && "$1" --ledger "$2/flue.db" report annual --year 2025 --format json' _ "$flue" "$dir"
        R[$n,bw]+=" $T_WALL"; R[$n,br]+=" $T_RSS"
        rm -f "$dir/flue.db"*
        timed pandas "$py" "$repo/benches/pandas_totals.py" "$dir/hourly.csv" "$dir/pandas.json"
        R[$n,pw]+=" $T_WALL"; R[$n,pr]+=" $T_RSS"
    done
    for k in iw ir rw rr bw br pw pr; do
        R[$n,${k}_all]="${R[$n,$k]# }"
        R[$n,$k]="$(median ${R[$n,$k]})"
    done
    R[$n,diff]="$(compare "$dir/report.json" "$dir/pandas.json")"
    [ "$keep" = 1 ] || rm -rf "$dir"
done

rate() { awk -v r="$1" -v t="$2" 'BEGIN { if (t > 0) printf "%.3f", r / t / 1e6; else print "inf" }'; }
mib() { awk -v k="$1" 'BEGIN { printf "%.1f", k / 1024 }'; }

echo
echo "flue fleet benchmark  $(date -u +%Y-%m-%dT%H:%MZ)  flue $rev  $(nproc) cores  $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | sed 's/^ //')"
echo "pandas $pandas_version; CSV in the page cache for every run; peak RSS is GNU time's maximum resident set"
echo "each figure is the median of $rounds rounds; every round ran all four contenders in turn"
echo
printf '%-7s %10s %7s | %-22s %9s %12s %10s\n' units rows csv_MB run wall_s "M rows/s" peak_MiB
for n in $sizes; do
    rows=${R[$n,rows]}
    first=1
    for run in "import:iw:ir" "report:rw:rr" "import+report:bw:br" "pandas:pw:pr"; do
        IFS=: read -r name w r <<< "$run"
        if [ $first = 1 ]; then lead="$(printf '%-7s %10s %7s' "$n" "$rows" "${R[$n,mb]}")"; first=0
        else lead="$(printf '%-7s %10s %7s' '' '' '')"; fi
        printf '%s | %-22s %9s %12s %10s\n' "$lead" "$name" "${R[$n,$w]}" "$(rate "$rows" "${R[$n,$w]}")" "$(mib "${R[$n,$r]}")"
    done
    echo "        ledger after import: ${R[$n,db]} MB; fleet totals flue vs pandas differ by at most ${R[$n,diff]} % (pandas does no missing-data substitution)"
    echo "        every round's wall_s: import ${R[$n,iw_all]} | report ${R[$n,rw_all]} | import+report ${R[$n,bw_all]} | pandas ${R[$n,pw_all]}"
done

echo
echo "targets"
verdict() { if [ "$1" = 1 ]; then echo PASS; else echo FAIL; fi; }
ok=$(awk -v d="$check_diff" 'BEGIN { print (d <= 0.05) ? 1 : 0 }')
printf '  %-4s totals without blanks equal pandas within 0.05 %% (10 units): largest difference %s %%\n' "$(verdict "$ok")" "$check_diff"
if [ -n "${R[100,bw]:-}" ]; then
    ok=$(awk -v a="${R[100,bw]}" -v b="${R[100,pw]}" 'BEGIN { print (a < b) ? 1 : 0 }')
    printf '  %-4s import+report of 876k rows faster than pandas (medians): %s s vs %s s\n' "$(verdict "$ok")" "${R[100,bw]}" "${R[100,pw]}"
else
    echo "  n/a  import+report of 876k rows faster than pandas: 100-unit fleet not run"
fi
if [ -n "${R[1000,bw]:-}" ]; then
    r="$(rate "${R[1000,rows]}" "${R[1000,bw]}")"
    ok=$(awk -v r="$r" 'BEGIN { print (r >= 1.0) ? 1 : 0 }')
    printf '  %-4s >= 1.0 M rows/s at 8.76 M rows (import+report wall): %s M rows/s (import alone %s)\n' "$(verdict "$ok")" "$r" "$(rate "${R[1000,rows]}" "${R[1000,iw]}")"
else
    echo "  n/a  >= 1.0 M rows/s at 8.76 M rows: 1000-unit fleet not run (--skip-1000)"
fi
peak=0
for n in $sizes; do
    for v in ${R[$n,ir_all]} ${R[$n,rr_all]} ${R[$n,br_all]}; do [ "$v" -gt "$peak" ] && peak=$v; done
done
ok=$(( peak <= 204800 ? 1 : 0 ))
printf '  %-4s peak RSS <= 200 MiB at every size run (%s): %s MiB\n' "$(verdict "$ok")" "$(echo $sizes | sed 's/ /, /g') units" "$(mib "$peak")"
rm -f "$work"/time.* "$work"/out.* "$work"/err.*
