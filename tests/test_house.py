"""The house (GUIDE.md, "The house"; DEVELOPERS.md): which package may import which, read from
the source with ``ast``; no module outside the faces prints or reads stdin; every error class
lives in ``benchgate/errors.py``.

A violation found here is fixed in the code, not by widening the table. The few that are
known and owned by someone are listed in KNOWN_* below with who removes them; the test fails
when a known violation is gone (so the list shrinks) as well as when a new one appears.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

SRC = Path(__file__).resolve().parents[1] / "src" / "benchgate"

# The shared bottom layer: the nouns package, the error hierarchy, the package's own
# ``__version__`` and the time source (``clock``: monotonic time and sleeping, which
# instruments, the understudy bench and the runner all take; it imports nothing of ours).
SHARED = {"common", "errors", "__init__", "clock"}

#: package (or top-level module) -> what it may import directly, besides SHARED. What those
#: may import is allowed too (the table's "may import" is transitive: judge may use units
#: because plan may).
MAY_IMPORT: dict[str, set[str]] = {
    "common": set(),
    "errors": set(),
    "clock": set(),
    "__init__": set(),
    "units": set(),
    "analysis": {"units"},
    "plan": {"units"},
    "judge": {"analysis", "plan"},
    "instruments": {"analysis"},
    "sim": {"instruments"},  # the protocol codecs only: see SIM_CODECS
    # evidence of a run; capfile (capture files) belongs to it
    "record": {"judge", "analysis"},
    "capfile": {"judge", "analysis", "record"},
    "report": {"judge", "analysis", "record", "capfile"},
    "store": {"judge", "analysis", "record", "capfile"},
    # the runner orchestrates every layer below the faces (the diagram's runner -> record ->
    # report/store: it writes the evidence)
    "runner": {"units", "analysis", "plan", "judge", "instruments", "sim", "record", "capfile",
               "report", "store"},
}
FACES = {"cli", "pytest_plugin", "__main__", "web"}  # may import anything (web: the operator page)
#: the modules of ``instruments`` the understudy bench may share (wire formats, no drivers)
SIM_CODECS = {"benchgate.instruments.framing"}

# Known violations, each with who removes it (issue 10). Keep this list short and honest.
KNOWN_IMPORTS: dict[tuple[str, str], str] = {
    # none left: instruments/__init__.py no longer builds run records (instr helper, issue 10)
}
KNOWN_TERMINAL: dict[tuple[str, str], str] = {
    # none left: the runner talks to the person at the bench through one typed interface
    # (runner/attendant.py; the terminal faces are cli/terminal.py)
}
KNOWN_ERROR_CLASSES: dict[tuple[str, str], str] = {
    # the emulated instrument's own command error: a reply code for its SCPI error queue
    # inside the understudy bench, never raised to a user of benchgate
    ("sim/scpi_parse.py", "ScpiCommandError"): "stays: a simulated instrument's protocol signal",
}


def _closure(name: str) -> set[str]:
    seen: set[str] = set()
    todo = [name]
    while todo:
        for dep in MAY_IMPORT.get(todo.pop(), set()) | SHARED:
            if dep not in seen:
                seen.add(dep)
                todo.append(dep)
    return seen


def _unit(module: str) -> str:
    """``benchgate.plan.loader`` -> ``plan``; ``benchgate`` -> ``__init__``."""
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else "__init__"


def _module_name(path: Path) -> str:
    rel = path.relative_to(SRC.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _sources() -> list[Path]:
    return sorted(SRC.rglob("*.py"))


def _imports(path: Path) -> list[tuple[str, int]]:
    """Every benchgate module ``path`` imports (at any depth, lazy imports included)."""
    mod = _module_name(path)
    package = mod if path.name == "__init__.py" else mod.rpartition(".")[0]
    out = []
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            out += [(a.name, node.lineno) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")[: len(package.split(".")) - node.level + 1]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            out.append((target, node.lineno))
            # "from benchgate import record" imports the module benchgate.record
            if target in ("benchgate", package):
                out += [(f"{target}.{a.name}", node.lineno) for a in node.names
                        if (SRC.parent / target.replace(".", "/") / a.name).exists()
                        or (SRC.parent / target.replace(".", "/") / f"{a.name}.py").exists()]
    return [(t, line) for t, line in out if t == "benchgate" or t.startswith("benchgate.")]


def _import_violations() -> dict[tuple[str, str], str]:
    found: dict[tuple[str, str], str] = {}
    for path in _sources():
        rel = path.relative_to(SRC).as_posix()
        owner = _unit(_module_name(path))
        if owner in FACES:
            continue
        assert owner in MAY_IMPORT, f"{rel}: package {owner!r} is not in the house table"
        allowed = _closure(owner) | {owner}
        for target, line in _imports(path):
            unit = _unit(target)
            if unit == owner:
                continue
            if owner == "sim" and unit == "instruments":
                if target not in SIM_CODECS and target != "benchgate.instruments":
                    found[(rel, target)] = f"{rel}:{line}: sim may use only the codecs {sorted(SIM_CODECS)}"
                continue
            if unit not in allowed:
                found[(rel, target)] = f"{rel}:{line}: {owner} imports {target} ({unit} is not allowed)"
    return found


def test_every_package_imports_only_what_the_house_allows():
    found = _import_violations()
    new = [msg for key, msg in found.items() if key not in KNOWN_IMPORTS]
    assert not new, "imports that break the house:\n" + "\n".join(new)


def test_known_import_violations_are_still_there():
    # when one is fixed, remove it from KNOWN_IMPORTS so that it cannot come back
    gone = [f"{k[0]} -> {k[1]} ({who})" for k, who in KNOWN_IMPORTS.items() if k not in _import_violations()]
    assert not gone, "fixed, remove from KNOWN_IMPORTS: " + "; ".join(gone)


def test_the_bottom_layer_imports_nothing_of_ours_above_it():
    # the shared nouns and the errors: nothing but each other
    for path in [*sorted((SRC / "common").rglob("*.py")), SRC / "errors.py", SRC / "clock.py"]:
        for target, line in _imports(path):
            assert _unit(target) in {"common", "errors"}, f"{path.relative_to(SRC)}:{line}: imports {target}"


def _terminal_use(path: Path) -> list[tuple[str, int]]:
    out = []
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id in ("print", "input"):
            out.append((node.func.id, node.lineno))
        elif isinstance(node, ast.Attribute) and node.attr == "stdin":
            out.append(("stdin", node.lineno))
        elif isinstance(node, (ast.Import, ast.ImportFrom)):
            names = [a.name for a in node.names] if isinstance(node, ast.Import) else [node.module or ""]
            if any(n == "rich" or n.startswith("rich.") for n in names):
                out.append(("rich", node.lineno))
    return out


def test_only_the_faces_print_or_read_stdin():
    found: dict[tuple[str, str], str] = {}
    for path in _sources():
        rel = path.relative_to(SRC).as_posix()
        if _unit(_module_name(path)) in FACES:
            continue
        for what, line in _terminal_use(path):
            found.setdefault((rel, what), f"{rel}:{line}: {what}")
    new = [msg for key, msg in found.items() if key not in KNOWN_TERMINAL]
    assert not new, "terminal use outside cli/ and the pytest plugin:\n" + "\n".join(new)
    gone = [f"{k} ({who})" for k, who in KNOWN_TERMINAL.items() if k not in found]
    assert not gone, "fixed, remove from KNOWN_TERMINAL: " + "; ".join(gone)


def _exception_classes(path: Path) -> list[tuple[str, int]]:
    out = []
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ClassDef):
            bases = {b.id if isinstance(b, ast.Name) else getattr(b, "attr", "") for b in node.bases}
            if any(b.endswith(("Error", "Exception", "Errors", "Disconnected")) for b in bases):
                out.append((node.name, node.lineno))
    return out


def test_every_error_class_is_in_errors_py():
    found = {}
    for path in _sources():
        rel = path.relative_to(SRC).as_posix()
        if rel == "errors.py":
            continue
        for name, line in _exception_classes(path):
            found[(rel, name)] = f"{rel}:{line}: class {name}"
    new = [msg for key, msg in found.items() if key not in KNOWN_ERROR_CLASSES]
    assert not new, "error classes outside benchgate/errors.py:\n" + "\n".join(new)


def test_one_error_root():
    import benchgate.errors as errors

    classes = [v for v in vars(errors).values() if isinstance(v, type) and issubclass(v, Exception)]
    assert all(issubclass(c, errors.BenchgateError) for c in classes)
    assert errors.PlanErrors.item is errors.PlanError and errors.StationErrors.item is errors.StationError
    assert not issubclass(errors.StationError, errors.PlanError)


@pytest.mark.parametrize("path", ["plan/checks.py", "judge/rules.py", "instruments/_station_load.py"])
def test_the_table_catches_a_forbidden_edge(path, monkeypatch):
    # the checker itself can fail: forbid what the module really imports and see it reported
    owner = path.split("/")[0]
    monkeypatch.setitem(MAY_IMPORT, owner, set())
    assert any(k[0] == path for k in _import_violations())
