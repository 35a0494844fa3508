"""Provenance: what reproduces a result — package versions, input files with SHA-256, settings, seeds."""

from __future__ import annotations

import datetime as _dt
import hashlib
import platform
from importlib import metadata
from pathlib import Path
from typing import Any, Iterable

#: libraries whose versions go into every provenance record
DEPENDENCIES = ("numpy", "scipy", "pandas", "statsmodels", "matplotlib", "astropy", "arch", "tqdm", "pyarrow")


def sha256_of(path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def provenance(inputs: Iterable = (), *, settings: dict | None = None, seeds: dict | None = None,
               dropped: dict | None = None) -> dict[str, Any]:
    """Everything needed to reproduce a result: versions, inputs with SHA-256, settings, seeds."""
    from .. import __version__

    versions = {"nullfit": __version__, "python": platform.python_version()}
    for name in DEPENDENCIES:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = "not installed"
    files = []
    for p in inputs:
        p = Path(p)
        files.append({"path": str(p), "sha256": sha256_of(p), "bytes": p.stat().st_size})
    return {
        "created_utc": _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat().replace("+00:00", "Z"),
        "versions": versions,
        "inputs": files,
        "settings": dict(settings or {}),
        "seeds": dict(seeds or {}),
        "dropped_rows": dict(dropped or {}),
    }
