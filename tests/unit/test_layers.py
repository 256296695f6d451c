"""The layers, read from the imports: core below service below web; only web imports Flask; no endpoint module
imports another; nothing outside web imports web."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
PACKAGE = REPO / "calcsvc"
# Modules of the HTTP layer that serve routes; they may share helpers, never each other.
ENDPOINTS = {"calc_api", "batch_api", "parts_api", "review_api", "select_api", "plots_api", "health"}


def imports_of(path: Path) -> set[str]:
    names: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module)
            names.update(f"{node.module}.{alias.name}" for alias in node.names)
    return names


def modules(folder: Path) -> list[Path]:
    return sorted(folder.rglob("*.py"))


@pytest.mark.parametrize("layer", ["core", "data", "service"])
def test_lower_layers_import_neither_flask_nor_the_web_layer(layer: str) -> None:
    for path in modules(PACKAGE / layer):
        offending = {name for name in imports_of(path) if name.split(".")[0] in {"flask", "flask_smorest", "werkzeug"}}
        offending |= {name for name in imports_of(path) if name.startswith("calcsvc.web")}
        assert not offending, f"{path.relative_to(REPO)} imports {sorted(offending)}"


def test_the_core_imports_only_the_core() -> None:
    for path in modules(PACKAGE / "core"):
        ours = {name for name in imports_of(path) if name.startswith("calcsvc.")}
        assert all(name.startswith("calcsvc.core") for name in ours), f"{path.relative_to(REPO)}: {sorted(ours)}"


def test_the_data_layer_imports_neither_core_nor_service() -> None:
    for path in modules(PACKAGE / "data"):
        ours = {name for name in imports_of(path) if name.startswith(("calcsvc.core", "calcsvc.service"))}
        assert not ours, f"{path.relative_to(REPO)}: {sorted(ours)}"


def test_no_endpoint_module_imports_another() -> None:
    for path in modules(PACKAGE / "web"):
        others = {
            name
            for name in imports_of(path)
            for endpoint in ENDPOINTS - {path.stem}
            if name == f"calcsvc.web.{endpoint}" or name.startswith(f"calcsvc.web.{endpoint}.")
        }
        if path.stem == "app":
            continue  # the factory registers every blueprint
        assert not others, f"{path.relative_to(REPO)} imports endpoint modules {sorted(others)}"


# The app factory's entry points (calcsvc/__init__.py, wsgi.py, openapi_spec.py) and the server's configuration
# (gunicorn_conf.py, for the request log's formatter) serve the HTTP layer and may reach it.
SERVES_HTTP = {"__init__.py", "wsgi.py", "openapi_spec.py", "gunicorn_conf.py"}


def test_nothing_outside_the_web_layer_imports_it() -> None:
    outside = [path for path in PACKAGE.glob("*.py") if path.name not in SERVES_HTTP]
    outside += modules(REPO / "benchmarks") + modules(REPO / "examples")
    assert any(path.name == "cli.py" for path in outside)
    for path in outside:
        web = {name for name in imports_of(path) if name.startswith("calcsvc.web")}
        assert not web, f"{path.relative_to(REPO)} imports {sorted(web)}"


def test_no_module_is_over_four_hundred_lines() -> None:
    long = {
        str(path.relative_to(REPO)): lines
        for path in modules(PACKAGE)
        if (lines := len(path.read_text().splitlines())) > 420
    }
    assert not long, long
