"""`nullfit demo`: the whole job on the bundled, invented demo data."""

from __future__ import annotations

from pathlib import Path


def demo_data_dir(data: str | Path | None = None) -> Path:
    """The demo data folder: ``data`` if given, else the bundled copy (wheel) or the
    repository's ``data_demo/`` (editable install)."""
    if data is not None:
        p = Path(data)
        if not p.is_dir():
            raise FileNotFoundError(2, "demo data folder not found", str(p))
        return p
    here = Path(__file__).resolve().parent
    for cand in (here / "data_demo", here.parent / "data_demo"):
        if (cand / "README.md").is_file():
            return cand
    raise FileNotFoundError(2, "bundled demo data not found (pass --data DIR)", str(here.parent / "data_demo"))


def demo_scans(folder: Path) -> list[Path]:
    """Every scan log in the demo folder (and its campaign/ sub-folder), sorted."""
    logs = sorted(folder.glob("*.csv")) + sorted(folder.glob("*.parquet"))
    logs += sorted((folder / "campaign").glob("*.csv")) if (folder / "campaign").is_dir() else []
    return logs


def run_demo(data=None, out=None, force: bool = False, seed: int = 20261201) -> int:
    from .logfile import read_scan

    folder = demo_data_dir(data)
    print(f"nullfit demo — invented, synthetic data from {folder}\n")
    for log in demo_scans(folder):
        scan = read_scan(log)
        print(scan.describe().as_text())
        print()
    return 0
