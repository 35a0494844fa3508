"""Notebooks are committed without outputs and in step with their jupytext scripts (DEVELOPERS.md)."""

import json
from pathlib import Path

import pytest

NB = sorted((Path(__file__).resolve().parent.parent / "notebooks").glob("*.ipynb"))
jupytext = pytest.importorskip("jupytext")


def test_there_are_four_notebooks():
    assert len(NB) >= 4


@pytest.mark.parametrize("path", NB, ids=lambda p: p.name)
def test_outputs_stripped_and_paired(path):
    nb = json.loads(path.read_text(encoding="utf-8"))
    for cell in nb["cells"]:
        assert not cell.get("outputs"), f"{path.name}: outputs must be stripped"
        assert cell.get("execution_count") in (None, 0)
    script = path.with_suffix(".py")
    assert script.is_file(), f"{path.name} has no paired py:percent script"
    as_py = jupytext.writes(jupytext.reads(path.read_text(encoding="utf-8"), fmt="ipynb"), fmt="py:percent")
    assert as_py.strip() == script.read_text(encoding="utf-8").strip(), \
        f"{path.name} and {script.name} differ: run jupytext --sync"
