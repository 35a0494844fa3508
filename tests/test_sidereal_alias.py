"""``nullfit.sidereal`` is the public name of the sidereal model package, resolved lazily."""

import subprocess
import sys

import pytest


def _run(code: str) -> str:
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()


def test_alias_is_the_model_package_and_stays_lazy():
    code = ("import sys, nullfit; assert 'nullfit.hypothesis.sidereal' not in sys.modules; "
            "from nullfit import sidereal; import nullfit.hypothesis.sidereal as m; assert sidereal is m; "
            "import nullfit.sidereal as again; assert again is m; print(sorted(sidereal.QUADRATURE_KEYS)[0])")
    assert _run(code) == "B0"


@pytest.mark.parametrize("statement", [
    "import nullfit.sidereal as s",
    "from nullfit.sidereal import quadratures as q",
])
def test_a_fresh_import_statement_finds_the_same_objects(statement):
    # the first thing a user types may be the import statement itself, before any attribute access
    # (the package's ``quadratures`` attribute is the function, so the submodule is looked up in sys.modules)
    code = (f"{statement}\nimport sys, nullfit.hypothesis.sidereal as m\n"
            "assert sys.modules['nullfit.sidereal'] is m and m.__spec__.name == m.__name__\n"
            "assert m.quadratures is sys.modules['nullfit.hypothesis.sidereal.quadratures'].quadratures\n"
            "assert not [k for k in sys.modules if k.startswith('nullfit.sidereal.') "
            "and sys.modules[k] is not sys.modules['nullfit.hypothesis.sidereal.' + k.split('.', 2)[2]]]\n"
            "print('same')")
    assert _run(code) == "same"


def test_a_submodule_through_the_alias_is_refused_with_the_real_name():
    code = ("import nullfit\ntry:\n    import nullfit.sidereal.frames\nexcept ModuleNotFoundError as e:\n    print(e)\n"
            "import nullfit.hypothesis.sidereal as m\nprint(callable(m.quadratures))")
    assert _run(code).splitlines() == [
        "nullfit.sidereal is an alias of a package; import nullfit.hypothesis.sidereal.frames instead", "True"]
