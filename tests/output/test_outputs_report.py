"""Outputs are never written over inputs or existing files without force; reports escape strings."""

import hashlib

import pytest

from nullfit.output.files import OutputExists, check_output_file, prepare_output_dir
from nullfit.core.provenance import provenance, sha256_of
from nullfit.output.report import render_report
from nullfit.core.render import Summary


def test_refuses_overwrite_and_inputs(tmp_path):
    inp = tmp_path / "scan.csv"
    inp.write_text("x\n")
    out = tmp_path / "report.html"
    assert check_output_file(out) == out
    out.write_text("old")
    with pytest.raises(OutputExists):
        check_output_file(out)
    assert check_output_file(out, force=True) == out
    with pytest.raises(ValueError, match="input"):
        check_output_file(inp, force=True, inputs=[inp])
    with pytest.raises(FileNotFoundError):
        check_output_file(tmp_path / "nope" / "r.html")


def test_output_dir_checks_before_writing(tmp_path):
    d = tmp_path / "out"
    prepare_output_dir(d, ["a.png", "b.png"])
    (d / "b.png").write_text("x")
    with pytest.raises(OutputExists, match="b.png"):
        prepare_output_dir(d, ["a.png", "b.png"])
    prepare_output_dir(d, ["a.png", "b.png"], force=True)


def test_sha256_matches_hashlib(tmp_path):
    p = tmp_path / "f.bin"
    p.write_bytes(b"abc" * 1000)
    # hashlib is the reference implementation
    assert sha256_of(p) == hashlib.sha256(b"abc" * 1000).hexdigest()


def test_report_escapes_user_strings(tmp_path):
    p = tmp_path / "<b>evil&.csv"
    p.write_text("1\n")
    prov = provenance([p], settings={"note": "<script>alert(1)</script>"}, seeds={"bootstrap": 7})
    html = render_report("Run <x>", [("Fit & more", [Summary("S <y>", (("a", 1.0, "fringe"),)), "text <z>"])],
                         provenance_info=prov)
    for raw in ("<script>", "<b>evil", "Run <x>", "S <y>", "text <z>"):
        assert raw not in html
    assert "&lt;script&gt;" in html and hashlib.sha256(b"1\n").hexdigest() in html
    assert prov["versions"]["numpy"] != "not installed"
