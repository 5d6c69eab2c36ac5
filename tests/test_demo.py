"""`stockbias demo`: the README's first Quick start command runs a real design."""

from __future__ import annotations

from typer.testing import CliRunner

from stockbias.cli.app import app


def test_demo_runs_a_design_on_the_bundled_shelf() -> None:
    result = CliRunner().invoke(app, ["demo"])
    assert result.exit_code == 0, result.output
    assert "Status: optimal" in result.stdout
    assert "Ranked designs" in result.stdout
    assert "stockbias check inventory_samples/line_driver_job.toml" in result.stdout
