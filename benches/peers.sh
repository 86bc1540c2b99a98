#!/usr/bin/env bash
# Peer comparison (a benchmark, not a test): times resinlot and, when they are installed,
# DuckDB, polars and pandas on the same generated 1,000,000-lot PD-2000 trend file, and prints
# medians of RUNS whole-process runs (default 5) with peak resident memory.
#
#   bash benches/peers.sh            # builds the release binary; generates the file if missing
#
# The file is the one `cargo bench --bench record` writes (target/bench-record, invented
# benchmark values). The peers compute only what the I-MR chart needs: the latest row per lot,
# manufacture order, x̄, MR̄ and the limits (NIST/SEMATECH e-Handbook §6.3.2.2), for
# hydroxyl_value; resinlot computes the whole trend (run rules, capability, normality) besides.
# A peer that is not installed is skipped with the reason; nothing is installed here.
set -euo pipefail
cd "$(dirname "$0")/.."
RUNS=${RUNS:-5}
DIR=target/bench-record
FILE=$DIR/register/PD-2000.csv
PY=${PYTHON:-python3}

cargo build --release --quiet
BIN=$PWD/target/release/resinlot
if [ ! -f "$FILE" ]; then
    echo "generating $FILE (cargo bench --bench record) ..."
    cargo bench --quiet --bench record >/dev/null
fi

echo "machine: $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | sed 's/^ //'), $(free -g | awk '/Mem:/ {print $2}') GB RAM"
echo "file: $FILE, $(($(stat -c %s "$FILE") / 1000000)) MB; $RUNS runs each; load average before: $(cut -d' ' -f1-3 /proc/loadavg)"
printf '%-58s %10s %10s %10s\n' "work" "median s" "min s" "peak MB"
SCRIPTS=$(mktemp -d)
trap 'rm -rf "$SCRIPTS"' EXIT

# Runs "$@" RUNS times in $DIR; prints the median and minimum wall time and the largest peak RSS.
measure() {
    local name=$1
    shift
    local times=() peak=0 out
    for _ in $(seq "$RUNS"); do
        # Exit 1 is an answer (trend found a signal); 2 and above is a failure.
        local rc=0
        (cd "$DIR" && /usr/bin/time -o "$SCRIPTS/time" -f '%e %M' "$@" >/dev/null 2>"$SCRIPTS/err") || rc=$?
        if [ "$rc" -gt 1 ]; then
            echo "$name: failed (exit $rc): $(tail -3 "$SCRIPTS/err")"
            return 0
        fi
        out=$(tail -1 "$SCRIPTS/time")
        times+=("${out% *}")
        local kb=${out#* }
        [ "$kb" -gt "$peak" ] && peak=$kb
    done
    local sorted
    sorted=$(printf '%s\n' "${times[@]}" | sort -g)
    printf '%-58s %10s %10s %10d\n' "$name" "$(echo "$sorted" | sed -n "$(((RUNS + 1) / 2))p")" \
        "$(echo "$sorted" | head -1)" "$((peak / 1024))"
}

measure "resinlot trend --property hydroxyl_value --json" \
    "$BIN" trend PD-2000 --property hydroxyl_value --json
# All eight properties: opt-in (ALL=1), because it takes several times longer than the rest
# (about 5 s CPU and 1 GB on this file; see README, Performance).
if [ "${ALL:-0}" = 1 ]; then
    measure "resinlot trend (all 8 properties) --json" "$BIN" trend PD-2000 --json
fi
measure "resinlot find, two narrow windows" \
    "$BIN" find --product PD-2000 --where mn=1995..2000 --where acid_value=..0.3
measure "resinlot find, two broad windows, --csv" \
    "$BIN" find --product PD-2000 --where mn=1950..2050 --where acid_value=..0.5 --csv
measure "resinlot lookup B0500000 (lot index current)" "$BIN" lookup B0500000

cat >"$SCRIPTS/duckdb_imr.py" <<'EOF'
import sys, duckdb
con = duckdb.connect()
n, mean, mr = con.execute("""
WITH latest AS (
  SELECT seq, lot, manufactured, hydroxyl_value FROM read_csv_auto(?, header = true)
  QUALIFY row_number() OVER (PARTITION BY lot ORDER BY seq DESC) = 1),
ordered AS (
  SELECT hydroxyl_value AS x,
         lag(hydroxyl_value) OVER (ORDER BY manufactured, seq) AS prev
  FROM latest WHERE hydroxyl_value IS NOT NULL)
SELECT count(*), avg(x), avg(abs(x - prev)) FROM ordered""", [sys.argv[1]]).fetchone()
s = mr / 1.128
print(n, mean, mr, mean - 3 * s, mean + 3 * s, 3.267 * mr)
EOF

cat >"$SCRIPTS/polars_imr.py" <<'EOF'
import sys, polars as pl
df = (pl.scan_csv(sys.argv[1], schema_overrides={"lot": pl.Utf8})
      .select(["seq", "lot", "manufactured", "hydroxyl_value"])
      .sort("seq").unique(subset="lot", keep="last")
      .sort(["manufactured", "seq"]).drop_nulls("hydroxyl_value").collect())
x = df["hydroxyl_value"]
mean, mr = x.mean(), x.diff().abs().mean()
s = mr / 1.128
print(len(x), mean, mr, mean - 3 * s, mean + 3 * s, 3.267 * mr)
EOF

ABS_FILE=$PWD/$FILE
peer() {
    local name=$1 module=$2 script=$3
    if ! command -v "$PY" >/dev/null; then
        echo "$name: skipped ($PY not found)"
    elif ! "$PY" -c "import $module" 2>/dev/null; then
        echo "$name: skipped (Python module '$module' is not installed: pip install $module)"
    else
        measure "$name (latest row per lot + I-MR limits)" "$PY" "$script" "$ABS_FILE"
    fi
}
peer "DuckDB $("$PY" -c 'import duckdb; print(duckdb.__version__)' 2>/dev/null || true)" duckdb "$SCRIPTS/duckdb_imr.py"
peer "polars $("$PY" -c 'import polars; print(polars.__version__)' 2>/dev/null || true)" polars "$SCRIPTS/polars_imr.py"
peer "pandas $("$PY" -c 'import pandas; print(pandas.__version__)' 2>/dev/null || true)" pandas "$PWD/benches/imr_pandas.py"
echo "load average after: $(cut -d' ' -f1-3 /proc/loadavg)"
