"""The HTML pages (report.html per run, index.html per batch) opened in a real browser:
headless Chromium from the system's packages, driven by Selenium through the system's
chromedriver. No console error, no request beyond the page's own folder, the numbers
shown are results.json's, the index sorts and filters, the page is not blank."""

import csv
import io
import json
import shutil
from pathlib import Path

import numpy as np
import pytest
from helpers import make_targets

from rvkep.cli import BATCH_FAILED_EXIT, main
from rvkep.formatting import format_uncertain

pytestmark = pytest.mark.integration

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
DRIVER = shutil.which("chromedriver")


@pytest.fixture(scope="module")
def browser():
    webdriver = pytest.importorskip("selenium.webdriver", reason="selenium not installed")
    if not (CHROMIUM and DRIVER):
        pytest.skip("no headless Chromium here (apt-get install chromium chromium-driver)")
    from selenium.webdriver.chrome.service import Service

    opts = webdriver.ChromeOptions()
    opts.binary_location = CHROMIUM
    for arg in ("--headless=new", "--no-sandbox", "--disable-gpu", "--window-size=1200,1600",
                "--disable-dev-shm-usage"):  # fmt: skip
        opts.add_argument(arg)
    opts.set_capability("goog:loggingPrefs", {"browser": "ALL", "performance": "ALL"})
    driver = webdriver.Chrome(service=Service(DRIVER), options=opts)
    yield driver
    driver.quit()


def _open(driver, path: Path):
    driver.get_log("browser")  # drop what earlier pages logged
    driver.get_log("performance")
    driver.get(path.resolve().as_uri())
    return driver


def _requests(driver) -> list[str]:
    urls = []
    for entry in driver.get_log("performance"):
        msg = json.loads(entry["message"])["message"]
        if msg["method"] == "Network.requestWillBeSent":
            urls.append(msg["params"]["request"]["url"])
    return urls


def _not_blank(driver):
    from matplotlib.image import imread

    img = imread(io.BytesIO(driver.get_screenshot_as_png()), format="png")
    dark = np.mean(img[..., :3].mean(axis=2) < 0.8)
    assert img[..., :3].std() > 0.01 and dark > 0.001, (img.std(), dark)  # blank: 0 and 0


def _shown(e: dict) -> str:
    v, m, p = format_uncertain(e["median"], e["minus"], e["plus"])
    return f"{v} ± {m}" if m == p else f"{v}+{p}−{m}"


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    out = tmp_path_factory.mktemp("html") / "veyla"
    assert main(["demo", "--quick", "--quiet", "--out", str(out), "--seed", "1"]) == 0
    return out


def test_report_opens_offline_and_shows_results_json(browser, demo):
    from selenium.webdriver.common.by import By

    saved = json.loads((demo / "results.json").read_text())
    page = demo / "report.html"
    text = page.read_text()
    assert "http://" not in text and "https://" not in text and "<script" not in text
    d = _open(browser, page)
    assert [e for e in d.get_log("browser") if e["level"] in ("SEVERE", "WARNING")] == []
    own = page.resolve().as_uri()
    assert all(u == own or u.startswith("data:") for u in _requests(d)), _requests(d)
    # the verdict: each companion's P, K, e, M sin i and a as results.json has them
    n = d.find_element(By.ID, "n-companions")
    assert int(n.get_attribute("data-n")) == saved["n_planets"] == 2
    checked = 0
    for p in saved["planets"]:
        for key in ("period_d", "K_mps", "ecc", "msini_mjup", "msini_mearth", "a_au"):
            cell = d.find_element(
                By.CSS_SELECTOR, f'#verdict-table [data-key="{p["label"]}.{key}"]'
            )
            assert float(cell.get_attribute("data-median")) == p[key]["median"]
            assert cell.text.replace("\n", "") == _shown(p[key]), (cell.text, p[key])
            checked += 1
    assert checked == 12
    # K per instrument and per season, as results.json's planets[*].support has them
    support = [e.text for e in d.find_elements(By.CSS_SELECTOR, "p.support")]
    assert [line.split(" at the best fit")[0] for line in support] == ["K of b", "K of c"]
    for p, line in zip(saved["planets"], support, strict=True):
        seasons = p["support"]["seasons"]
        assert len(seasons) == 3 and f"{seasons[0]['K']:.3g} +- {seasons[0]['sd']:.2g}" in line
    warnings = d.find_element(By.ID, "warnings").text
    assert "QUICK MODE" in warnings and "NOT CONVERGED" in warnings
    imgs = d.find_elements(By.CSS_SELECTOR, "#figures img")
    assert len(imgs) >= 5 and all(d.execute_script("return arguments[0].naturalWidth", i) > 100
                                  for i in imgs)  # fmt: skip
    assert d.find_element(By.ID, "seed").text == "1"
    assert "rvkep demo" in d.find_element(By.ID, "command").text
    _not_blank(d)


