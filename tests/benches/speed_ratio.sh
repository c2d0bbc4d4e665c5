#!/usr/bin/env bash
# flowsift's speed as ratios measured side by side in one run.
#
#   tests/benches/speed_ratio.sh            # 10^6 rows, 5 rounds (several minutes)
#   ROWS=100000 ROUNDS=3 tests/benches/speed_ratio.sh
#
# What it does, in one invocation:
# 1. builds the release binary (cargo build --release; set FLOWSIFT=path to skip) and makes
#    a Python virtual environment with pinned numpy, astropy (with scipy) and pandas under
#    target/speed-bench/venv (needs network the first time; never inside the source tree);
# 2. generates the catalogues with `flowsift mock --n $ROWS --seed 5`, as FITS and as CSV,
#    in a temporary folder on tmpfs (/dev/shm when present), so that reads and writes are
#    memory copies and the disk's write-back is not part of any time;
# 3. times, in $ROUNDS rounds whose job order is rotated from one round to the next:
#      flowsift velocities  FITS -> FITS, CSV -> CSV, FITS -> Parquet, FITS -> FITS with
#                           --monte-carlo $DRAWS,
#      the baseline         tests/benches/baseline_velocities.py, the numpy + astropy script
#                           for the same CSV -> CSV job, and its Monte Carlo on the first
#                           $PY_MC_ROWS rows (per-row ratio; the script's start-up, imports
#                           and distance grid are inside its time),
#      the I/O floor        `cat FILE > /dev/null` (reading) and `cp FILE COPY` (reading and
#                           writing as many bytes) of the same input files;
# 4. prints each ratio of wall times as the median over the rounds with the range seen,
#    every ratio formed within one round (the two runs minutes apart at most), the median
#    ratio of CPU times (user + system, less exposed to other work on the machine), the
#    load average at the start of each round, peak memory (RSS) as a ratio to the input
#    file (CPU time and RSS from /usr/bin/time, when present), and how far the baseline's
#    velocities are from flowsift's on the same rows.
#
# The same job: the baseline converts the distance modulus with D_L = (1 + z_cos) D_M(z_cos)
# (astropy's luminosity_distance), which is flowsift's `--dl-convention cosmological`
# (README.md, "Conventions and cautions"); flowsift's default `full` would give other
# velocities. So every flowsift run here is given `--dl-convention cosmological`; the cost
# of the conventions is the same. Everything else is flowsift's default and the baseline
# uses the same: flat LCDM H0 = 70, Om0 = 0.3, Omega_r = 0; the Planck 2018 CMB apex of
# src/physics/restframe.rs; the exact boost. flowsift's v_pec is the relativistic Doppler
# law and the baseline's c z_pec, so the check compares c z_pec, and v_pec both ways.
# flowsift also derives errors, eta, d_c, Galactic and supergalactic positions and a status
# per row, which the baseline does not: the ratio against the baseline understates the work
# flowsift does per second.
#
# Not part of `cargo test`: it needs Python 3 with venv and, for the first run, network
# access to PyPI.
set -euo pipefail

REPO=$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)
ROWS=${ROWS:-1000000}
ROUNDS=${ROUNDS:-5}
DRAWS=${DRAWS:-1000}
PY_MC_ROWS=${PY_MC_ROWS:-100000}
SEED=5
TARGET=${CARGO_TARGET_DIR:-$REPO/target}
VENV=$TARGET/speed-bench/venv
BASELINE=$REPO/tests/benches/baseline_velocities.py
# Pinned: the versions PyPI gave when this benchmark was written, with their dependencies
# (astropy needs scipy for FlatLambdaCDM distances).
PINS="numpy==2.4.6 astropy==8.0.2 pandas==3.1.1 pyerfa==2.0.1.5
astropy-iers-data==0.2026.11.2.0.34.55 packaging==26.4 python-dateutil==4.0.0
PyYAML==6.0.4 scipy==1.17.1 tzdata==2026.6"

