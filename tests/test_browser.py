"""The demo report in a real browser: Debian's Chromium, driven through its ChromeDriver by Selenium.

Why Selenium: it drives the browser the way a user does (a real mouse move for the hover, a real
click) through the W3C WebDriver protocol, and Debian's chromium-driver matches Debian's chromium
version for version, so nothing is downloaded at run time (the driver's path is given, so Selenium's
own driver lookup never runs). Skipped, with the reason, when chromium or chromedriver is not
installed; .ci/run installs both.

The screenshot of the report is kept in pytest's temporary folder of the run
(``<basetemp>/browser/report.png``); the path is printed.
"""

from __future__ import annotations

import csv
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from pipeline.cli import main

ROOT = Path(__file__).resolve().parents[1]
CHROMIUM = shutil.which("chromium")
DRIVER = shutil.which("chromedriver")
#: Headless flags for this closed network (the machine notes: no background connections, no GPU).
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--window-size=1280,1800")

pytestmark = pytest.mark.skipif(
    not (CHROMIUM and DRIVER),
    reason="Debian's chromium and chromium-driver are not installed "
           "(apt-get install chromium chromium-driver; .ci/run installs them)")


@pytest.fixture(scope="module")
def report(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("demo-out")
    r = CliRunner().invoke(main, ["run", str(ROOT / "demo_project"), "--out", str(out)], catch_exceptions=False)
    assert r.exit_code == 0, r.stderr
    return out / "report.html"


def _driver(profile: Path, scripts: bool = True):
    webdriver = pytest.importorskip("selenium.webdriver")
    from selenium.webdriver.chrome.service import Service

    opts = webdriver.ChromeOptions()
    opts.binary_location = CHROMIUM
    for flag in (*FLAGS, f"--user-data-dir={profile}"):
        opts.add_argument(flag)
    if not scripts:
        opts.add_experimental_option("prefs", {"profile.managed_default_content_settings.javascript": 2})
    opts.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    return webdriver.Chrome(service=Service(executable_path=DRIVER), options=opts)


@pytest.fixture(scope="module")
def page(report, tmp_path_factory):
    driver = _driver(tmp_path_factory.mktemp("chromium-profile"))
    try:
        driver.get(report.as_uri())
        yield driver
    finally:
        driver.quit()


def _errors(driver) -> list[str]:
    return [e["message"] for e in driver.get_log("browser") if e["level"] in ("SEVERE", "ERROR")]


def test_opens_without_console_errors_and_keeps_a_screenshot(page, tmp_path_factory):
    assert page.execute_script("return document.getElementById('picture-controls').hidden") is False
    assert page.execute_script("return document.querySelectorAll('#picture-nets button').length") > 5
    shots = tmp_path_factory.getbasetemp() / "browser"
    shots.mkdir(exist_ok=True)
    shot = shots / "report.png"
    page.save_screenshot(str(shot))
    picture = shots / "report-picture.png"
    page.execute_script("document.getElementById('picture').scrollIntoView()")
    page.save_screenshot(str(picture))
    page.execute_script("window.scrollTo(0, 0)")
    print(f"screenshots: {shot} {picture}")
    assert shot.stat().st_size > 10_000 and picture.stat().st_size > 10_000
    assert _errors(page) == []


def test_headline_agrees_with_the_exit_status(page):
    level = page.execute_script("return document.getElementById('verdict').dataset.level")
    status = page.execute_script("return document.getElementById('verdict').dataset.exitStatus")
    headline = page.find_element("css selector", "#verdict .headline").text
    assert (level, status) == ("attention", "0")  # the demo: a safety caution (warning) and nothing blocking
    assert headline.startswith("Fits, needs attention: safety caution")


def test_hover_shows_the_part_facts(page):
    from selenium.webdriver.common.action_chains import ActionChains

    part = page.find_element("css selector", 'g.part[data-ref="R1"] path')
    page.execute_script("arguments[0].scrollIntoView({block: 'center'})", part)
    ActionChains(page).move_to_element(part).perform()
    tip = page.find_element("css selector", "#picture-tip")
    assert tip.is_displayed()
    text = tip.text
    g = page.find_element("css selector", 'g.part[data-ref="R1"]')
    for key in ("ref", "value", "package", "height", "nets"):
        v = g.get_attribute(f"data-{key}")
        assert v and all(word in text for word in v.split()), (key, v, text)
    assert _errors(page) == []


def test_clicking_a_net_lights_its_parts_and_pins(page, report):
    button = page.find_element("css selector", '#picture-nets button[data-net-button="GND"]')
    page.execute_script("arguments[0].scrollIntoView({block: 'center'})", button)
    button.click()
    hit = set(page.execute_script(
        "return Array.from(document.querySelectorAll('g.part.net-hit')).map(g => g.dataset.ref)"))
    on_net = set(page.execute_script(
        "return Array.from(document.querySelectorAll('g.part')).filter("
        "g => g.dataset.nets.split(' ').includes('GND')).map(g => g.dataset.ref)"))
    assert hit == on_net and len(hit) >= 5
    # every pin of the net lights up, no other: the pins of GND as netlist.csv of the same run lists them,
    # less those of unfitted parts (bom-unfitted.csv), which are not on the board
    pins = set(map(tuple, page.execute_script(
        "return Array.from(document.querySelectorAll('path.pad.net-hit')).map(p => [p.dataset.ref, p.dataset.pin])")))
    with open(report.parent / "bom-unfitted.csv", newline="") as f:
        unfitted = {row["ref"] for row in csv.DictReader(f)}
    with open(report.parent / "netlist.csv", newline="") as f:
        want = {(row["ref"], row["pin"]) for row in csv.DictReader(f)
                if row["net"] == "GND" and row["ref"] not in unfitted}
    assert unfitted  # the demo's R7 is unfitted and sits on GND: the exclusion is exercised
    assert pins == want and len(want) >= 5
    fill = page.execute_script(
        "return getComputedStyle(document.querySelector('g.part.net-hit path')).fill")
    assert fill == "rgb(242, 194, 0)"  # the highlight colour of the page's style sheet (#f2c200)
    assert button.get_attribute("aria-pressed") == "true"
    button.click()  # a second click lets go
    assert page.execute_script("return document.querySelectorAll('.net-hit').length") == 0


def test_no_two_labels_overlap_as_rendered(page):
    boxes = page.execute_script(
        "return Array.from(document.querySelectorAll('#picture-figure g.labels text')).map(t => {"
        "const r = t.getBoundingClientRect(); return [t.textContent, r.left, r.top, r.right, r.bottom]; })")
    assert len(boxes) >= 20
    for i, (a, *p) in enumerate(boxes):
        for b, *q in boxes[i + 1:]:
            overlap = min(p[2], q[2]) - max(p[0], q[0]), min(p[3], q[3]) - max(p[1], q[1])
            assert min(overlap) <= 0.5, (a, b, p, q)  # half a CSS pixel of anti-aliasing at most


def test_layers_toggle_and_zoom(page):
    box = page.find_element("css selector", 'input[data-layer="labels"]')
    box.click()
    assert page.execute_script(
        "return getComputedStyle(document.querySelector('#picture-figure g.labels')).display") == "none"
    box.click()
    before = page.execute_script("return document.querySelector('#picture-figure svg').viewBox.baseVal.width")
    page.find_element("css selector", 'button[data-zoom="in"]').click()
    after = page.execute_script("return document.querySelector('#picture-figure svg').viewBox.baseVal.width")
    assert after == pytest.approx(0.8 * before, rel=1e-6)
    page.find_element("css selector", 'button[data-zoom="reset"]').click()
    assert _errors(page) == []


def test_with_scripts_blocked_the_picture_stays_readable(report, tmp_path_factory):
    driver = _driver(tmp_path_factory.mktemp("chromium-noscript"), scripts=False)
    try:
        driver.get(report.as_uri())
        svg = driver.find_element("css selector", "#picture-figure svg")
        assert svg.size["width"] > 500 and svg.size["height"] > 200
        assert not driver.find_element("css selector", "#picture-controls").is_displayed()
        labels = driver.find_elements("css selector", "#picture-figure g.labels text")
        assert len(labels) >= 20 and all(t.is_displayed() for t in labels)
    finally:
        driver.quit()
