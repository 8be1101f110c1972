"""The long fuzzing campaign: mutated inputs against every target of tests/_fuzz.py.

    nice -n 10 .venv/bin/python bench/fuzz.py                  # 100,000 cases, resumable
    nice -n 10 .venv/bin/python bench/fuzz.py --cases 200000   # go on to 200,000
    .venv/bin/python bench/fuzz.py --summary                   # print what was found
    nice -n 10 .venv/bin/python bench/fuzz.py --targets format-hdf5,format-netcdf --rounds 3

The campaign runs in rounds: one round gives every target ``--per-round`` cases (the HDF5
and NetCDF readers, whose every case starts a child process, 1/20 of them) drawn by
hypothesis with a seed fixed by (round, target), so a round is reproducible. Each round of
each target runs in a worker process under an address-space cap (``RLIMIT_AS``, 2 GiB, the
pattern of tests/_hostile.py); the worker notes the case it is about to run, and the parent
kills a worker that makes no progress for ``--stall`` seconds and records a hang with that
case. A worker killed by the cap, or dying, is a failure too. After every round the state
(cases per target, distinct failures with a count, a message and a reproducer file) is
written atomically to ``bench/out/fuzz.json`` after every target, so an interrupted
campaign resumes where it stopped. ``--targets`` restricts a campaign to the targets whose
names start with one of the given prefixes (a round then counts for those only), and
``--rounds`` stops it after that many rounds. Results go into docs/fuzzing.md by hand, from
``--summary``.
"""

from __future__ import annotations

import argparse
import contextlib
import json
import os
import resource
import signal
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
OUT = HERE / "out"
STATE = OUT / "fuzz.json"
#: Targets whose every case starts a child process (the structure probe of the HDF5 and
#: NetCDF readers, archive/formats/_native.py): they get 1/NATIVE_SHARE of the cases.
NATIVE = ("format-hdf5", "format-netcdf")
NATIVE_SHARE = 20
#: Address space of a worker (see tests/_hostile.py for what an honest run reserves).
CAP = 2 << 30


def _worker(target: str, round_: int, n: int, work: Path, note: Path) -> dict:
    """Run ``n`` cases of ``target``; return cases and failures (runs in the child)."""
    sys.path.insert(0, str(ROOT / "tests"))
    from _fuzz import new_campaign, run_cases

    campaign = new_campaign(OUT / "fuzz-work" / "seeds", keep=OUT / "fuzz-failures")
    if target not in campaign.targets:
        raise SystemExit(f"unknown target {target}")

    def before(member: int, ops: list) -> None:
        done = campaign.cases.get(target, 0)
        hexed = [[k, p, b.hex()] for k, p, b in ops]
        note.write_text(json.dumps({"done": done, "member": member, "ops": hexed}))

    index = sorted(campaign.targets).index(target)
    run_cases(campaign, target, n, seed_value=round_ * 1009 + index, before=before)
    return {
        "cases": campaign.cases.get(target, 0),
        "failures": {
            sig: {"message": f.message, "count": f.count, "example": f.example}
            for sig, f in campaign.failures.get(target, {}).items()
        },
    }


def _limit() -> None:
    resource.setrlimit(resource.RLIMIT_AS, (CAP, CAP))


def _run_worker(target: str, round_: int, n: int, stall: float) -> dict:
    work = OUT / "fuzz-work" / target
    work.mkdir(parents=True, exist_ok=True)
    note, result = work / "current.json", work / "result.json"
    for p in (note, result):
        p.unlink(missing_ok=True)
    env = {**os.environ, "MASSARC_PURE": "1", "MALLOC_ARENA_MAX": "2", "OMP_NUM_THREADS": "1"}
    args = [sys.executable, __file__, "--worker", target, str(round_), str(n), str(work)]
    proc = subprocess.Popen(args, env=env, preexec_fn=_limit, stderr=subprocess.PIPE, text=True)
    try:
        return _watch(proc, note, result, stall)
    finally:  # the parent stopped (Ctrl-C, kill): no orphaned worker
        if proc.poll() is None:
            proc.kill()
            proc.wait()


