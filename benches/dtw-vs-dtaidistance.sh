#!/usr/bin/env bash
# Banded DTW: this crate's core beside dtaidistance's C implementation on the
# same series (formula in benches/dtw.rs), in cells per second.
# Needs: pip install -r tests/fixtures/align/requirements.txt
# Usage: benches/dtw-vs-dtaidistance.sh [n] [band radius]
set -euo pipefail
cd "$(dirname "$0")/.."
N="${1:-6000}"
R="${2:-50}"
ours="$(DTW_BENCH_N="$N" DTW_BENCH_BAND="$R" cargo bench --quiet --bench dtw 2>/dev/null)"
echo "$ours"
theirs="$(python3 - "$N" "$R" <<'PY' 2>/dev/null
import sys, time
import numpy as np
from dtaidistance import dtw

n, r = int(sys.argv[1]), int(sys.argv[2])
t = np.arange(n, dtype=float)
s = lambda t: np.sin(0.013 * t) + 0.5 * np.sin(0.071 * t + 1.0) + 0.25 * np.sin(0.37 * t)
x, y = s(t), s(t - 17.0 + 9.0 * np.sin(t / 700.0))
cells = sum(min(i + r, n - 1) - max(i - r, 0) + 1 for i in range(n))
def med(f, reps=31):
    f()
    ts = []
    for _ in range(reps):
        a = time.perf_counter(); v = f(); ts.append(time.perf_counter() - a)
    return sorted(ts)[reps // 2], v
# dtaidistance's window=w keeps |i - j| <= w - 1, so window = r + 1.
td, d = med(lambda: dtw.distance_fast(x, y, window=r + 1))
tp, (p, dp) = med(lambda: dtw.warping_path_fast(x, y, window=r + 1, include_distance=True))
print(f"dtaidistance distance_fast {cells} {td} {d * d}")
print(f"dtaidistance warping_path_fast {cells} {tp} {dp * dp}")
PY
)"
echo "$theirs" | awk '{printf "%-34s cells %9d  time %8.3f ms  %7.1f Mcells/s  distance %.9e\n", $1" "$2, $3, $4*1e3, $3/$4/1e6, $5}'
ms_of() { awk -v pat="$1" '$0 ~ pat {for (i = 1; i <= NF; i++) if ($i == "time") print $(i + 1)}'; }
ours_d=$(echo "$ours" | ms_of "symmetric1 distance")
ours_p=$(echo "$ours" | ms_of "symmetric1 with path")
ours_s=$(echo "$ours" | ms_of "slope-limited")
their_d=$(echo "$theirs" | awk '/distance_fast/ {print $4 * 1e3}')
their_p=$(echo "$theirs" | awk '/warping_path_fast/ {print $4 * 1e3}')
ratio() { awk -v a="$2" -v b="$3" -v what="$1" 'BEGIN {printf "time ratio %-52s %.2f\n", what, a / b}'; }
ratio "ours / dtaidistance, symmetric1 distance only:" "$ours_d" "$their_d"
ratio "ours / dtaidistance, symmetric1 with path:" "$ours_p" "$their_p"
ratio "ours slope-limited P=1 with path / dtaidistance path:" "$ours_s" "$their_p"
