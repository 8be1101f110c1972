"""The three registries (statistics, checks, formats) and the helper behind them.

Each registry is swapped for a fresh, unloaded one of the same kind, and the entry-point
lookup for a fake list of ``importlib.metadata.EntryPoint``, so every test sees a first
listing. Plugins are real modules written to a temporary folder and registered the
documented way: the decorator in the module, plus an entry point naming the class.
"""

from __future__ import annotations

import ast
import sys
import warnings
from collections.abc import Callable
from dataclasses import dataclass
from importlib.metadata import EntryPoint
from pathlib import Path
from typing import ClassVar

import pytest

from massarc.archive import registry as registry_helper
from massarc.archive import scan as scan_module
from massarc.archive.formats import registry as format_registry
from massarc.archive.formats.builtin import builtin_formats
from massarc.archive.registry import Registry
from massarc.archive.scan import Statistic
from massarc.archive.stats import builtin_statistics
from massarc.validators import Check, Option, register_check
from massarc.validators.checks import builtin_checks
from massarc.validators.checks.boundary import BoundaryCheck
from massarc.validators.checks.boundary.transfers import TransferStatistic
from massarc.validators.engine import registry as check_registry

ROOT = Path(__file__).resolve().parents[1]


@dataclass(frozen=True)
class Kind:
    """One registry under test: where it lives, its group, and a plugin of its kind."""

    module: object  # the module holding the registry object
    attr: str  # the registry object's name in it
    builtins: Callable[[], tuple[type, ...]]  # the registry's built-in loader
    group: str
    builtin: str  # a built-in key
    builtin_module: str  # a module the built-in loader imports
    decorator: str  # import line of the documented decorator
    base: str  # the base class
    body: str  # class body of a valid plugin (its key attribute comes first)

    @property
    def registry(self) -> Registry:
        return getattr(self.module, self.attr)

    def source(self, cls: str, key: str, decorated: bool = True) -> str:
        head = f"@{self.decorator.split()[-1]}\n" if decorated else ""
        return (
            f"{self.decorator}\n{self.base}\n\n\n"
            f"{head}class {cls}({self.base.split()[-1]}):\n"
            f"    {self.registry.key} = {key!r}\n{self.body}"
        )


KINDS = {
    "statistic": Kind(
        scan_module,
        "STATISTICS",
        builtin_statistics,
        "massarc.statistics",
        "snapshots",
        "massarc.archive.stats",
        "from massarc.archive.scan import register_statistic",
        "from massarc.archive.scan import Statistic",
        "    def chunk(self, chunk):\n        return len(chunk.mass)\n"
        "    def merge(self, ref, partial):\n        pass\n"
        "    def finish(self, faults):\n        return 0\n",
    ),
    "check": Kind(
        check_registry,
        "CHECKS",
        builtin_checks,
        "massarc.checks",
        "conservation",
        "massarc.validators.checks.conservation",
        "from massarc.validators import Option, register_check",
        "from massarc.validators import Check",
        '    description = "a third-party check"\n'
        '    needs = {"snapshots": {}}\n'
        '    options = {"level": Option(1.5, float, "how loud")}\n'
        "    def run(self, ctx):\n"
        '        return self.result("pass", "heard")\n',
    ),
    "format": Kind(
        format_registry,
        "FORMATS",
        builtin_formats,
        "massarc.formats",
        "text",
        "massarc.archive.formats.npz",
        "from massarc.archive.formats import register_format",
        "from massarc.archive.formats import Format",
        '    description = "a third-party format"\n'
        '    suffixes = (".dune",)\n'
        "    def read(self, path, **options):\n"
        "        raise NotImplementedError\n",
    ),
}


@pytest.fixture
def plugins(monkeypatch, tmp_path):
    """Fresh registries, and ``install(kind, {entry-point name: module source})`` that
    writes each plugin to its own module and lists its class as an entry point of the kind
    (``targets`` names another attribute for an entry point)."""
    for kind in KINDS.values():
        monkeypatch.setattr(kind.module, kind.attr, kind.registry.fresh())
    groups: dict[str, list[EntryPoint]] = {}
    monkeypatch.setattr(registry_helper, "entry_points", lambda group: groups.get(group, []))
    monkeypatch.syspath_prepend(str(tmp_path))

    def install(
        kind: Kind, sources: dict[str, str], targets: dict[str, str] | None = None
    ) -> list[EntryPoint]:
        eps = []
        for name, text in sources.items():
            module = f"massarc_test_{kind.attr.lower()}_{name.replace('-', '_')}"
            (tmp_path / f"{module}.py").write_text(text)
            monkeypatch.delitem(sys.modules, module, raising=False)
            cls = (targets or {}).get(name) or text.split("class ")[1].split("(")[0]
            eps.append(EntryPoint(name, f"{module}:{cls}", kind.group))
        groups.setdefault(kind.group, []).extend(eps)
        return eps

    return install


