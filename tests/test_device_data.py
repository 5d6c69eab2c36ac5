"""Stock rows with a SPICE model card or datasheet points.

Expected β ratios come from :mod:`stockbias.analysis.gp_dc` (checked against ngspice-39
in ``tests/test_gp_dc.py``) evaluated by hand in the test; file and line numbers of
errors are read off the files the tests write.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from stockbias.analysis.gp_dc import bias_at_current, device_at
from stockbias.cli.app import app
from stockbias.device_data import at_job_currents, hfe_scale_over
from stockbias.errors import StockFileError
from stockbias.stock_io import read_inventory

SAMPLES = Path(__file__).resolve().parents[1] / "inventory_samples"
SHELF = SAMPLES / "characterised_parts.csv"
HEADER = ("kind,part_id,value,tolerance_pct,power_w,qty,polarity,hfe_min,hfe_max,vceo_max,"
          "ic_max,pd_max_w,vaf_v,model_name,model_file,curve_file\n")
RES = "resistor,R1,10k,5,0.25,10,,,,,,,,,,\n"
LIB = """\
* invented cards
.model QA NPN (IS=9f BF=300 VAF=85 IKF=12m ISE=30f NE=1.55 BR=3 XTB=1.5)
.model QB PNP (IS=12f BF=220 VAF=60)
.model DX D (IS=1n)
"""


def _shelf(tmp_path: Path, rows: str, lib: str = LIB) -> Path:
    (tmp_path / "models").mkdir(exist_ok=True)
    (tmp_path / "models" / "parts.lib").write_text(lib)
    path = tmp_path / "shelf.csv"
    path.write_text(HEADER + RES + rows)
    return path


def test_card_fills_the_gummel_poon_columns(tmp_path: Path) -> None:
    path = _shelf(tmp_path, "transistor,Q1,,,,5,NPN,200,400,40,100m,500m,70,qa,"
                            "models/parts.lib,\n")
    q = read_inventory(path).transistors[0]
    assert q.card is not None and "card QA in models/parts.lib (line 2)" in q.card.source
    assert q.is_a == pytest.approx(9e-15)
    assert q.br == 3.0 and q.xtb == 1.5
    assert q.vaf_v == 70.0  # the row's own column wins over the card's 85
    assert q.xti == 3.0 and q.eg_ev == 1.11  # the card's SPICE defaults
    assert not {"is_a", "br", "nf", "nr", "vaf_v", "xtb", "xti", "eg_ev"} & q.assumed
    assert any("card QA" in a for a in q.assumptions())


def test_single_card_library_needs_no_name(tmp_path: Path) -> None:
    path = _shelf(tmp_path, "transistor,Q1,,,,5,PNP,100,300,40,100m,500m,,,models/parts.lib,\n",
                  lib=".model QB PNP (IS=12f BF=220)\n.model DX D (IS=1n)\n")
    assert read_inventory(path).transistors[0].card.params["bf"] == 220.0


@pytest.mark.parametrize(("row", "column", "words"), [
    ("qz,models/parts.lib,", "model_name", "no card of this name in models/parts.lib "
     r"\(NPN/PNP cards: QA, QB\)"),
    ("qb,models/parts.lib,", "model_name", "card QB in models/parts.lib is PNP, the row is NPN"),
    (",models/parts.lib,", "model_name", "holds 2 NPN/PNP cards"),
    ("qa,,", "model_file", "model_name needs model_file"),
    ("qa,models/parts.lib,pts.csv", "curve_file", "not both"),
    ("qa,models/missing.lib,", "model_file", "cannot read the model file"),
    (",,missing.csv", "curve_file", "cannot read the curve file"),
])
def test_device_data_errors_name_the_stock_line_and_column(tmp_path: Path, row: str,
                                                           column: str, words: str) -> None:
    path = _shelf(tmp_path, f"transistor,Q1,,,,5,NPN,200,400,40,100m,500m,,{row}\n")
    with pytest.raises(StockFileError) as info:
        read_inventory(path)
    message = info.value.lines()[0]
    assert message.startswith(f"{path}:3: column '{column}':"), message
    import re

    assert re.search(words, message), message


def test_malformed_card_is_reported_with_both_files_lines(tmp_path: Path) -> None:
    path = _shelf(tmp_path, "transistor,Q1,,,,5,NPN,200,400,40,100m,500m,,qa,models/parts.lib,\n",
                  lib="* lib\n.model QA NPN (IS=9f BF=4k7)\n")
    with pytest.raises(StockFileError) as info:
        read_inventory(path)
    message = info.value.lines()[0]
    assert message.startswith(f"{path}:3: column 'model_file': in the model file: ")
    assert "parts.lib:2: parameter 'BF'" in message and "4k7" in message


def test_bin_moves_along_the_card_to_the_job_window(tmp_path: Path) -> None:
    path = _shelf(tmp_path, "transistor,Q1,,,,5,NPN,200,400,40,100m,500m,,qa,"
                            "models/parts.lib,\n")
    inv = read_inventory(path)
    moved = at_job_currents(inv, 30e-3, 50e-3).transistors[0]
    # by hand: β of the card at 25 °C, VCE 5 V, over the window, relative to 1 mA
    dev = device_at({"is": 9e-15, "bf": 300, "vaf": 85, "ikf": 12e-3, "ise": 30e-15,
                     "ne": 1.55, "br": 3, "xtb": 1.5}, 25.0)
    ic = np.array([1e-3, 30e-3, 50e-3])
    _, ib = bias_at_current(ic, 5.0, dev)
    beta = ic / ib
    # falls with IC; three significant figures, rounded outwards
    assert moved.hfe_min == pytest.approx(200 * beta[2] / beta[0], rel=1e-2)
    assert moved.hfe_min <= 200 * beta[2] / beta[0]
    assert moved.hfe_max == pytest.approx(400 * beta[1] / beta[0], rel=1e-2)
    assert moved.hfe_max >= 400 * beta[1] / beta[0]
    assert moved.hfe_max < 0.6 * 400  # high injection: well below the bin
    assert moved.hfe_test_ic == pytest.approx(np.sqrt(30e-3 * 50e-3))
    assert "over IC 30 mA–50 mA" in moved.device_note and "card QA" in moved.device_note
    assert moved.device_note in moved.assumptions()
    # moving twice changes nothing (a library caller and the command line may both move it)
    again = at_job_currents(at_job_currents(inv, 30e-3, 50e-3), 30e-3, 50e-3).transistors[0]
    assert (again.hfe_min, again.hfe_max, again.vbe_min) == (moved.hfe_min, moved.hfe_max,
                                                              moved.vbe_min)


def test_scale_is_one_at_the_test_current() -> None:
    inv = read_inventory(SHELF)
    q = next(t for t in inv.transistors if t.part_id == "QF-HC")
    s_lo, s_hi, dv_lo, dv_hi = hfe_scale_over(q.card, 1e-3, 1e-3, 1e-3)
    assert (s_lo, s_hi) == pytest.approx((1.0, 1.0), abs=1e-12)
    assert (dv_lo, dv_hi) == pytest.approx((0.0, 0.0), abs=1e-12)


def test_stock_check_shows_device_data() -> None:
    result = CliRunner().invoke(app, ["stock", "check", str(SHELF)], env={"COLUMNS": "120"})
    assert result.exit_code == 0, result.output
    assert "Device data" in result.output
    assert "QF-LC: hFE" in result.output and "qf_lc_points.csv" in result.output
    result = CliRunner().invoke(app, ["stock", "check", str(SHELF), "--json"])
    data = json.loads(result.output)
    dd = next(v for k, v in data.items() if isinstance(v, dict) and "device_data" in v) \
        if "device_data" not in data else data
    hc = dd["device_data"]["QF-HC"]
    assert hc["ic_min"] == pytest.approx(10e-6) and hc["ic_max"] == pytest.approx(0.1)
    assert hc["hfe_min"] < 0.2 * 200  # IKF 12 mA: β collapses by 100 mA
