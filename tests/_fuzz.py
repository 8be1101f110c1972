"""Mutation fuzzing of what reads untrusted bytes: the metadata parser, every format reader
and the archive opener (with the content digest of ``massarc verify``).

A case takes a valid sample input (a seed), applies a few byte mutations drawn by
hypothesis (bit flips, truncation, insertion of random bytes or of tokens known to hurt
parsers, overwrites, splices of the input into itself) and feeds the result to one target.
The only outcomes allowed are success and a clean massarc error
(:class:`~massarc.archive.ArchiveError`, :class:`~massarc.schema.MetadataError`); anything
else is a failure, recorded by its signature (exception type and the innermost frame of
massarc) so that one defect hit many times counts once.

Used by ``tests/test_fuzz.py`` (a short, derandomised campaign) and ``bench/fuzz.py`` (the
long one). Inputs stay small (a few KB), so a case cannot allocate much unless massarc
trusts a size it reads; the bench runs under an address-space cap besides.
"""

from __future__ import annotations

import hashlib
import shutil
import tempfile
import traceback
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from hypothesis import HealthCheck, Phase, given, seed, settings
from hypothesis import strategies as st

from massarc.archive import ArchiveError, open_run, open_runs
from massarc.archive.digest import content_digest
from massarc.archive.formats import convert, get_format, resolve_metadata
from massarc.schema import MetadataError, parse_header, parse_metadata, read_metadata_file

__all__ = ["CLEAN", "Campaign", "Failure", "mutate", "mutations", "run_cases", "targets"]

ROOT = Path(__file__).resolve().parent.parent
FIXTURES = ROOT / "tests" / "fixtures" / "v1.1"
#: The errors massarc promises for bad input.
CLEAN: tuple[type[BaseException], ...] = (ArchiveError, MetadataError)

#: Byte strings that tend to break parsers: huge and negative numbers, non-finite floats,
#: a byte-order mark, deep nesting, codec and dtype names, separators, NUL.
TOKENS = (
    b"-1",
    b"0",
    b"1e400",
    b"-0.0",
    b"NaN",
    b"Infinity",
    b"99999999999999999999999",
    b"\xef\xbb\xbf",
    b"[" * 80,
    b"{" * 80,
    b'"',
    b",",
    b"\n",
    b"\r\n",
    b"\x00",
    b"\xff\xfe",
    b"# replica 1\n",
    b"# massarc-meta: {}\n",
    b'"uint64"',
    b'"float32"',
    b'"gzip"',
    b'"vlen-bytes"',
    b'"sharding_indexed"',
    b"[1000000000000000, 1]",
    b"null",
    b"true",
)

#: One mutation: (kind, position, payload); positions wrap around the input's length.
Mutation = tuple[str, int, bytes]


def mutations(max_ops: int = 4) -> st.SearchStrategy[list[Mutation]]:
    """A list of 1..max_ops byte mutations."""
    pos = st.integers(0, 1 << 16)
    op = st.one_of(
        st.tuples(st.just("flip"), pos, st.binary(min_size=1, max_size=1)),
        st.tuples(st.just("truncate"), pos, st.just(b"")),
        st.tuples(st.just("insert"), pos, st.binary(min_size=1, max_size=32)),
        st.tuples(st.just("insert"), pos, st.sampled_from(TOKENS)),
        st.tuples(st.just("overwrite"), pos, st.binary(min_size=1, max_size=16)),
        st.tuples(st.just("overwrite"), pos, st.sampled_from(TOKENS)),
        st.tuples(st.just("splice"), pos, st.binary(min_size=2, max_size=2)),
        st.tuples(st.just("random"), pos, st.binary(max_size=256)),
    )
    return st.lists(op, min_size=1, max_size=max_ops)


def mutate(data: bytes, ops: list[Mutation]) -> bytes:
    """Apply ``ops`` to ``data`` in order (a pure function of its arguments)."""
    buf = bytearray(data)
    for kind, pos, payload in ops:
        n = len(buf)
        at = pos % (n + 1)
        if kind == "flip" and n:
            buf[pos % n] ^= 1 << (payload[0] % 8)
        elif kind == "truncate":
            del buf[at:]
        elif kind == "insert":
            buf[at:at] = payload
        elif kind == "overwrite":
            buf[at : at + len(payload)] = payload
        elif kind == "splice" and n and len(payload) >= 2:  # copy a stretch elsewhere
            src, length = payload[0] * n // 256, 1 + payload[1] * n // 256
            buf[at:at] = buf[src : src + length]
        elif kind == "random":
            buf = bytearray(payload)
    return bytes(buf)


