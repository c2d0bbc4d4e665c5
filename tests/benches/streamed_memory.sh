#!/usr/bin/env bash
# Peak memory of `velocities` on a catalogue far larger than its memory limit, and the same
# catalogue split into 12 Parquet files giving the same result.
#
#   tests/benches/streamed_memory.sh                 # 3 x 10^7 rows (needs ~40 GB of disk)
#   ROWS=2000000 tests/benches/streamed_memory.sh    # a quick look
#
# What it does, in one invocation:
# 1. builds the release binary (set FLOWSIFT=path to skip) and a Python virtual environment
#    with pinned pyarrow under target/speed-bench/venv (network the first time), which only
#    splits and compares files;
# 2. generates the invented demo scenario with `flowsift mock --n $ROWS --seed 11` as one
#    Parquet file in $WORK (default: a temporary folder under target/, on disk);
# 3. runs `flowsift velocities` on it under /usr/bin/time with the default memory limit (a
#    quarter of the machine's memory) and prints the peak resident memory, the blocks the
#    run used and the output's row count, which must equal the input's;
# 4. splits the catalogue into 12 Parquet files of unequal sizes under Hive-style folders,
#    runs `velocities` on the folder (again timed), and checks that the 12 output files,
#    concatenated in path order, equal the one-file output column by column.
#
# Not part of `cargo test` (minutes, tens of GB of disk, network for the first venv).
set -euo pipefail

REPO=$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)
ROWS=${ROWS:-30000000}
TARGET=${CARGO_TARGET_DIR:-$REPO/target}
if [[ -z "${FLOWSIFT:-}" ]]; then
    (cd "$REPO" && cargo build --release -q)
    FLOWSIFT="$TARGET/release/flowsift"
fi
VENV="$TARGET/speed-bench/venv"
if [[ ! -x "$VENV/bin/python" ]]; then
    python3 -m venv "$VENV"
fi
"$VENV/bin/pip" install -q pyarrow==26.0.1
PY="$VENV/bin/python"

WORK=${WORK:-$(mktemp -d "$TARGET/streamed-memory.XXXXXX")}
trap 'rm -rf "$WORK"' EXIT
echo "rows: $ROWS; files in $WORK"

"$FLOWSIFT" mock --scenario lantern --n "$ROWS" --seed 11 -o "$WORK/big.parquet" >/dev/null

peak() { # command... : runs it, prints its summary lines and its peak RSS in MB
    /usr/bin/time -f "%M %e" -o "$WORK/time.txt" "$@" >"$WORK/summary.txt"
    grep -E "blocks of|^read|rows" "$WORK/summary.txt" | head -4
    read -r kb secs <"$WORK/time.txt"
    echo "peak resident memory: $((kb / 1024)) MB; wall time ${secs} s"
}

echo "== one file"
peak "$FLOWSIFT" velocities "$WORK/big.parquet" -o "$WORK/out.parquet"

"$PY" - "$WORK" <<'EOF'
import sys, pathlib
import pyarrow.parquet as pq
work = pathlib.Path(sys.argv[1])
n = pq.ParquetFile(work / "big.parquet").metadata.num_rows
m = pq.ParquetFile(work / "out.parquet").metadata.num_rows
print(f"rows in {n}, rows out {m}")
assert n == m, "a row was added or dropped"
# 12 files of unequal sizes (k^2 n / 144), in two Hive-style folders, names in row order.
t = pq.read_table(work / "big.parquet")
cuts = [k * k * n // 144 for k in range(13)]
for p in range(12):
    d = work / "survey" / ("half=a" if p < 6 else "half=b")
    d.mkdir(parents=True, exist_ok=True)
    pq.write_table(t.slice(cuts[p], cuts[p + 1] - cuts[p]), d / f"part-{p:02d}.parquet")
EOF

echo "== 12 files"
peak "$FLOWSIFT" velocities "$WORK/survey" -o "$WORK/out_survey"

"$PY" - "$WORK" <<'EOF'
import sys, pathlib
import pyarrow.parquet as pq
work = pathlib.Path(sys.argv[1])
one = pq.ParquetFile(work / "out.parquet")
parts = sorted((work / "out_survey").rglob("*.parquet"), key=lambda p: str(p.relative_to(work / "out_survey")))
assert len(parts) == 12, parts
columns = one.schema_arrow.names
# Compared a row group at a time against the matching rows of the split output, so that
# memory stays bounded.
readers = [pq.ParquetFile(p) for p in parts]
def split_rows():
    for r in readers:
        for g in range(r.num_row_groups):
            yield r.read_row_group(g, columns=columns)
pending, rows = None, 0
stream = split_rows()
for g in range(one.num_row_groups):
    want = one.read_row_group(g, columns=columns)
    have = []
    got = 0
    while got < want.num_rows:
        if pending is None:
            pending = next(stream)
        take = min(want.num_rows - got, pending.num_rows)
        have.append(pending.slice(0, take))
        pending = pending.slice(take) if take < pending.num_rows else None
        got += take
    import pyarrow as pa
    have = pa.concat_tables(have).select(columns)
    for name in columns:
        if not want.column(name).equals(have.column(name)):
            sys.exit(f"column {name} differs in rows {rows}..{rows + want.num_rows}")
    rows += want.num_rows
print(f"12 files equal the one-file output, {rows} rows, {len(columns)} columns")
EOF
