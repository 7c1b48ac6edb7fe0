"""The workbench in a real browser: Debian's headless Chromium driven by Selenium through Debian's chromedriver.

The server runs in a background thread on a free port.  The test opens a demo formula (invented demo data),
moves the replacement slider and waits for a figure of the US panel to change, then clicks a figure and reads
its trace.  `.ci/run` installs chromium and chromium-driver; the test skips, saying why, only where they cannot
be installed."""

from __future__ import annotations

import shutil
import socket
import threading
from pathlib import Path

import pytest

from labelcalc.workbench.server import create_app
from labelcalc.workbench.workspace import Workspace
from tests.conftest import DEMO

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
DRIVER = shutil.which("chromedriver")
pytestmark = pytest.mark.skipif(
    not (CHROMIUM and DRIVER),
    reason="no Chromium and chromedriver on this machine (.ci/run installs Debian's chromium and chromium-driver "
    "where apt-get can; here it could not)",
)


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture()
def server(tmp_path: Path):
    import uvicorn

    folder = tmp_path / "range"
    shutil.copytree(DEMO, folder)
    port = _free_port()
    srv = uvicorn.Server(
        uvicorn.Config(
            create_app(Workspace.open(folder, markets=["us", "eu"])), host="127.0.0.1", port=port, log_level="warning"
        )
    )
    thread = threading.Thread(target=srv.run, daemon=True)
    thread.start()
    for _ in range(400):  # wait for the socket, not for a time: the loop ends as soon as the server listens
        if srv.started:
            break
        thread.join(0.025)
    assert srv.started, "the workbench server did not start"
    yield f"http://127.0.0.1:{port}"
    srv.should_exit = True
    thread.join(10)


@pytest.fixture()
def browser():
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    opts = webdriver.ChromeOptions()
    opts.binary_location = CHROMIUM
    for arg in (
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-first-run",
        "--window-size=1400,1000",
    ):
        opts.add_argument(arg)
    drv = webdriver.Chrome(service=Service(executable_path=DRIVER), options=opts)
    yield drv
    drv.quit()


def test_slider_changes_a_panel_figure_and_a_figure_shows_its_trace(server, browser):
    from selenium.webdriver.common.by import By
    from selenium.webdriver.common.keys import Keys
    from selenium.webdriver.support.ui import Select, WebDriverWait

    calories = (By.CSS_SELECTOR, 'figure[data-market="us"] button.fig[data-nutrient="energy_kcal"]')
    browser.get(server + "/")
    browser.find_element(By.LINK_TEXT, "Kettle crisps, sea salt").click()
    wait = WebDriverWait(browser, 30)
    before = wait.until(lambda b: b.find_element(*calories)).text
    assert before

    Select(browser.find_element(By.ID, "replace")).select_by_value("sunflower_oil")
    Select(browser.find_element(By.ID, "with")).select_by_value("spe_frying_fat")
    wait.until(lambda b: b.find_elements(By.CSS_SELECTOR, "#chart polyline"))
    browser.find_element(By.ID, "level").send_keys(Keys.END)  # the slider to 100 %, as a keyboard user moves it
    wait.until(lambda b: b.find_element(By.ID, "level-out").text == "100 %")
    after = wait.until(lambda b: (t := b.find_element(*calories).text) != before and t)
    assert after != before
    assert "100.0 % of" in browser.find_element(By.CSS_SELECTOR, ".replacing").text

    browser.find_element(*calories).click()
    pane = wait.until(lambda b: b.find_element(By.ID, "trace").is_displayed() and b.find_element(By.ID, "trace"))
    wait.until(lambda b: "Contributions" in pane.text)
    assert "spe_frying_fat" in pane.text or "hl_kettle_base_fried" in pane.text
