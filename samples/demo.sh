#!/usr/bin/env bash
# `make demo`: the main job on the bundled samples. Usage: demo.sh BIN_DIR WORK_DIR
set -euo pipefail
BIN=$(cd "${1:-.venv/bin}" && pwd)
cd "$(dirname "$0")/.."
WORK=${2:-build/demo}
rm -rf "$WORK" && mkdir -p "$WORK"
M="$BIN/massarc"
PY="$BIN/python"
say() { printf '\n== %s\n\n' "$*"; }

say "1. What the sample runs are (massarc info)"
"$M" info samples/*.zarr

say "2. Audit the whole collection: the mislabelled run must fail (massarc check samples)"
set +e
"$M" check samples
rc=$?
set -e
if [ "$rc" -ne 1 ]; then
  echo "demo: expected exit status 1 (a check failed), got $rc" >&2
  exit 1
fi
echo "(exit status 1: the audit caught the run that claims a steady state it never reached)"

say "3. The two honest runs on their own (exit status 0; warnings do not fail)"
"$M" check samples/depot-ring.zarr samples/dune-strip.zarr --quiet
echo "(exit status 0)"

say "4. The same audit for a CI dashboard and for scripts"
"$M" check samples --as junit --output "$WORK/audit.xml" || true
"$M" check samples --as json --output "$WORK/audit.json" || true
"$PY" - "$WORK/audit.json" <<'PY'
import json, sys
report = json.load(open(sys.argv[1]))
for run in report["runs"]:
    bad = [c["id"] for c in run["checks"] if c["status"] in ("warn", "fail", "error")]
    print(f"{run['path']}: {run['status']}" + (f" ({', '.join(bad)})" if bad else ""))
PY
echo "JUnit XML written to $WORK/audit.xml"

say "5. Trade a run: export to plain text, import it back without --meta, compare"
"$M" convert samples/dune-strip.zarr "$WORK/dune-strip.txt" --quiet
head -c 400 "$WORK/dune-strip.txt" | cut -c1-110
echo "..."
"$M" convert "$WORK/dune-strip.txt" "$WORK/dune-strip-again.zarr" --quiet
"$PY" - samples/dune-strip.zarr "$WORK/dune-strip-again.zarr" <<'PY'
import sys
import numpy as np
from massarc import open_run
a, b = (open_run(p) for p in sys.argv[1:])
same = np.array_equal(a.mass[:], b.mass[:]) and np.array_equal(a.times, b.times)
print("round trip bit-exact:", same, "| metadata equal:", a.meta == b.meta)
sys.exit(0 if same else 1)
PY

say "6. Archive a run live, as a simulator prints it (massarc ingest -)"
"$M" convert samples/depot-ring.zarr "$WORK/printed.txt" --quiet
cat "$WORK/printed.txt" | "$M" ingest - "$WORK/live.zarr"
"$M" info "$WORK/live.zarr"

say "7. The observables groups publish, stored in each run (massarc summarize)"
mkdir -p "$WORK/sweep"
cp -r samples/*.zarr "$WORK/sweep/"   # summarize writes into the runs: keep samples/ as is
"$M" summarize "$WORK/sweep" --quiet --export csv "$WORK/observables"
echo "(run again: the stored summaries are up to date, nothing is recomputed)"
"$M" summarize "$WORK/sweep" --quiet --as json | "$PY" -c '
import json, sys
runs = json.load(sys.stdin)["runs"]
print("recomputed", sum(r["row"]["computed"] for r in runs), "of", len(runs), "runs")'

say "8. The coarsening dune strip: variance of the largest mass and growth exponent"
"$PY" - "$WORK/sweep/dune-strip.zarr" <<'PY'
import sys
import numpy as np
from massarc import open_run
s = open_run(sys.argv[1]).summaries
t, var, ci = s.array("probe_time"), s.array("largest_mass_var"), s.array("largest_mass_var_ci")
probe = s.array("probe_snapshot")
print(f"{'t (days)':>10} {'var(largest mass)':>18} {'95 % interval':>18}")
for k in np.linspace(0, len(probe) - 1, 9).round().astype(int):
    lo, hi = ci[k]
    print(f"{t[k]:10.1f} {var[probe[k]]:18.1f} {f'{lo:.1f} .. {hi:.1f}':>18}")
g = s.attrs("typical_mass_mean")["growth"]
print(f"typical condensate mass ~ t^a: a = {g['exponent']:.3f} +- {g['stderr']:.3f} "
      f"({g['error_method']}) over t = {g['start']:.3g} .. {g['stop']:.3g}; "
      f"expected 1/z = {g['expected']:.3g}")
PY
echo "CSV files for other plotting tools are in $WORK/observables/"

say "9. Figures from the stored summaries (massarc plot; the runs are only read)"
"$M" plot "$WORK/sweep/dune-strip.zarr" coarsening -o "$WORK/dune-strip-coarsening.png"
"$M" plot "$WORK/sweep/depot-ring.zarr" occupation -o "$WORK/depot-ring-occupation.svg"
"$M" plot "$WORK/sweep/depot-ring-unsettled.zarr" space-time -o "$WORK/depot-ring-unsettled.pdf"
ls "$WORK"/*.png "$WORK"/*.svg "$WORK"/*.pdf

say "10. One page for a referee: audit, metadata, summaries and figures (massarc report)"
"$M" report "$WORK/sweep" -o "$WORK/report.html" --quiet
echo "report page of the samples written to $WORK/report.html (open it in a browser)"

say "Done. Outputs are in $WORK/"
