"""Writing outputs safely: never into an input file, never over an existing file without ``force``."""

from __future__ import annotations

from pathlib import Path


class OutputExists(FileExistsError):
    """An output would overwrite an existing file and ``force`` was not given."""


def check_output_file(path, *, force: bool = False, inputs=()) -> Path:
    """Return ``path`` as a Path if it may be written.

    Refuses (``OutputExists``, one line) when it exists and ``force`` is false, and always refuses
    (``ValueError``) when it is one of the ``inputs`` — an input is never written to.
    """
    p = Path(path)
    for inp in inputs:
        try:
            if Path(inp).resolve() == p.resolve():
                raise ValueError(f"{p}: refusing to write an output over an input file")
        except OSError:  # pragma: no cover - unresolvable paths cannot be the same file
            continue
    if p.is_dir():
        raise IsADirectoryError(21, "output is a folder, expected a file name", str(p))
    if p.exists() and not force:
        raise OutputExists(17, "output exists; pass --force to overwrite", str(p))
    if not p.parent.exists():
        raise FileNotFoundError(2, "output folder does not exist", str(p.parent))
    return p


def prepare_output_dir(path, names, *, force: bool = False, inputs=()) -> Path:
    """Create the folder ``path`` (if needed) and check that none of ``names`` inside it exists
    (unless ``force``).  Checks everything before writing anything."""
    d = Path(path)
    if d.exists() and not d.is_dir():
        raise NotADirectoryError(20, "output path exists and is not a folder", str(d))
    clashes = [n for n in names if (d / n).exists()]
    if clashes and not force:
        raise OutputExists(17, f"output folder already holds {clashes[0]!s} "
                               f"({len(clashes)} file(s) would be overwritten); pass --force", str(d))
    for n in names:
        for inp in inputs:
            if (d / n).resolve() == Path(inp).resolve():
                raise ValueError(f"{d / n}: refusing to write an output over an input file")
    d.mkdir(parents=True, exist_ok=True)
    return d
