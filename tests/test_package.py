"""The package as a whole: its public face, its layers, and no unsafe loaders of user data."""

import ast
import importlib.metadata
import os
import re

import forcefit

from .conftest import ROOT

LAYERS = {
    "base": 0, "reading": 1, "geometry": 1, "dynamics": 1, "estimators": 2, "inference": 3,
    "analysis": 3, "outputs": 4, "apps": 5, "cli": 6,
}
"""Each subpackage's floor; a module imports only from floors below its own, and from its own
subpackage (DEVELOPERS.md, "Layout")."""


def _subpackage(module: str) -> str:
    parts = module.split(".")
    return parts[1] if len(parts) > 2 or parts[1] in LAYERS else "base"


def _imports(path):
    """The forcefit modules a file imports (relative imports resolved), anywhere in it."""
    module = ".".join(path.relative_to(ROOT).with_suffix("").parts)
    package = module.split(".") if path.name == "__init__.py" else module.split(".")[:-1]
    if path.name == "__init__.py":
        package = package[:-1]
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            base = package[: len(package) - node.level + 1] if node.level else []
            target = ".".join(base + ([node.module] if node.module else []))
            if target.startswith("forcefit"):
                found.add(target)
        elif isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names if alias.name.startswith("forcefit"))
    return module, found


def test_the_public_face_is_small_and_complete():
    assert len(forcefit.__all__) <= 25 and "__version__" in forcefit.__all__
    assert all(hasattr(forcefit, name) for name in forcefit.__all__)
    assert forcefit.__version__ == importlib.metadata.version("forcefit")


def test_every_import_goes_down_the_layers_and_never_to_the_package_root():
    for path in sorted((ROOT / "forcefit").rglob("*.py")):
        if path == ROOT / "forcefit" / "__init__.py":
            continue
        module, targets = _imports(path)
        mine = _subpackage(module)
        for target in targets:
            assert target != "forcefit", f"{module} imports the package root"
            theirs = _subpackage(target)
            assert theirs == mine or LAYERS.get(theirs, 0) < LAYERS.get(mine, 0), (module, target)


def test_no_eval_pickle_or_unsafe_yaml_on_user_data():
    source = "\n".join(p.read_text() for p in (ROOT / "forcefit").rglob("*.py"))
    for pattern in (r"\beval\(", r"\bexec\(", r"\bpickle\b", r"yaml\.load\(", r"\bmarshal\b",
                    r"allow_pickle=True"):
        assert not re.search(pattern, source), pattern
    assert os.path.exists(ROOT / "forcefit" / "outputs" / "templates" / "run.html.j2")