@dataclass
class Failure:
    """A distinct failure: its signature, one message, how often it was hit, a reproducer."""

    signature: str
    message: str
    count: int = 0
    example: str = ""


@dataclass
class Target:
    """One thing to fuzz: seed files and a function run on a mutated copy.

    ``member`` picks which seed file (of a directory seed: which file inside) is mutated;
    ``run(path)`` feeds the mutated input to massarc.
    """

    name: str
    seed: Path
    run: Callable[[Path], Any]
    suffix: str = ""


def _signature(exc: BaseException) -> str:
    """Exception type and the innermost traceback frame inside massarc (or the last one)."""
    frames = traceback.extract_tb(exc.__traceback__)
    ours = [
        f for f in frames if f.filename.startswith(f"{ROOT}/") and "site-packages" not in f.filename
    ]
    frame = (ours or frames or [None])[-1]
    where = "?" if frame is None else f"{Path(frame.filename).name}:{frame.lineno}"
    return f"{type(exc).__name__} at {where}"


@dataclass
class Campaign:
    """Seeds prepared in a scratch directory, the targets, and what the cases found."""

    work: Path
    targets: dict[str, Target] = field(default_factory=dict)
    cases: dict[str, int] = field(default_factory=dict)
    failures: dict[str, dict[str, Failure]] = field(default_factory=dict)
    keep: Path | None = None

    def case(self, target: str, member: int, ops: list[Mutation]) -> str | None:
        """Run one case; return the failure signature, or None when the outcome is allowed."""
        t = self.targets[target]
        files = _files(t.seed)
        rel = files[member % len(files)]
        original = (t.seed / rel).read_bytes() if t.seed.is_dir() else t.seed.read_bytes()
        data = mutate(original, ops)
        path = t.seed / rel if t.seed.is_dir() else self.work / f"case-{target}{t.suffix}"
        path.write_bytes(data)
        self.cases[target] = self.cases.get(target, 0) + 1
        try:
            t.run(t.seed if t.seed.is_dir() else path)
        except CLEAN:
            return None
        except Exception as exc:  # any other exception is what we are looking for
            sig = _signature(exc)
            found = self.failures.setdefault(target, {})
            fail = found.get(sig) or Failure(sig, " ".join(str(exc).split())[:300])
            fail.count += 1
            if not fail.example and self.keep is not None:
                name = f"{target}-{hashlib.sha256(sig.encode()).hexdigest()[:12]}-{rel}"
                out = self.keep / name.replace("/", "_")
                out.parent.mkdir(parents=True, exist_ok=True)
                out.write_bytes(data)
                fail.example = str(out)
            found[sig] = fail
            return sig
        finally:
            if t.seed.is_dir():
                (t.seed / rel).write_bytes(original)
        return None


def _files(seed: Path) -> list[str]:
    if not seed.is_dir():
        return [""]
    return sorted(str(p.relative_to(seed)) for p in seed.rglob("*") if p.is_file())


# -- the targets --------------------------------------------------------------------------

_META = {
    "model": {"family": "zrp", "b": 3.5, "drift": "asymmetric"},
    "lattice": {"sites": [8], "boundary": "periodic"},
    "run": {"regime": "stationary", "seeds": [11, 12], "time_units": "sweeps"},
}


def _metadata_file(path: Path) -> None:
    parse_metadata(read_metadata_file(path), str(path))


def _header(path: Path) -> None:
    from massarc.schema import load_json

    try:
        raw = load_json(path.read_bytes())
    except ValueError as exc:  # what the opener reports for a zarr.json that is not JSON
        raise ArchiveError(str(exc)) from None
    parse_header(raw.get("attributes", {}).get("massarc") if isinstance(raw, dict) else raw)


