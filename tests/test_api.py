"""Every public name resolves, and `import nullfit` stays light (no heavy library at import)."""

import subprocess
import sys

import nullfit


def test_every_export_resolves():
    for name in nullfit.__all__:
        assert getattr(nullfit, name) is not None, name


def test_import_is_lazy():
    code = ("import sys, nullfit, nullfit.cli; heavy = [m for m in ('scipy', 'pandas', 'statsmodels', "
            "'astropy', 'matplotlib', 'arch') if m in sys.modules]; print(heavy)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"
