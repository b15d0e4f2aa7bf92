#!/usr/bin/env bash
# Bounded fuzzing of the CSV profile reader and the scenario parser with cargo-fuzz.
#
#   fuzz/run.sh [SECONDS_PER_TARGET]      (default 30)
#
# Installs cargo-fuzz if it is missing, builds the targets (stable toolchain, with
# RUSTC_BOOTSTRAP=1 for the flags cargo-fuzz passes; no sanitizer, since the code is safe
# Rust and what is hunted is panics, hangs and memory growth), seeds the corpora from the
# test data and bundled scenarios, and runs each target for the given time.
#
# Exit status: 0 when every target ran clean, or when fuzzing cannot run on this machine
# (the reason is printed); 1 when a target found an input that panics, hangs (> 10 s) or
# uses more than 2 GB: the input is kept under fuzz/artifacts/<target>/.
set -uo pipefail
cd "$(dirname "$0")"
secs="${1:-30}"
skip() {
    echo "fuzz: skipped, $*"
    exit 0
}

export RUSTC_BOOTSTRAP=1
if ! cargo fuzz --version >/dev/null 2>&1; then
    echo "fuzz: installing cargo-fuzz"
    cargo install cargo-fuzz --locked >install.log 2>&1 ||
        { tail -5 install.log; skip "cargo-fuzz could not be installed (see above)"; }
fi
command -v c++ >/dev/null 2>&1 || skip "no C++ compiler to build libFuzzer"

echo "fuzz: building the targets"
cargo fuzz build -O -s none >build.log 2>&1 ||
    { tail -20 build.log; skip "the targets did not build here (see above)"; }

mkdir -p corpus/csv_reader corpus/scenario
for f in ../tests/data/profiles/*.csv ../tests/data/bad/*.csv; do
    # Two leading bytes choose the reading options; zero bytes are the defaults.
    printf '\000\000' | cat - "$f" >"corpus/csv_reader/seed-$(basename "$f")"
done
cp ../scenarios/*.toml corpus/scenario/
for f in ../tests/data/bad/*.toml; do cp "$f" "corpus/scenario/seed-$(basename "$f")"; done

status=0
for t in csv_reader scenario; do
    echo "fuzz: $t for $secs s"
    rm -rf "artifacts/$t"
    cargo fuzz run -O -s none "$t" "corpus/$t" -- \
        -max_total_time="$secs" -max_len=4096 -timeout=10 -rss_limit_mb=2048 \
        -dict="dict/$t.dict" -print_final_stats=1 >"run-$t.log" 2>&1
    rc=$?
    if [ -n "$(ls -A "artifacts/$t" 2>/dev/null)" ]; then
        tail -40 "run-$t.log"
        echo "fuzz: $t FOUND a failing input: fuzz/artifacts/$t/$(ls "artifacts/$t" | head -1)"
        echo "      reproduce with: RUSTC_BOOTSTRAP=1 cargo fuzz run -O -s none $t fuzz/artifacts/$t/<file>"
        status=1
    elif [ "$rc" -ne 0 ]; then
        tail -20 "run-$t.log"
        echo "fuzz: $t could not run here (exit $rc, see above); going on"
    else
        runs=$(grep -o 'stat::number_of_executed_units: *[0-9]*' "run-$t.log" | grep -o '[0-9]*$')
        echo "fuzz: $t clean, ${runs:-?} inputs"
    fi
done
exit "$status"
