#!/bin/sh
# Regenerates the demo volumes in samples/ with the exact `voxperm synth` commands listed in
# samples/README.md (tests/samples.rs checks that both agree and that the files come out byte
# for byte the same). With --measure it also runs the estimate behind each README figure.
#
# Usage: scripts/make_samples.sh [--measure]
set -eu
cd "$(dirname "$0")/.."
cargo build --release --locked --quiet
VOXPERM=target/release/voxperm

"$VOXPERM" synth sphere-pack --size 80 --porosity 0.40 --radius 10 --method relaxation --seed 7 --voxel-size 5um --out samples/bead-pack.tif
"$VOXPERM" synth fibres --size 64 --porosity 0.85 --radius 3 --orientation planar --normal z --seed 3 --voxel-size 1.5um --out samples/filter-mat.tif
"$VOXPERM" synth foam --size 80 --porosity 0.90 --cell-size 26 --method voronoi --seed 5 --voxel-size 10um --out samples/foam-plug.tif
"$VOXPERM" synth overlapping-spheres --size 64 --porosity 0.30 --radius 8 --seed 2 --voxel-size 3um --out samples/sintered-disc.tif

if [ "${1:-}" = "--measure" ]; then
    for s in bead-pack filter-mat foam-plug sintered-disc; do
        echo "== samples/$s.tif"
        /usr/bin/env time -f "%e s wall" "$VOXPERM" estimate "samples/$s.tif" --axis x --periodic
    done
fi
