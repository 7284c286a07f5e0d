#!/usr/bin/env bash
# The instruction-set comparison of DEVELOPERS.md ("Build flags and instruction set"): the kernel
# harness's Wilson-Dirac point built at the x86-64 baseline, at x86-64-v3 and for this CPU
# (native), run in interleaved rounds so that all three see the same machine load; prints the
# best and median one-thread time of each. Usage: benches/studies/compare_builds.sh [rounds] (default 12).
set -euo pipefail
cd "$(dirname "$0")/../.."
rounds=${1:-12}
declare -A bin
for level in x86-64 x86-64-v3 native; do
    dir=target/levels/$level
    RUSTFLAGS="-C target-cpu=$level" CARGO_TARGET_DIR=$dir \
        cargo bench --quiet --no-default-features --features faer --bench kernels --no-run 2>/dev/null
    bin[$level]=$(ls -t "$dir"/release/deps/kernels-* | grep -v '\.d$' | head -1)
done
out=$(mktemp)
for _ in $(seq "$rounds"); do
    for level in x86-64 x86-64-v3 native; do
        t=$(KERNEL_BENCH_SKIP_GENERIC=1 "${bin[$level]}" point | grep -o 'one thread [0-9.]*' | grep -o '[0-9.]*$')
        echo "$level $t" >>"$out"
    done
done
for level in x86-64 x86-64-v3 native; do
    grep "^$level " "$out" | awk '{print $2}' | sort -g |
        awk -v l="$level" '{t[NR]=$1} END {printf "%-10s one thread: best %.3f ms, median %.3f ms (%d rounds)\n", l, t[1], t[int((NR+1)/2)], NR}'
done
rm -f "$out"
