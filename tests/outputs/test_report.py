"""Report renderers: one list of rows feeds every table, so no format drops a row."""

import pytest

from rvkep.report import available_formats, render
from rvkep.report.rows import parameter_rows


class Stub:
    """The part of a Results the renderers read: one companion, two instruments, a
    correlated-noise model with two parameters and a quadratic trend (every estimate
    1 +- 0.1)."""

    labels = ["b"]
    instrument_names = ["north", "south"]
    noise_kind = "gp"
    noise_names = ["amplitude", "rotation_period"]
    trend_degree = 2
    posterior = {"b.period", "b.K", "b.ecc"}

    def estimate(self, column):
        return {"median": 1.0, "minus": 0.1, "plus": 0.1}

    def run_label(self):
        return "final"

    def run_marks(self):
        return []


def test_every_table_shows_every_row():
    rows = parameter_rows(Stub())
    keys = [(r.object, r.key) for r in rows]
    assert keys == [("b", "period_d"), ("b", "K_mps"), ("b", "ecc"),
                    ("north", "offset_mps"), ("north", "jitter_mps"),
                    ("south", "offset_mps"), ("south", "jitter_mps"),
                    ("noise (gp)", "amplitude"), ("noise (gp)", "rotation_period"),
                    ("trend", "slope_mps_per_yr"), ("trend", "curvature_mps_per_yr2")]  # fmt: skip
    csv_lines = render(Stub(), "csv").strip().splitlines()[2:]
    latex_lines = [ln for ln in render(Stub(), "latex").splitlines() if ln.endswith("\\\\")][1:]
    assert len(csv_lines) == len(latex_lines) == len(rows)  # the CSV kept the curvature
    assert csv_lines[-1] == "trend,curvature_mps_per_yr2,1,0.1,0.1,m/s/yr^2"
    assert latex_lines[0].startswith("b & $P$ & ")


def test_formats_are_registered():
    assert available_formats() == ["markdown", "latex", "csv", "html"]
    with pytest.raises(ValueError, match="unknown report format 'docx'"):
        render(Stub(), "docx")