def _listing_without_warnings(kind: Kind) -> list[str]:
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # the documented way is not a duplicate
        return list(kind.registry.available())


# the documented way, on the first call ------------------------------------------------


@pytest.mark.parametrize("kind", KINDS.values(), ids=KINDS)
def test_a_plugin_registered_the_documented_way_appears_on_the_first_call(kind, plugins):
    plugins(kind, {"plugin": kind.source("Plugin", "test-plugin")})
    first = _listing_without_warnings(kind)
    assert first[-1] == "test-plugin" and kind.builtin in first[:-1]  # built-ins come first
    assert list(kind.registry.available()) == first  # the same on the second call
    assert kind.registry.get("test-plugin").__name__ == "Plugin"


@pytest.mark.parametrize("kind", KINDS.values(), ids=KINDS)
def test_importing_the_plugin_first_changes_nothing(kind, plugins):
    (ep,) = plugins(kind, {"plugin": kind.source("Plugin", "test-plugin")})
    ep.load()  # the user's code imports the module (its decorator runs) before any listing
    builtins = [getattr(cls, kind.registry.key) for cls in kind.builtins()]
    assert _listing_without_warnings(kind) == [*builtins, "test-plugin"]


@pytest.mark.parametrize("kind", KINDS.values(), ids=KINDS)
def test_plugins_are_listed_by_entry_point_name(kind, plugins):
    plugins(
        kind,
        {
            "zz": kind.source("Late", "test-late"),
            "aa": kind.source("Early", "test-early", decorated=False),
        },
    )
    assert _listing_without_warnings(kind)[-2:] == ["test-early", "test-late"]


@pytest.mark.parametrize("kind", KINDS.values(), ids=KINDS)
def test_the_listing_is_one_read_only_mapping(kind, plugins):
    plugins(kind, {"plugin": kind.source("Plugin", "test-plugin")})
    first = kind.registry.available()
    assert first is kind.registry.available()
    with pytest.raises(TypeError):
        first["other"] = object  # type: ignore[index]


# built-ins fail loudly -------------------------------------------------------------------


@pytest.mark.parametrize("kind", KINDS.values(), ids=KINDS)
def test_a_broken_builtin_import_fails_loudly(kind, plugins, monkeypatch):
    monkeypatch.setitem(sys.modules, kind.builtin_module, None)  # its import now fails
    for _ in range(2):  # on every listing, not only the first
        with pytest.raises(ImportError, match=kind.builtin_module.replace(".", r"\.")):
            kind.registry.available()
    monkeypatch.delitem(sys.modules, kind.builtin_module)
    assert kind.builtin in kind.registry.available()  # once repaired, it loads


def test_two_builtins_under_one_name_are_an_error():
    class A:
        name = "same"

    class B:
        name = "same"

    reg = Registry("thing", "name", "massarc.test-things", lambda c, o: None, lambda: [A, B])
    with pytest.raises(ValueError, match=r"thing name 'same' is already registered by .*A"):
        reg.available()


def test_no_builtin_registers_itself_on_import():
    """Built-ins are listed by their registry's loader, never decorated (ast, common
    practice: the loader is the only place they come from)."""
    folders = ("archive/stats", "archive/formats", "validators/checks")
    decorated = []
    for folder in folders:
        for path in sorted((ROOT / folder).rglob("*.py")):
            for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
                if isinstance(node, ast.ClassDef):
                    names = [ast.unparse(d) for d in node.decorator_list]
                    if any(n.startswith("register_") for n in names):
                        decorated.append(f"{path.relative_to(ROOT)}:{node.name}")
    assert decorated == []


# broken and duplicate plugins -------------------------------------------------------------


@pytest.mark.parametrize("kind", KINDS.values(), ids=KINDS)
def test_a_broken_plugin_warns_and_is_skipped(kind, plugins):
    sources = {
        "good": kind.source("Good", "test-good"),
        "missing": kind.source("Other", "x", decorated=False),
    }
    plugins(kind, sources, targets={"missing": "Absent"})  # no such class in the module
    with pytest.warns(UserWarning, match=rf"skipping {kind.registry.kind} plugin 'missing'"):
        found = kind.registry.available()
    assert "test-good" in found and "x" not in found


