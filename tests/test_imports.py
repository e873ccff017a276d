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


def modules_after(code: str, names: tuple[str, ...]) -> set[str]:
    """Which of the modules ``names`` (full dotted names) a fresh interpreter has loaded after running ``code``."""
    probe = f"import sys\n{code}\nprint(' '.join(sorted(n for n in {names!r} if n in sys.modules)))"
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True).stdout
    return set(out.split())


#: Loaded only when a run needs them: SciPy's optimizers for the diagnosis of a network without a plan, Jinja2
#: for the HTML summary, each engine when it is the one chosen, openpyxl for the template, and xml.sax (urllib,
#: http, ssl behind it) never.
ON_DEMAND = ("scipy.optimize", "jinja2", "highspy", "ortools", "pulp", "openpyxl", "xml.sax.saxutils")
EXAMPLE = "pathlib.Path(lanesolve.__file__).parent.parent / 'example_workbooks' / 'orvale_larder_supply.xlsx'"


def test_the_pipeline_loads_nothing_on_demand_before_it_runs():
    assert modules_after("import lanesolve.pipeline", ON_DEMAND) == set()


def test_a_run_without_the_summary_loads_only_the_engine_it_uses():
    # The example has fixed charges, so auto gives it (and each scenario) to HiGHS (README, Engines and time limits).
    code = f"import pathlib, lanesolve\nfrom lanesolve import pipeline\npipeline.run({EXAMPLE}, write=False)"
    assert modules_after(code, ON_DEMAND) == {"highspy"}


def test_a_run_without_a_plan_still_loads_the_diagnosis_stack():
    # Guards the probe above: a network with too little supply is diagnosed, and that does need SciPy's optimizers.
    code = ("from lanesolve.model.network import make_network\nfrom lanesolve.model.analyse import solve_and_analyse\n"
            "net = make_network([{'id': 'D', 'supply': 3}], [{'id': 'C', 'demand': 4}],\n"
            "                   [{'origin': 'D', 'destination': 'C', 'cost_per_unit': 1}])\n"
            "assert solve_and_analyse(net).diagnosis is not None")
    assert "scipy.optimize" in modules_after(code, ON_DEMAND)


#: SciPy, loaded only once a model is built or a plan's figures are computed: scipy.sparse for the matrix, csgraph
#: (which loads scipy.linalg) for the shortest paths behind the figures.
SCIPY_PARTS = ("scipy", "scipy.sparse", "scipy.sparse.csgraph", "scipy.linalg")


def test_the_pipeline_and_the_commands_load_no_scipy_before_a_model_is_built():
    assert modules_after("import lanesolve.pipeline, lanesolve.cli, lanesolve.batch", SCIPY_PARTS) == set()


def test_a_workbook_with_errors_is_answered_without_scipy(tmp_path):
    # A workbook whose customer has text for its demand stops at validation: the planner's fix-and-rerun loop.
    from conftest import valid_sheets, write_workbook

    sheets = valid_sheets()
    sheets["Customers"][1][1] = "lots"
    bad = write_workbook(tmp_path / "bad.xlsx", sheets)
    good = write_workbook(tmp_path / "good.xlsx", valid_sheets())
    code = ("from lanesolve import pipeline\nfrom lanesolve.errors import WorkbookError\n"
            f"try:\n    pipeline.run({str(bad)!r}, write=False)\nexcept WorkbookError:\n    pass\n"
            "else:\n    raise SystemExit('the bad workbook was accepted')")
    assert modules_after(code, SCIPY_PARTS) == set()
    # Guards the probe: the same run on the valid workbook builds a model and computes figures, and loads them.
    assert modules_after(f"from lanesolve import pipeline\npipeline.run({str(good)!r}, write=False)",
                         SCIPY_PARTS) == set(SCIPY_PARTS)


def test_commands_run_with_one_blas_thread_unless_the_user_chose(tmp_path):
    # OpenBLAS reads OPENBLAS_NUM_THREADS once, when NumPy loads: the command group must set it before any command
    # has loaded NumPy, and keep a value the user set.
    from pathlib import Path

    example = Path(__file__).resolve().parents[1] / "example_workbooks" / "orvale_larder_supply.xlsx"
    probe = (
        "import os, sys\n"
        "from lanesolve.cli import main\n"
        "assert 'numpy' not in sys.modules\n"
        f"main(['check', {str(example)!r}], standalone_mode=False)\n"
        "assert 'numpy' in sys.modules\n"
        "print(os.environ['OPENBLAS_NUM_THREADS'])\n"
    )
    env = {k: v for k, v in __import__("os").environ.items() if k != "OPENBLAS_NUM_THREADS"}
    ours = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True, env=env)
    theirs = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True,
                            env={**env, "OPENBLAS_NUM_THREADS": "2"})
    assert ours.stdout.split()[-1] == "1"
    assert theirs.stdout.split()[-1] == "2"


def test_a_large_workbooks_later_modules_are_imported_while_it_is_read(tmp_path):
    # From AHEAD_FROM_BYTES up, the modules of AHEAD load in a thread started before reading; the probe stops the
    # run right after reading (by failing validation) so only that thread can have loaded them.
    from conftest import valid_sheets, write_workbook

    sheets = valid_sheets()
    sheets["Customers"][1][1] = "lots"
    bad = write_workbook(tmp_path / "bad.xlsx", sheets)
    code = ("import threading\nfrom lanesolve import pipeline\nfrom lanesolve.errors import WorkbookError\n"
            "pipeline.AHEAD_FROM_BYTES = {limit}\n"
            f"try:\n    pipeline.run({str(bad)!r}, write=False)\nexcept WorkbookError:\n    pass\n"
            "for thread in threading.enumerate():\n"
            "    if thread.name == 'lanesolve-import-ahead':\n        thread.join()")
    names = ("scipy.sparse", "scipy.sparse.csgraph", "ortools.graph.python.min_cost_flow", "jinja2")
    assert modules_after(code.format(limit=0), names) == set(names)
    assert modules_after(code.format(limit=10**12), names) == set()  # a small workbook: nothing ahead


def test_a_module_that_fails_to_import_ahead_leaves_the_run_alone(tmp_path):
    from conftest import valid_sheets, write_workbook

    good = write_workbook(tmp_path / "good.xlsx", valid_sheets())
    code = ("from lanesolve import pipeline\npipeline.AHEAD_FROM_BYTES = 0\n"
            "pipeline.AHEAD = ('lanesolve_no_such_module',) + pipeline.AHEAD\n"
            f"outcome = pipeline.run({str(good)!r}, write=False)\n"
            "assert outcome.result.status.value == 'optimal', outcome.result.status")
    assert modules_after(code, ("lanesolve.pipeline",)) == {"lanesolve.pipeline"}


def test_a_file_that_is_no_workbook_is_answered_without_pandas(tmp_path):
    # The stages after reading load where they are first used: a run stopped by the reader (here a CSV file saved
    # with an .xlsx name) never pays for pandas or NumPy.
    fake = tmp_path / "lanes.xlsx"
    fake.write_text("origin,destination\nD1,C1\n")
    code = ("from lanesolve import pipeline\nfrom lanesolve.errors import WorkbookError\n"
            f"try:\n    pipeline.run({str(fake)!r}, write=False)\nexcept WorkbookError:\n    pass\n"
            "else:\n    raise SystemExit('the text file was accepted')")
    assert modules_after(code, ("pandas", "numpy")) == set()
    # Guards the probe: the names the pipeline module still offers load them on first use.
    assert modules_after("from lanesolve import pipeline\npipeline.Network", ("pandas", "numpy")) == {"pandas", "numpy"}
