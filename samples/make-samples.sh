#!/usr/bin/env bash
# Regenerate the committed sample archives (run from the repository root:
# `make samples`, or `bash samples/make-samples.sh .venv/bin`). The runs are seeded, so
# the same massarc version gives the same numbers.
set -euo pipefail
BIN=$(cd "${1:-.venv/bin}" && pwd)
cd "$(dirname "$0")"

# 1. Depot ring, honestly stationary: started from an exact steady-state sample and run
#    for six relaxation times (asymmetric ZRP: L^2 = 4096 hours), a snapshot every 2 hours
#    so that single hops (and the seam of the ring) can be resolved.
"$BIN/massarc" sample depot-ring.zarr --meta depot-ring.toml --density 1.5 \
  --replicas 4 --seed 1 --t-max 24576 --snapshots 12288 --initial steady-state \
  --overwrite --quiet

# 2. Dune strip, coarsening from an even spread of sand, declared transient.
"$BIN/massarc" sample dune-strip.zarr --meta dune-strip.toml --density 2 \
  --replicas 4 --seed 2 --t-max 4096 --snapshots 512 --spacing log --initial uniform \
  --overwrite --quiet

# 3. Depot ring, mislabelled: the same railway with two-way traffic, started from wagons
#    scattered at random and stopped long before the symmetric ZRP relaxes (L^3 = 262144
#    hours), yet declared stationary. `massarc check` must fail it.
"$BIN/massarc" sample depot-ring-unsettled.zarr --meta depot-ring.toml --density 1.5 \
  --set model.drift=symmetric --set extra.scenario="depot ring, two-way, mislabelled" \
  --replicas 4 --seed 3 --t-max 8192 --snapshots 1024 --initial random \
  --overwrite --quiet
