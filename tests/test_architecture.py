"""The direction of imports and the house rules (DEVELOPERS.md, 'Architecture'), read with ast."""

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parent.parent / "convsim"
FIGURE_MODULES = {"figures", "figures_bench", "figures_onset", "figures_sweep", "style", "animation"}


def _imports(name):
    tree = ast.parse((PACKAGE / f"{name}.py").read_text())
    found, external = set(), set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level == 1:
                if node.module:
                    found.add(node.module.split(".")[0])
                else:
                    found.update(alias.name for alias in node.names)
            elif node.module:
                external.add(node.module.split(".")[0])
        elif isinstance(node, ast.Import):
            external.update(alias.name.split(".")[0] for alias in node.names)
    return found, external


MODULES = sorted(p.stem for p in PACKAGE.glob("*.py") if p.stem != "__init__")


def test_foundations_import_nothing_of_convsim():
    for name in ("errors", "kernels"):
        assert _imports(name)[0] == set(), name
    assert _imports("config")[0] <= {"errors"}


def test_physics_modules_take_numbers_not_configs():
    for name in ("rheology", "stokes", "energy", "diagnostics", "linsolve", "kernels", "grid"):
        inside, _ = _imports(name)
        assert "config" not in inside and "simulation" not in inside, name
    assert "energy" not in _imports("stokes")[0]
    assert "stokes" not in _imports("energy")[0]


def test_the_run_loop_does_not_write_files_itself():
    for name in ("simulation", "timestepping", "steady"):
        inside, _ = _imports(name)
        assert not inside & ({"snapshot", "xdmf", "cli"} | FIGURE_MODULES), name


def test_nothing_imports_the_command_line():
    for name in MODULES:
        assert "cli" not in _imports(name)[0], name


def test_matplotlib_only_in_figure_modules():
    for name in MODULES:
        if name not in FIGURE_MODULES:
            assert "matplotlib" not in _imports(name)[1], name


def test_no_print_outside_the_command_line():
    for name in MODULES:
        if name == "cli":
            continue
        tree = ast.parse((PACKAGE / f"{name}.py").read_text())
        calls = [n for n in ast.walk(tree) if isinstance(n, ast.Call)
                 and isinstance(n.func, ast.Name) and n.func.id == "print"]
        assert not calls, name
