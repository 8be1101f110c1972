"""The converters' module layout: each format module stands alone, and every built-in format
is registered.

A format module is one that defines a :class:`~massarc.archive.formats.Format` subclass.
What several formats need lives in private shared modules (``_arrays``, ``_axes``, ...), so
that removing one format module breaks no other module of the package.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import massarc.archive.formats as formats_package
from massarc.archive.formats import available_formats

PACKAGE = "massarc.archive.formats"
FOLDER = Path(formats_package.__file__).parent
#: The one module allowed to import the format modules: it registers the built-ins.
REGISTERS_BUILTINS = "builtin"
#: The stable names of the built-in formats (``--from``/``--to``, ``--list-formats``).
BUILTIN_NAMES = {
    "csv-long",
    "csv-wide",
    "events",
    "hdf5",
    "netcdf",
    "npy",
    "npz",
    "positions",
    "text",
    "zarr",
}


def _modules() -> dict[str, ast.Module]:
    return {p.stem: ast.parse(p.read_text(encoding="utf-8")) for p in FOLDER.glob("*.py")}


def _defines_format(tree: ast.Module) -> bool:
    for node in tree.body:
        if isinstance(node, ast.ClassDef):
            for base in node.bases:
                name = base.id if isinstance(base, ast.Name) else getattr(base, "attr", "")
                if name == "Format":
                    return True
    return False


def _format_modules() -> set[str]:
    return {name for name, tree in _modules().items() if _defines_format(tree)}


def _siblings_imported(tree: ast.Module) -> set[str]:
    """Modules of this package that ``tree`` imports, anywhere (also inside functions)."""
    found: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level == 1:
                if node.module:
                    found.add(node.module.split(".")[0])
                else:
                    found.update(alias.name for alias in node.names)
            elif node.level == 0 and (node.module or "").startswith(PACKAGE + "."):
                found.add(node.module[len(PACKAGE) + 1 :].split(".")[0])  # type: ignore[index]
            elif node.level == 0 and node.module == PACKAGE:
                found.update(alias.name for alias in node.names)
        elif isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.startswith(PACKAGE + "."):
                    found.add(alias.name[len(PACKAGE) + 1 :].split(".")[0])
    return found


def test_no_module_imports_a_format_module() -> None:
    format_modules = _format_modules()
    offences = []
    for name, tree in sorted(_modules().items()):
        if name == REGISTERS_BUILTINS:
            continue
        for sibling in sorted(_siblings_imported(tree) & format_modules - {name}):
            offences.append(f"{name}.py imports the format module {sibling}")
    assert not offences, "; ".join(offences) + " (move what they share to a private module)"


def test_removing_any_one_format_module_breaks_no_other_module() -> None:
    """Every other module of the package still imports with one format module gone."""
    code = f"""
import importlib, sys
package = {PACKAGE!r}
names = {sorted(p.stem for p in FOLDER.glob("*.py") if p.stem != "__init__")!r}
formats = {sorted(_format_modules())!r}
broken = []
for gone in formats:
    for key in [k for k in sys.modules if k == package or k.startswith(package + ".")]:
        del sys.modules[key]
    sys.modules[package + "." + gone] = None  # an import of it raises ImportError
    for name in names:
        if name in (gone, {REGISTERS_BUILTINS!r}):
            continue
        try:
            importlib.import_module(package + "." + name)
        except ImportError as exc:
            broken.append(f"without {{gone}}: {{name}}: {{exc}}")
    del sys.modules[package + "." + gone]
print("\\n".join(broken) or "ok")
"""
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "ok", out.stdout


def test_the_registry_finds_every_builtin_format() -> None:
    registered = available_formats()
    assert set(registered) >= BUILTIN_NAMES
    modules = {cls.__module__ for name, cls in registered.items() if name in BUILTIN_NAMES}
    # one module of this package per built-in format ...
    assert {m.rsplit(".", 1)[0] for m in modules} == {PACKAGE}
    assert len(modules) == len(BUILTIN_NAMES)
    # ... and exactly those are the format modules the import tests above look at
    assert {m.rsplit(".", 1)[1] for m in modules} == _format_modules()