if [ "$PY_MC_ROWS" -gt "$ROWS" ]; then PY_MC_ROWS=$ROWS; fi

# --- flowsift --------------------------------------------------------------------------
if [ -z "${FLOWSIFT:-}" ]; then
    echo "building the release binary (cargo build --release) ..." >&2
    cargo build --release --quiet --manifest-path "$REPO/Cargo.toml"
    FLOWSIFT=$TARGET/release/flowsift
fi
[ -x "$FLOWSIFT" ] || { echo "no flowsift binary at $FLOWSIFT" >&2; exit 1; }

# --- the baseline's environment --------------------------------------------------------
if [ ! -x "$VENV/bin/python" ] || [ "$(cat "$VENV/pins" 2>/dev/null)" != "$PINS" ]; then
    echo "making $VENV with $(echo $PINS) ..." >&2
    rm -rf "$VENV"
    python3 -m venv "$VENV"
    # shellcheck disable=SC2086
    "$VENV/bin/pip" install --quiet --disable-pip-version-check $PINS
    printf '%s' "$PINS" > "$VENV/pins"
fi
PY=$VENV/bin/python

# --- timing ----------------------------------------------------------------------------
SCRATCH=${SCRATCH:-/dev/shm}
[ -d "$SCRATCH" ] && [ -w "$SCRATCH" ] || SCRATCH=${TMPDIR:-/tmp}
WORK=$(mktemp -d "$SCRATCH/flowsift-speed.XXXXXX")
if [ -n "${KEEP_WORK:-}" ]; then
    echo "keeping $WORK" >&2
else
    trap 'rm -rf "$WORK"' EXIT
fi
TIMES=$WORK/times.tsv
: > "$TIMES"
if [ -x /usr/bin/time ]; then HAVE_TIME=1; else HAVE_TIME=; fi

# timed ROUND NAME COMMAND...: wall time (s, bash's microsecond clock), and from /usr/bin/time
# when present peak RSS (kB) and CPU time (user + system, s), appended to $TIMES.
timed() {
    local round=$1 name=$2 log=${LOG:-$WORK/$2.log} t0 t1 kb=NA cpu=NA
    shift 2
    t0=$EPOCHREALTIME
    if [ -n "$HAVE_TIME" ]; then
        /usr/bin/time -f '%M %U %S' -o "$WORK/time.out" "$@" > "$log" 2>&1 \
            || { echo "$name failed (log: $log)" >&2; exit 1; }
    else
        "$@" > "$log" 2>&1 || { echo "$name failed (log: $log)" >&2; exit 1; }
    fi
    t1=$EPOCHREALTIME
    if [ -n "$HAVE_TIME" ]; then
        read -r kb user sys < "$WORK/time.out"
        cpu=$(awk -v a="$user" -v b="$sys" 'BEGIN { printf "%.2f", a + b }')
    fi
    printf '%s\t%s\t%s\t%s\t%s\n' "$round" "$name" "$(awk -v a="$t0" -v b="$t1" \
        'BEGIN { printf "%.6f", b - a }')" "$kb" "$cpu" >> "$TIMES"
}

