"""``nullfit.sidereal`` is the public name of the sidereal model package, resolved lazily."""

import subprocess
import sys


def test_alias_is_the_model_package_and_stays_lazy():
    code = ("import sys, nullfit; assert 'nullfit.hypothesis.sidereal' not in sys.modules; "
            "from nullfit import sidereal; import nullfit.hypothesis.sidereal as m; assert sidereal is m; "
            "import nullfit.sidereal as again; assert again is m; print(sorted(sidereal.QUADRATURE_KEYS)[0])")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "B0"
