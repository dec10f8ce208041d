#!/usr/bin/env bash
# Fuzz the readers and parsers for a bounded time each.
#
#   scripts/fuzz.sh [SECONDS] [TARGET...]
#
# SECONDS per target (default 60); targets default to all of them:
# table (emg.csv/intact.csv reader, plain and gzip), manifest (session.toml),
# events (events.csv), protocol (protocol parser and checker), scenario
# (simulator scenarios). Needs cargo-fuzz (`cargo install cargo-fuzz`) and a
# nightly toolchain (`rustup toolchain install nightly`). Seeds come from
# fuzz/seeds/<target>; the growing corpus lives in fuzz/corpus/<target> and
# crashes in fuzz/artifacts/<target> (both ignored by git). A crash makes the
# script fail: turn the input into a regression test (tests/suite/robust_regressions.rs,
# input under tests/fixtures/robust/) before fixing it.
set -euo pipefail
cd "$(dirname "$0")/.."

secs="${1:-60}"
shift || true
targets=("$@")
if [ ${#targets[@]} -eq 0 ]; then
    targets=(table manifest events protocol scenario)
fi

if ! cargo +nightly fuzz --version >/dev/null 2>&1; then
    echo "fuzz.sh: needs cargo-fuzz and a nightly toolchain; skipping" >&2
    exit 0
fi

# The CSV targets write each input to a scratch file: keep it in memory.
if [ -z "${TMPDIR:-}" ] && [ -w /dev/shm ]; then
    export TMPDIR=/dev/shm
fi

failed=()
for t in "${targets[@]}"; do
    mkdir -p "fuzz/corpus/$t"
    echo "== $t: ${secs} s" >&2
    if ! cargo +nightly fuzz run "$t" "fuzz/corpus/$t" "fuzz/seeds/$t" -- \
        -max_total_time="$secs" -timeout=10 -rss_limit_mb=2048 -max_len=65536 \
        -print_final_stats=1; then
        failed+=("$t")
    fi
done

if [ ${#failed[@]} -gt 0 ]; then
    echo "fuzz.sh: crashes in: ${failed[*]} (inputs under fuzz/artifacts/)" >&2
    exit 1
fi
echo "fuzz.sh: no crash in ${targets[*]} (${secs} s each)" >&2
