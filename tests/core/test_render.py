"""Result rendering: text, escaped HTML, strict JSON."""

import json
from dataclasses import dataclass

import numpy as np

from nullfit.core.render import Described, Summary, fmt, jsonable


@dataclass(frozen=True)
class _Toy(Described):
    name: str

    def summary(self):
        return Summary(f"Toy {self.name}", (("amplitude", 0.012345678, "fringe"),), ("a <note> & more",))

    def to_dict(self):
        return {"name": self.name, "x": np.float64(np.nan), "v": np.arange(3), "ok": np.bool_(True)}


def test_renderings():
    t = _Toy("<script>")
    assert "Toy <script>" in str(t)
    assert "0.01235 fringe" in str(t)
    html = t._repr_html_()
    assert "<script>" not in html and "&lt;script&gt;" in html and "&lt;note&gt;" in html
    d = json.loads(t.to_json(allow_nan=False))
    assert d == {"name": "<script>", "x": None, "v": [0, 1, 2], "ok": True}


def test_fmt():
    assert fmt(None) == "—"
    assert fmt(3) == "3"
    assert fmt(1.23456e-7) == "1.235e-07"
    assert fmt(float("inf")) == "inf"
    assert jsonable((1, np.int64(2))) == [1, 2]