def _reader(name: str, meta_file: Path | None) -> Callable[[Path], None]:
    def run(path: Path) -> None:
        fmt = get_format(name)
        with fmt.read(path) as source:
            meta = resolve_metadata(source.hints(), meta_file, [], source.name, source.mapped())
            for _ in source.batches(meta, 4):
                pass

    return run


def _opener(path: Path) -> None:
    """What ``check``, ``info`` and ``verify`` do before the statistics: open, read the
    header, the times, every chunk, and the content digest."""
    for run in open_runs(path, lenient=True):
        if run.meta is None:
            continue
        _ = run.times
        for _chunk in run.chunks():
            pass
    run = open_run(path)
    content_digest(run)


def targets(work: Path) -> dict[str, Target]:
    """Prepare seed inputs under ``work`` and return the targets by name: the metadata
    parser (TOML, JSON, the header), every registered format reader, and the archive
    opener (a directory run and a zip store)."""
    work.mkdir(parents=True, exist_ok=True)
    run = FIXTURES / "zrp-ring-1d.zarr"
    meta_toml = work / "meta.toml"
    shutil.copy(ROOT / "samples" / "depot-ring.toml", meta_toml)
    meta_json = work / "meta.json"
    import json

    meta_json.write_text(json.dumps(_META), encoding="utf-8")
    header = work / "header.json"
    shutil.copy(run / "zarr.json", header)
    out: dict[str, Target] = {
        "metadata-toml": Target("metadata-toml", meta_toml, _metadata_file, ".toml"),
        "metadata-json": Target("metadata-json", meta_json, _metadata_file, ".json"),
        "header": Target("header", header, _header, ".json"),
    }
    from massarc.archive.formats import available_formats

    for name, cls in available_formats().items():
        if name == "zarr":
            continue  # the archive opener below
        suffix = cls.suffixes[0]
        seed = work / f"seed-{name}{suffix}"
        if name == "events":
            shutil.copy(FIXTURES / "ring.events", seed)
        elif not seed.exists():  # seeds are never mutated in place: reuse them
            convert(run, seed, dst_format=name)
        for variant, meta_file in (("", None), ("+meta", meta_json)):
            key = f"format-{name}{variant}"
            out[key] = Target(key, seed, _reader(name, meta_file), suffix)
    archive = work / "run.zarr"  # mutated in place and restored: copied afresh
    shutil.rmtree(archive, ignore_errors=True)
    shutil.copytree(run, archive)
    out["archive"] = Target("archive", archive, _opener)
    zipped = work / "seed.zarr.zip"
    shutil.copy(FIXTURES / "ring.zarr.zip", zipped)
    out["archive-zip"] = Target("archive-zip", zipped, _opener, ".zarr.zip")
    return out


def new_campaign(work: Path | None = None, keep: Path | None = None) -> Campaign:
    """A campaign over every target, its seeds prepared in ``work`` (a temporary directory
    when None)."""
    work = Path(tempfile.mkdtemp(prefix="massarc-fuzz-")) if work is None else work
    return Campaign(work, targets(work), keep=keep)


def run_cases(
    campaign: Campaign,
    target: str,
    n: int,
    *,
    seed_value: int | None = None,
    before: Callable[[int, list[Mutation]], None] | None = None,
    fail_fast: bool = False,
) -> None:
    """Run ``n`` cases of ``target`` drawn by hypothesis: derandomised when ``seed_value``
    is None, else from that seed; generation only (a case never fails hypothesis unless
    ``fail_fast``, so there is nothing to shrink). ``before(member, ops)`` is called before
    each case (the bench notes the case it is about to run)."""

    @settings(
        max_examples=n,
        derandomize=seed_value is None,
        database=None,
        deadline=None,
        phases=[Phase.generate],
        suppress_health_check=list(HealthCheck),
    )
    @given(member=st.integers(0, 1 << 10), ops=mutations())
    def case(member: int, ops: list[Mutation]) -> None:
        if before is not None:
            before(member, ops)
        signature = campaign.case(target, member, ops)
        if fail_fast:
            found = campaign.failures.get(target, {})
            assert signature is None, (signature, found[signature].message if signature else "")

    if seed_value is not None:
        case = seed(seed_value)(case)
    case()