def _watch(proc: subprocess.Popen, note: Path, result: Path, stall: float) -> dict:
    """Wait for a worker; kill it when its note of the current case goes stale."""
    last = time.monotonic()
    while proc.poll() is None:
        time.sleep(1.0)
        with contextlib.suppress(FileNotFoundError):
            last = max(last, note.stat().st_mtime - time.time() + time.monotonic())
        if time.monotonic() - last > stall:
            proc.kill()
            proc.wait()
            case = note.read_text() if note.exists() else "{}"
            return {"cases": _done(case) + 1, "hang": case}
    err = proc.stderr.read() if proc.stderr else ""
    if proc.returncode != 0 or not result.exists():
        case = note.read_text() if note.exists() else "{}"
        return {
            "cases": _done(case) + 1,
            "died": f"exit {proc.returncode}: {err.strip()[-300:]}",
            "case": case,
        }
    return json.loads(result.read_text())


def _done(note: str) -> int:
    try:
        return int(json.loads(note).get("done", 0))
    except (ValueError, AttributeError):
        return 0


def _save(state: dict) -> None:
    tmp = STATE.with_suffix(".tmp")
    tmp.write_text(json.dumps(state, indent=1, sort_keys=True))
    os.replace(tmp, STATE)


def _merge(state: dict, target: str, got: dict) -> None:
    t = state["targets"].setdefault(target, {"cases": 0, "failures": {}})
    t["cases"] += got.get("cases", 0)
    extra = {}
    if "hang" in got:
        extra["hang (no progress; killed)"] = {"message": got["hang"], "count": 1, "example": ""}
    if "died" in got:
        extra[f"worker died ({got['died'][:60]})"] = {
            "message": got["died"],
            "count": 1,
            "example": got.get("case", ""),
        }
    for sig, f in {**got.get("failures", {}), **extra}.items():
        have = t["failures"].setdefault(sig, {**f, "count": 0})
        have["count"] += f["count"]


def _summary(state: dict) -> str:
    lines = [f"rounds done: {state['rounds']}, cases: {state['total']}"]
    for name, t in sorted(state["targets"].items()):
        lines.append(f"  {name:<24} {t['cases']:>7} cases, {len(t['failures'])} distinct failures")
        for sig, f in t["failures"].items():
            lines.append(f"      {sig} x{f['count']}: {f['message'][:160]}")
    return "\n".join(lines)


def main(argv: list[str]) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=100_000, help="total cases to reach")
    ap.add_argument("--per-round", type=int, default=400, help="cases per target per round")
    ap.add_argument("--stall", type=float, default=150.0, help="seconds without progress")
    ap.add_argument("--summary", action="store_true")
    ap.add_argument("--targets", default="", help="comma-separated prefixes of target names")
    ap.add_argument("--rounds", type=int, default=0, help="stop after this many rounds")
    ap.add_argument("--worker", nargs=4, metavar=("TARGET", "ROUND", "N", "WORK"))
    args = ap.parse_args(argv)
    signal.signal(signal.SIGTERM, lambda *_: sys.exit(143))  # runs the finally clauses
    if args.worker:
        target, round_, n, work = args.worker
        out = _worker(target, int(round_), int(n), Path(work), Path(work) / "current.json")
        (Path(work) / "result.json").write_text(json.dumps(out))
        return 0
    OUT.mkdir(exist_ok=True)
    state = json.loads(STATE.read_text()) if STATE.exists() else {}
    state = {"rounds": 0, "total": 0, "targets": {}, **state}
    if args.summary:
        print(_summary(state))
        return 0
    sys.path.insert(0, str(ROOT / "tests"))
    from _fuzz import new_campaign

    names = sorted(new_campaign(OUT / "fuzz-work" / "seeds").targets)
    if args.targets:
        names = [n for n in names if n.startswith(tuple(args.targets.split(",")))]
    rounds = 0
    while state["total"] < args.cases and not (args.rounds and rounds >= args.rounds):
        rounds += 1
        t0 = time.monotonic()
        for name in names:
            if name in state.get("in_round", []):
                continue  # done before an interruption
            n = args.per_round // NATIVE_SHARE if name.startswith(NATIVE) else args.per_round
            got = _run_worker(name, state["rounds"], max(1, n), args.stall)
            _merge(state, name, got)
            state["in_round"] = [*state.get("in_round", []), name]
            state["total"] = sum(t["cases"] for t in state["targets"].values())
            _save(state)  # after every target: an interrupted round resumes where it stopped
        state["rounds"] += 1
        state["in_round"] = []
        _save(state)
        print(f"round {state['rounds']}: {state['total']} cases, {time.monotonic() - t0:.0f} s")
        print(_summary(state), flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