def test_report_command_rewrites_the_page_of_a_finished_run(demo, tmp_path, capsys):
    copy = tmp_path / "copy"
    shutil.copytree(demo, copy)
    (copy / "report.html").unlink()
    assert main(["page", str(copy)]) == 0
    assert (copy / "report.html").read_text() == (demo / "report.html").read_text().replace(
        "<title>veyla", "<title>copy"
    ).replace('<h1 id="title">veyla', '<h1 id="title">copy')
    assert main(["page", str(tmp_path)]) == 2
    assert "no results.json" in capsys.readouterr().err


def test_batch_index_sorts_filters_and_links(browser, tmp_path):
    from selenium.webdriver.common.by import By

    targets = make_targets(tmp_path / "in", 3)
    out = tmp_path / "out"
    code = main(["batch", str(targets), "--out", str(out), "--quick", "--quiet", "--workers", "2"])
    assert code == BATCH_FAILED_EXIT  # the broken target
    page = out / "index.html"
    d = _open(browser, page)
    assert [e for e in d.get_log("browser") if e["level"] in ("SEVERE", "WARNING")] == []
    root = out.resolve().as_uri()
    assert all(u.startswith(root) for u in _requests(d)), _requests(d)

    def names():
        rows = d.find_elements(By.CSS_SELECTOR, "#targets tbody tr")
        return [r.get_attribute("data-name") for r in rows if r.is_displayed()]

    assert sorted(names()) == ["broken", "star0", "star1", "star2"]

    def column(k):
        cells = d.find_elements(By.CSS_SELECTOR, f"#targets tbody tr td:nth-child({k + 1})")
        return [float(c.get_attribute("data-v")) for c in cells]

    heads = d.find_elements(By.CSS_SELECTOR, "#targets th")
    heads[2].click()  # companions: the failed target (none) first
    assert names()[0] == "broken" and heads[2].get_attribute("aria-sort") == "ascending"
    assert column(2) == sorted(column(2))
    heads[6].click()  # seconds, twice: ascending, then descending (ties keep their order)
    assert column(6) == sorted(column(6)) and heads[2].get_attribute("aria-sort") is None
    assert names()[0] == "broken"  # 0.0 s
    heads[6].click()
    assert column(6) == sorted(column(6), reverse=True) and names()[-1] == "broken"
    assert heads[6].get_attribute("aria-sort") == "descending"
    d.find_element(By.ID, "filter").send_keys("broken")
    assert names() == ["broken"]
    row = d.find_element(By.CSS_SELECTOR, 'tr[data-name="broken"]')
    assert "failed" in row.text and "line 2" in row.text
    d.find_element(By.ID, "filter").clear()
    d.find_element(By.ID, "filter").send_keys(" ")  # an input event with a blank query
    thumbs = d.find_elements(By.CSS_SELECTOR, "img.thumb")
    assert len(thumbs) == 3
    assert all(d.execute_script("return arguments[0].naturalWidth", i) > 100 for i in thumbs)
    link = d.find_element(By.CSS_SELECTOR, 'tr[data-name="star0"] a').get_attribute("href")
    assert link.endswith("star0/report.html") and (out / "star0" / "report.html").exists()
    _not_blank(d)


def test_batch_index_links_of_hostile_names_run_no_script(browser, tmp_path):
    # target names that are a script URL or spreadsheet formulas: the index links are
    # relative paths into the batch folder and summary.csv cells are inert
    from selenium.common.exceptions import NoAlertPresentException
    from selenium.webdriver.common.by import By

    make_targets(tmp_path / "in", 3)
    hostile = ["javascript:alert(3)", "=1+1", "@SUM(1+1)"]
    rows = ["name,data,star_mass,star_mass_err,max_companions"]
    rows += [f'"{n}",star{k}.txt,1.0,0.05,1' for k, n in enumerate(hostile)]
    targets = tmp_path / "in" / "hostile.csv"
    targets.write_text("\n".join(rows) + "\n")
    out = tmp_path / "out"
    code = main(["batch", str(targets), "--out", str(out), "--quick", "--quiet", "--workers", "2"])
    assert code == 0
    with open(out / "summary.csv") as fh:
        names = {r["name"] for r in csv.DictReader(fh) if r["row"] == "target"}
    assert names == {"javascript:alert(3)", "'=1+1", "'@SUM(1+1)"}
    page = out / "index.html"
    assert 'href="javascript:' not in page.read_text()
    root = out.resolve().as_uri()
    d = _open(browser, page)
    n_links = len(d.find_elements(By.CSS_SELECTOR, "#targets a"))
    assert n_links >= 6  # a name link and a thumbnail link per target
    for k in range(n_links):
        d = _open(browser, page)
        link = d.find_elements(By.CSS_SELECTOR, "#targets a")[k]
        assert link.get_attribute("href").startswith(root + "/")
        link.click()
        with pytest.raises(NoAlertPresentException):
            d.switch_to.alert.text  # noqa: B018  (no script ran)
        assert d.current_url.startswith(root + "/")
