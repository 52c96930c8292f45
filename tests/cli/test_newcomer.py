"""What a newcomer reads first: the summary and report say the run's kind and the
star's name, plain words instead of Python values, p-values with sensible precision,
the demo's files from Python. (Presentation of rvkep's own outputs: common practice,
no source.)"""

import re

import pytest
from helpers import finished_run

import rvkep
from rvkep.formatting import p_text
from rvkep.report.html import render as html
from rvkep.report.markdown import render as markdown
from rvkep.results import Results


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    return Results.load(finished_run(tmp_path_factory.mktemp("newcomer") / "run"))


def test_summary_says_the_kind_of_run_once(run):
    text = markdown(run)
    assert f"Kind of run: **{run.run_label()}**." in text
    assert text.lower().count("quick mode") <= 1


def test_report_sampler_section_has_no_python_values(run, tmp_path):
    page = html(run)
    sampler = re.search(r'<table id="sampler">(.*?)</table>', page, re.S).group(1)
    for python in ("[]", "True", "False", ">de<", "None"):
        assert python not in sampler, python
    assert "differential evolution" in sampler or "stretch" in sampler


def test_the_report_is_titled_by_the_star(run):
    run.star_name = "Veyla"
    try:
        assert '<h1 id="title">Veyla</h1>' in html(run)
        assert markdown(run).startswith("# rvkep results for Veyla:")
    finally:
        run.star_name = None


def test_p_values_below_a_millionth_are_not_written_out():
    # a Lucy & Sweeney tail probability of 1e-251 differs between machines in its last
    # bits; nothing is decided below 1e-6
    assert p_text(1.19e-251) == p_text(7.06e-254) == "< 1e-06"
    assert p_text(0.0191) == "0.0191"


def test_the_demo_files_from_python_and_a_short_dir():
    files = rvkep.demo_files()
    assert [f.rsplit("/", 1)[1] for f in files] == ["kestrel.txt", "osprey.csv"]
    assert all(__import__("os").path.exists(f) for f in files)
    assert "annotations" not in dir(rvkep) and "demo_files" in dir(rvkep)