FS_ARGS=(--dl-convention cosmological)
# One job per line: NAME, then how to run it (outputs are removed before each run).
job() {
    local round=$1 name=$2
    case $name in
        floor_read_fits) LOG=/dev/null timed "$round" "$name" cat "$WORK/big.fits" ;;
        floor_read_csv) LOG=/dev/null timed "$round" "$name" cat "$WORK/big.csv" ;;
        floor_copy_fits) rm -f "$WORK/copy.fits"
            timed "$round" "$name" cp "$WORK/big.fits" "$WORK/copy.fits" ;;
        floor_copy_csv) rm -f "$WORK/copy.csv"
            timed "$round" "$name" cp "$WORK/big.csv" "$WORK/copy.csv" ;;
        fs_fits_fits) rm -f "$WORK/fs.fits"
            timed "$round" "$name" "$FLOWSIFT" velocities "$WORK/big.fits" -o "$WORK/fs.fits" \
                "${FS_ARGS[@]}" ;;
        fs_csv_csv) rm -f "$WORK/fs.csv" "$WORK/fs.csv.provenance.json"
            timed "$round" "$name" "$FLOWSIFT" velocities "$WORK/big.csv" -o "$WORK/fs.csv" \
                "${FS_ARGS[@]}" ;;
        fs_fits_parquet) rm -f "$WORK/fs.parquet"
            timed "$round" "$name" "$FLOWSIFT" velocities "$WORK/big.fits" \
                -o "$WORK/fs.parquet" "${FS_ARGS[@]}" ;;
        fs_fits_mc) rm -f "$WORK/fs_mc.fits"
            timed "$round" "$name" "$FLOWSIFT" velocities "$WORK/big.fits" \
                -o "$WORK/fs_mc.fits" "${FS_ARGS[@]}" --monte-carlo "$DRAWS" --seed "$SEED" ;;
        py_csv_csv) rm -f "$WORK/py.csv"
            timed "$round" "$name" "$PY" "$BASELINE" velocities "$WORK/big.csv" "$WORK/py.csv" ;;
        py_mc) rm -f "$WORK/py_mc.csv"
            timed "$round" "$name" "$PY" "$BASELINE" montecarlo "$WORK/big.csv" \
                "$WORK/py_mc.csv" --rows "$PY_MC_ROWS" --draws "$DRAWS" --seed "$SEED" ;;
    esac
}
JOBS=(floor_read_fits floor_copy_fits fs_fits_fits fs_csv_csv floor_read_csv floor_copy_csv
      py_csv_csv fs_fits_parquet fs_fits_mc py_mc)

echo "generating $ROWS rows (flowsift mock --seed $SEED) in $WORK ..." >&2
"$FLOWSIFT" mock -o "$WORK/big.fits" --n "$ROWS" --seed "$SEED" > "$WORK/mock.log" 2>&1
"$FLOWSIFT" mock -o "$WORK/big.csv" --n "$ROWS" --seed "$SEED" >> "$WORK/mock.log" 2>&1
# Warm-up, not recorded: the page cache, the binary and Python's compiled modules.
for name in "${JOBS[@]}"; do job warmup "$name"; done
: > "$TIMES"

LOADS=
n=${#JOBS[@]}
for ((r = 1; r <= ROUNDS; r++)); do
    echo "round $r of $ROUNDS ..." >&2
    LOADS="$LOADS $(cut -d' ' -f1 /proc/loadavg 2>/dev/null || echo NA)"
    for ((i = 0; i < n; i++)); do job "$r" "${JOBS[$(((i + r - 1) % n))]}"; done
done

# --- report ----------------------------------------------------------------------------
CPU=$(grep -m1 'model name' /proc/cpuinfo 2>/dev/null | cut -d: -f2- | sed 's/^ *//')
echo
echo "machine: $(nproc) cores${CPU:+ ($CPU)}, $(uname -sr); $("$FLOWSIFT" --version 2>/dev/null | head -1)"
echo "catalogue: $ROWS rows, FITS $(stat -c %s "$WORK/big.fits") B, CSV $(stat -c %s "$WORK/big.csv") B;" \
     "baseline Monte Carlo on $PY_MC_ROWS rows; $DRAWS draws per row; $ROUNDS rounds"
echo "load average (1 min) at the start of each round:$LOADS (above $(nproc), other work" \
     "shared the cores)"
"$PY" "$BASELINE" summary "$TIMES" "$ROWS" "$PY_MC_ROWS" "$WORK/big.fits" "$WORK/big.csv"
echo
"$PY" "$BASELINE" compare "$WORK/fs.csv" "$WORK/py.csv" \
    --mc-flowsift "$WORK/fs_mc.fits" --mc-baseline "$WORK/py_mc.csv" --draws "$DRAWS"
