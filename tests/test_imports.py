"""Commands import only what they need: ``lanesolve --help`` and the package itself load neither pandas, numpy nor
the solver stack (pandas alone took most of the 0.9 s before --help answered)."""

import subprocess
import sys

HEAVY = ("pandas", "numpy", "pulp", "scipy", "highspy", "ortools", "openpyxl", "jinja2")


def loaded_after(code: str) -> set[str]:
    probe = f"import sys\n{code}\nprint(' '.join(sorted(m for m in sys.modules if m.split('.')[0] in {HEAVY!r})))"
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True).stdout
    return set(out.split())


def test_help_loads_no_heavy_module():
    code = ("from click.testing import CliRunner\nfrom lanesolve.cli import main\n"
            "assert CliRunner().invoke(main, ['--help']).exit_code == 0")
    assert loaded_after(code) == set()


def test_importing_the_package_loads_no_heavy_module():
    assert loaded_after("import lanesolve") == set()


def test_the_data_classes_still_load_on_first_use():
    # Guards the two tests above against a probe that sees nothing: asking for Network does load pandas.
    assert "pandas" in loaded_after("import lanesolve\nlanesolve.Network")
