"""Locate files that ship with the tool, in an installed copy or a source checkout."""
from __future__ import annotations

import importlib.util
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
    # These folders ship as data-only (namespace) packages: take the folder itself
    # from the import system rather than importlib.resources' multiplexed view.
    try:
        spec = importlib.util.find_spec(package)
    except ModuleNotFoundError:
        spec = None
    locations = list(spec.submodule_search_locations or []) if spec is not None else []
    if not locations:
        raise FileNotFoundError(f"shipped folder '{repo_folder}' not found; reinstall analog")
    return Path(locations[0])
