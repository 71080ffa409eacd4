"""The HTML review in a real browser: the system's Chromium (the Debian package), driven
by playwright with its executable path; nothing downloads a browser of its own.

Under CI=true a missing browser or playwright fails these tests (.ci/run installs the
browser first); elsewhere they skip and say why. Screenshots are saved as test artifacts
in build/browser/ (AMPCHECK_ARTIFACTS overrides the folder); the README's picture of a
stage is the one saved here.
"""

from __future__ import annotations

import os
import pathlib
import shutil
import tempfile

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "samples"
ARTIFACTS = pathlib.Path(os.environ.get("AMPCHECK_ARTIFACTS", ROOT / "build" / "browser"))
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", "--no-first-run"]
SHOWN_STAGE = "conductivity-gain"  # the stage the README's screenshot shows
A4_WIDTH_PX = 794  # 210 mm at 96 px per inch (CSS reference pixel)


def _unavailable(reason: str):
    if os.environ.get("CI") == "true":
        pytest.fail(f"{reason} (CI=true: .ci/run installs it, so this is a failure)")
    pytest.skip(reason)


def _browser_path() -> str:
    path = os.environ.get("AMPCHECK_CHROMIUM") or shutil.which("chromium") or \
        shutil.which("chromium-browser")
    if not path:
        _unavailable("no chromium on PATH: apt-get install chromium")
    return path


@pytest.fixture(scope="module")
def browser():
    path = _browser_path()
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        _unavailable("playwright is not installed: pip install '.[test]'")
    profile = tempfile.mkdtemp(prefix="ampcheck-chromium-")
    with sync_playwright() as driver:
        context = driver.chromium.launch_persistent_context(
            profile, executable_path=path, headless=True, args=FLAGS,
            viewport={"width": 1100, "height": 900})
        try:
            yield context
        finally:
            context.close()
            shutil.rmtree(profile, ignore_errors=True)


@pytest.fixture(scope="module")
def reviews(tmp_path_factory):
    """The samples' review as one file and as a folder, written by the command line."""
    pytest.importorskip("matplotlib")
    from checker.cli import main

    folder = tmp_path_factory.mktemp("browser")
    one = folder / "review.html"
    many = folder / "review"
    here = os.getcwd()
    os.chdir(ROOT)  # the review names the samples as a user at the root would see them
    try:
        assert main(["check", "samples", "--fail-on", "never", "--format", "compact",
                     "--output", f"html:{one}", "--output", f"html:{many}"]) == 0
    finally:
        os.chdir(here)
    import json

    report = folder / "report.json"
    os.chdir(ROOT)
    try:
        assert main(["check", "samples", "--fail-on", "never", "--format", "compact",
                     "--output", f"json:{report}"]) == 0
    finally:
        os.chdir(here)
    document = json.loads(report.read_text(encoding="utf-8"))
    count = sum(len(file["stages"]) for file in document["files"])
    return one, many, count


def _open(browser, path: pathlib.Path):
    page = browser.new_page()
    problems: list[str] = []
    page.on("console", lambda message: problems.append(f"console {message.type}:"
                                                       f" {message.text}")
            if message.type in ("error", "warning") else None)
    page.on("pageerror", lambda error: problems.append(f"page error: {error}"))
    page.on("requestfailed", lambda request: problems.append(f"request failed: {request.url}"))
    page.goto(path.as_uri())
    page.wait_for_load_state("load")
    return page, problems


def test_one_file_review_loads_clean_with_every_stage_and_plot_drawn(browser, reviews):
    one, _many, count = reviews
    page, problems = _open(browser, one)
    try:
        sections = page.locator("section.stage")
        assert sections.count() == count >= 28  # every stage of the JSON report
        for i in range(count):
            box = sections.nth(i).bounding_box()
            assert box and box["width"] > 0 and box["height"] > 0
        figures = page.locator("figure.plot svg")
        assert figures.count() >= 5 * count - 20  # every stage draws most of its six kinds
        for i in range(figures.count()):
            box = figures.nth(i).bounding_box()
            assert box and box["width"] > 300 and box["height"] > 80, i
        titles = page.locator("figure.plot svg > title")
        assert titles.count() == figures.count()
        assert problems == []
        ARTIFACTS.mkdir(parents=True, exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / "review-overview.png"))
        stage = page.locator(f"section.stage[id$='-{SHOWN_STAGE}']")
        stage.screenshot(path=str(ARTIFACTS / "review-stage.png"))
        assert (ARTIFACTS / "review-stage.png").stat().st_size > 10_000
    finally:
        page.close()


def test_overview_links_reach_their_stages(browser, reviews):
    one, _many, count = reviews
    page, problems = _open(browser, one)
    try:
        links = page.locator("table.stages a")
        hrefs = [links.nth(i).get_attribute("href") for i in range(links.count())]
        assert len(hrefs) == count and all(h.startswith("#s") for h in hrefs)
        for href in hrefs:
            assert page.locator(href).count() == 1
        for index in (0, len(hrefs) // 2, len(hrefs) - 1):
            links.nth(index).click()
            target = page.locator(hrefs[index])
            page.wait_for_function("h => location.hash === h", arg=hrefs[index])
            box = target.bounding_box()
            assert box is not None and abs(box["y"]) < 5  # scrolled to the top of the view
        assert problems == []
    finally:
        page.close()


def test_folder_review_index_reaches_every_stage_page(browser, reviews):
    _one, many, count = reviews
    page, problems = _open(browser, many / "index.html")
    try:
        links = page.locator("table.stages a")
        hrefs = [links.nth(i).get_attribute("href") for i in range(links.count())]
        assert len(hrefs) == count
        for href in hrefs[:3] + hrefs[-2:]:
            page.goto((many / href).as_uri())
            assert page.locator("section.stage").count() == 1
            for i in range(page.locator("figure.plot svg").count()):
                box = page.locator("figure.plot svg").nth(i).bounding_box()
                assert box and box["width"] > 0 and box["height"] > 0
            page.locator("nav a").click()
            page.wait_for_load_state("load")
            assert page.url.endswith("/index.html")
        assert problems == []
    finally:
        page.close()


def test_review_prints_on_a4(browser, reviews):
    one, _many, count = reviews
    page, problems = _open(browser, one)
    try:
        page.emulate_media(media="print")
        page.set_viewport_size({"width": A4_WIDTH_PX, "height": 1123})
        overflow = page.evaluate("document.documentElement.scrollWidth")
        assert overflow <= A4_WIDTH_PX
        pdf = page.pdf(format="A4", print_background=True)
        assert pdf.startswith(b"%PDF") and pdf.count(b"/Type /Page") > count
        assert problems == []
    finally:
        page.close()
