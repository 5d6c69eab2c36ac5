"""The command line loads the heavy libraries only inside the commands that use them.

Each case runs the app's ``main`` in a fresh interpreter (``python -c``, as the console
script does) and reads back which of the heavy libraries are in ``sys.modules`` when the
command has finished.  No timing is asserted here: the start-up time is measured by
``benchmarks/bench_startup.py``.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest
import typer

from stockbias.cli.app import app

ROOT = Path(__file__).resolve().parent.parent
SMALL_SHELF = ROOT / "inventory_samples" / "workshop_drawers.csv"  # 35 lines

# loaded only by the commands that compute or draw (analysis, search, plots, pandas export)
HEAVY = ("scipy", "scipy.stats", "scipy.special", "pandas", "ortools", "matplotlib")
PROBED = [*HEAVY, "numpy"]
MARK = "@@loaded-modules@@"


def _probe(body: str) -> tuple[object, list[str]]:
    """Run ``body`` in a fresh interpreter; its exit code and the heavy modules it loaded."""
    code = "\n".join([
        "import json, sys",
        "code = 0",
        "try:",
        *(f"    {line}" for line in body.splitlines()),
        "except SystemExit as exc:",
        "    code = exc.code",
        f"names = {PROBED!r}",
        f"print({MARK!r} + json.dumps({{'code': code, "
        "'loaded': [n for n in names if n in sys.modules]}), file=sys.__stdout__)",
    ])
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          cwd=ROOT, timeout=300, check=False)
    lines = [line for line in proc.stdout.splitlines() if line.startswith(MARK)]
    assert lines, f"no report from the probe: {proc.stderr[-2000:]}"
    report = json.loads(lines[-1][len(MARK):])
    return report["code"], report["loaded"]


def _cli(*args: str) -> str:
    argv = ["stockbias", *args]
    return f"sys.argv = {argv!r}\nfrom stockbias.cli.app import main\nmain()"


def test_importing_the_app_loads_no_heavy_library() -> None:
    code, loaded = _probe("import stockbias.cli.app")
    assert code == 0
    assert loaded == []  # not numpy either: the commands load the engine when they run


@pytest.mark.parametrize(("args", "exit_code"), [
    (("--help",), 0),
    (("stock", "--help"), 0),
    (("design", "--help"), 0),
    (("check", "--no-such-option"), 2),  # a usage error
    (("--no-such-option",), 2),
    ((), 2),  # no command: the help and exit 2
])
def test_help_and_usage_errors_load_no_heavy_library(args: tuple[str, ...],
                                                     exit_code: int) -> None:
    code, loaded = _probe(_cli(*args))
    assert code == exit_code
    assert loaded == []


def test_stock_check_of_a_small_file_loads_no_heavy_library() -> None:
    code, loaded = _probe(_cli("stock", "check", str(SMALL_SHELF)))
    assert code == 0
    assert loaded == []  # not numpy either: the E-series lookup of the summary is plain Python


def test_the_probe_sees_a_library_a_computation_loads() -> None:
    # the Clopper-Pearson bound needs scipy.stats: the probe must report it
    code, loaded = _probe("from stockbias.analysis.statistics import clopper_pearson\n"
                          "clopper_pearson(3, 10)")
    assert code == 0
    assert "scipy.stats" in loaded


def test_the_option_name_in_export_matches_the_messages() -> None:
    from stockbias.selection import ACCEPT_CHANGED_OPTION

    export = typer.main.get_command(app).commands["export"]  # type: ignore[attr-defined]
    names = {opt for param in export.params for opt in param.opts}
    assert ACCEPT_CHANGED_OPTION in names


def test_the_constants_written_out_equal_scipy_constants() -> None:
    from scipy import constants

    from stockbias.analysis import device

    # exact SI values (2019 definition), so equal to the last bit
    assert constants.k == device.BOLTZMANN
    assert constants.e == device.ELEMENTARY_CHARGE
    assert constants.zero_Celsius == device.CELSIUS_TO_KELVIN
