#!/usr/bin/env bash
# Runs `voxperm bench` (memory bandwidth and kernel MLUPS in one run) and records the machine
# beside the figures: docs/bench/bench-<UTC time>.{txt,json,md}. Extra arguments go to
# `voxperm bench` (e.g. --quick, --sizes 64,128). Set BENCH_OUT to write elsewhere.
set -euo pipefail
cd "$(dirname "$0")/.."
out=${BENCH_OUT:-docs/bench}
mkdir -p "$out"
cargo build --release --locked --quiet
stamp=$(date -u +%Y%m%dT%H%M%SZ)
base="$out/bench-$stamp"

cpu=$(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2- | sed 's/^ *//' || echo unknown)
cores=$(nproc)
mem_kib=$(awk '/MemTotal/ {print $2}' /proc/meminfo)
flags=$(grep -m1 '^flags' /proc/cpuinfo || true)
simd=""
for f in avx2 fma avx512f avx512vl; do
    case " $flags " in *" $f "*) simd="$simd $f" ;; esac
done
caches=$(lscpu 2>/dev/null | grep -E '^(L1d|L2|L3) cache' | sed 's/  */ /g' | paste -sd ';' - || true)
load=$(cut -d' ' -f1-3 /proc/loadavg)
# Transparent huge pages: the solver asks for them (madvise); "never" here would cost speed.
thp=$(cat /sys/kernel/mm/transparent_hugepage/enabled 2>/dev/null || echo unknown)

target/release/voxperm bench "$@" --json "$base.json" | tee "$base.txt"

{
    echo "# voxperm bench, $stamp"
    echo
    echo "| machine | |"
    echo "| --- | --- |"
    echo "| CPU | $cpu |"
    echo "| cores | $cores |"
    echo "| memory | $((mem_kib / 1024)) MiB |"
    echo "| SIMD | ${simd# } |"
    echo "| caches | ${caches:-unknown} |"
    echo "| load average at start | $load |"
    echo "| transparent huge pages | $thp |"
    echo "| command | voxperm bench $* |"
    echo
    echo '```'
    cat "$base.txt"
    echo '```'
} > "$base.md"

# The machine record, also as JSON beside the figures.
printf '{"cpu": "%s", "cores": %s, "memory_kib": %s, "simd": "%s", "load_average": "%s", "transparent_huge_pages": "%s", "bench": "%s"}\n' \
    "$cpu" "$cores" "$mem_kib" "${simd# }" "$load" "$thp" "$(basename "$base.json")" > "$base.machine.json"
echo "wrote $base.md, $base.json, $base.machine.json" >&2
