"""The direction of imports and the house rules (DEVELOPERS.md, 'Architecture'), read with ast.

One rule per folder of the package:

- ``errors``, ``model/array_kernels`` and ``model/choices`` import nothing of convsim
  (``model/kernels`` only the limiter codes of ``model/array_kernels``); ``config`` only
  ``errors``, the choice names of ``model/choices`` and the plain-data law declarations
  ``model/laws`` (which import nothing else of convsim);
- ``model/`` takes numbers, arrays and declarations: never ``config``, ``run``, ``files``,
  ``figures``, ``studies``, ``analysis`` or ``cli``;
- ``run/`` never imports ``files``, ``figures``, ``studies`` or ``cli`` (writers come in as
  observers);
- ``files/`` never imports ``run``, ``figures``, ``studies`` or ``cli``;
- ``figures/`` reads files and results, never runs: no ``run``, ``studies`` or ``cli``;
- nothing imports ``cli``; matplotlib only in ``figures/``; no ``print`` outside ``cli/``.
"""

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parent.parent / "convsim"
SOURCES = sorted(PACKAGE.rglob("*.py"))


def _room(path: Path) -> str:
    """The folder of a module inside the package ('' for the top level)."""
    parts = path.relative_to(PACKAGE).parts
    return parts[0] if len(parts) > 1 else ""


def _imports(path: Path) -> tuple[set, set]:
    """(convsim rooms or top-level modules imported, external top-level packages imported)."""
    tree = ast.parse(path.read_text())
    inside, external = set(), set()
    for node in ast.walk(tree):
        names = []
        if isinstance(node, ast.ImportFrom):
            assert node.level == 0, f"{path}: relative import; the house uses absolute imports"
            names = [node.module] + [f"{node.module}.{a.name}" for a in node.names]
        elif isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        for name in names:
            parts = name.split(".")
            if parts[0] == "convsim":
                if len(parts) > 1:
                    inside.add(parts[1])
            else:
                external.add(parts[0])
    return inside, external


def _check(room: str, forbidden: set) -> None:
    for path in SOURCES:
        if _room(path) == room:
            bad = _imports(path)[0] & forbidden
            assert not bad, f"{path.relative_to(PACKAGE)} imports {sorted(bad)}"


def _modules(path: Path) -> set:
    """Full names of the convsim modules a file imports (``from a import b``: a)."""
    tree = ast.parse(path.read_text())
    names = {n.module for n in ast.walk(tree) if isinstance(n, ast.ImportFrom)}
    names |= {a.name for n in ast.walk(tree) if isinstance(n, ast.Import) for a in n.names}
    return {name for name in names if name.split(".")[0] == "convsim"}


def test_foundations_import_nothing_of_convsim():
    assert _imports(PACKAGE / "errors.py")[0] == set()
    assert _imports(PACKAGE / "model" / "array_kernels.py")[0] == set()
    assert _modules(PACKAGE / "model" / "kernels.py") == {"convsim.model.array_kernels"}
    assert _imports(PACKAGE / "model" / "choices.py")[0] == set()
    assert _modules(PACKAGE / "config.py") <= {"convsim.errors", "convsim.model.choices",
                                               "convsim.model.laws"}
    for path in (PACKAGE / "model" / "laws").glob("*.py"):
        assert all(m.startswith("convsim.model.laws") for m in _modules(path)), path


def test_model_takes_numbers_not_configs():
    _check("model", {"config", "run", "files", "figures", "studies", "analysis", "cli", "api"})


def test_the_run_does_not_write_files_or_draw():
    _check("run", {"files", "figures", "studies", "cli", "api"})


def test_files_do_not_run_or_draw():
    _check("files", {"run", "figures", "studies", "cli", "api"})


def test_figures_read_files_and_results_never_run():
    _check("figures", {"run", "studies", "cli", "api"})


def test_nothing_imports_the_command_line():
    for path in SOURCES:
        if _room(path) != "cli":
            assert "cli" not in _imports(path)[0], path


def test_matplotlib_only_in_figure_modules():
    for path in SOURCES:
        if _room(path) != "figures":
            assert "matplotlib" not in _imports(path)[1], path


def test_no_print_outside_the_command_line():
    for path in SOURCES:
        if _room(path) == "cli":
            continue
        tree = ast.parse(path.read_text())
        calls = [n for n in ast.walk(tree) if isinstance(n, ast.Call)
                 and isinstance(n.func, ast.Name) and n.func.id == "print"]
        assert not calls, path