@pytest.mark.parametrize("kind", KINDS.values(), ids=KINDS)
def test_a_plugin_breaking_the_contract_warns_and_is_skipped(kind, plugins):
    text = kind.source("Nameless", "test-nameless").replace(
        f"    {kind.registry.key} = 'test-nameless'\n", f"    {kind.registry.key} = ''\n"
    )
    plugins(kind, {"nameless": text, "good": kind.source("Good", "test-good")})
    with pytest.warns(UserWarning, match=rf"Nameless\.{kind.registry.key}.*non-empty string"):
        found = kind.registry.available()
    assert "test-good" in found and "" not in found


@pytest.mark.parametrize("kind", KINDS.values(), ids=KINDS)
def test_a_duplicate_plugin_warns_and_the_first_wins(kind, plugins):
    plugins(
        kind,
        {
            "a-first": kind.source("First", "test-twice"),
            "b-second": kind.source("Second", "test-twice"),
            "clash": kind.source("Clash", kind.builtin),
        },
    )
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        found = kind.registry.available()
    text = [str(w.message) for w in caught]
    assert found["test-twice"].__name__ == "First"
    assert found[kind.builtin].__name__ != "Clash"  # a built-in is always first
    assert len(text) == 2 and all("the first registered wins" in t for t in text)
    assert any(f"reuses the {kind.registry.key} 'test-twice'" in t for t in text)
    assert any(f"reuses the {kind.registry.key} {kind.builtin!r}" in t for t in text)


# the check contract, validated at registration --------------------------------------------


def _check(**attrs):
    body = {"id": "test-bad", "description": "breaks the contract", "__module__": __name__}
    body.update(attrs)
    body["run"] = lambda self, ctx: self.result("pass", "")
    return type("Bad", (Check,), body)


@pytest.mark.parametrize(
    ("attrs", "pattern"),
    [
        (
            {"needs": {"nope": {}}},
            r"Bad\.needs names the statistic 'nope', which is not registered; "
            r"expected one of snapshots, histogram",
        ),
        (
            {"needs": {"transfers": {}}},  # boundary's own statistic is not global
            r"Bad\.needs names the statistic 'transfers'",
        ),
        (
            {"requires": ("metadata", "database")},
            r"Bad\.requires: expected words among metadata, data; got 'database'",
        ),
        (
            {"options": {"level": 1.5}},
            r"Bad\.options\['level'\]: expected Option\(default, kind, help\) declaring its "
            r"type; got 1\.5",
        ),
        ({"id": ""}, r"expected Bad\.id to be a non-empty string"),
        ({"provides": (object,)}, r"Bad\.provides: expected a subclass of .*Statistic"),
    ],
)
def test_a_check_breaking_the_contract_is_refused_at_registration(plugins, attrs, pattern):
    with pytest.raises(TypeError, match=pattern) as err:
        register_check(_check(**attrs))
    assert "test_registries" in str(err.value)  # the message names where the class is
    assert "test-bad" not in check_registry.available_checks()


def test_an_option_declares_a_type_its_default_has():
    with pytest.raises(TypeError, match=r"Option default: expected a number \(float\)"):
        Option("0.1", float, "a threshold")
    with pytest.raises(TypeError, match=r"Option kind: expected one of float, int, bool, str"):
        Option([1], list, "a list")
    with pytest.raises(TypeError, match=r"Option help: expected a non-empty string"):
        Option(1, int, "")


def test_a_check_may_bring_its_own_statistic(plugins):
    assert BoundaryCheck.statistic("transfers") is TransferStatistic
    assert "transfers" not in scan_module.available_statistics()

    class Mine(Check):
        id = "test-mine"
        description = "reads boundary's statistic by bringing it"
        needs: ClassVar = {"transfers": {"intervals": 16}}
        provides: ClassVar = (TransferStatistic,)

        def run(self, ctx):
            return self.result("pass", "")

    assert register_check(Mine) is Mine and "test-mine" in check_registry.available_checks()


def test_registering_the_same_class_twice_is_one_registration(plugins):
    cls = _check()
    assert register_check(cls) is register_check(cls) is cls
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert check_registry.available_checks()["test-bad"] is cls


def test_a_statistic_with_pairs_must_define_pair(plugins):
    class Pairless(Statistic):
        name = "test-pairless"
        pairs = True

        def chunk(self, chunk):
            return None

        def merge(self, ref, partial):
            pass

        def finish(self, faults):
            return None

    with pytest.raises(TypeError, match=r"Pairless\.pairs is true: expected it to define pair"):
        scan_module.register_statistic(Pairless)


def test_unknown_names_list_the_known_ones(plugins):
    with pytest.raises(KeyError, match=r"unknown check 'nope'; expected one of schema, "):
        check_registry.get_check("nope")
    with pytest.raises(KeyError, match=r"unknown statistic 'nope'; expected one of snapshots"):
        scan_module.get_statistic("nope")
