"""Locate files that ship with the tool, in an installed copy or a source checkout."""
from __future__ import annotations

import importlib.resources
from pathlib import Path

_REPO = Path(__file__).resolve().parent.parent
_FOLDERS = {"schemas": ("analog._schemas", "data_schemas"),
            "maps": ("analog._maps", "maps"),
            "demo": ("analog._demo", "examples/demo")}


def resource_dir(kind: str) -> Path:
    """Folder of shipped files: ``'schemas'``, ``'maps'`` or ``'demo'``."""
    package, repo_folder = _FOLDERS[kind]
    local = _REPO / repo_folder
    if local.is_dir() and (_REPO / "pyproject.toml").is_file():
        return local
    try:
        return Path(str(importlib.resources.files(package)))
    except ModuleNotFoundError as exc:  # pragma: no cover - broken install
        raise FileNotFoundError(f"shipped folder '{repo_folder}' not found; reinstall analog") from exc
