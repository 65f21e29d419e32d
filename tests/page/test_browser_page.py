"""The browser page end to end in headless Chromium (Debian chromium and chromium-driver)."""

from __future__ import annotations

import csv
import os
import shutil

import pytest
from lagwise.demo import elmsworth_samples

from tests.live import running_service

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
DRIVER = shutil.which("chromedriver") or "/usr/bin/chromedriver"
pytestmark = pytest.mark.skipif(
    not (os.path.exists(CHROMIUM) and os.path.exists(DRIVER)), reason="needs Debian's chromium and chromium-driver"
)


@pytest.fixture(scope="module")
def browser(tmp_path_factory):
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    for flag in (
        "--headless=new",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--window-size=1200,2200",
        f"--user-data-dir={tmp_path_factory.mktemp('chromium')}",
    ):
        options.add_argument(flag)
    driver = webdriver.Chrome(service=Service(executable_path=DRIVER), options=options)
    yield driver
    driver.quit()


@pytest.fixture(scope="module")
def url():
    with running_service(workers=1) as base:
        yield base


def _demo_csv(path):
    samples = elmsworth_samples()
    with open(path, "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["sample", "easting", "northing", "lead"])
        for row in zip(samples["ids"], samples["x"], samples["y"], samples["values"], strict=True):
            writer.writerow(row)
    return path


def test_upload_run_and_see_results(browser, url, tmp_path):
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support import expected_conditions as ec
    from selenium.webdriver.support.ui import Select, WebDriverWait

    browser.get(url + "/")
    browser.find_element(By.ID, "file").send_keys(str(_demo_csv(tmp_path / "elmsworth.csv")))
    WebDriverWait(browser, 10).until(lambda d: len(Select(d.find_element(By.ID, "col-value")).options) == 4)
    assert Select(browser.find_element(By.ID, "col-x")).first_selected_option.text == "easting"
    Select(browser.find_element(By.ID, "col-value")).select_by_visible_text("lead")
    Select(browser.find_element(By.ID, "transform")).select_by_value("log")
    browser.find_element(By.ID, "directions").click()
    browser.find_element(By.ID, "run").click()
    WebDriverWait(browser, 60).until(ec.visibility_of_element_located((By.ID, "results")))
    rows = browser.find_elements(By.CSS_SELECTOR, "#statistics tbody tr")
    assert any("root mean square standardized error" in r.text for r in rows)
    assert browser.find_element(By.CSS_SELECTOR, "#figure-variogram svg").is_displayed()
    assert "Spatial structure" in browser.find_element(By.ID, "verdict").text
    rows = browser.find_elements(By.CSS_SELECTOR, "#strategies tbody tr")
    assert len(rows) >= 2 and sum(r.find_elements(By.TAG_NAME, "td")[4].text == "yes" for r in rows) == 1
    browser.save_screenshot(str(tmp_path / "page.png"))


@pytest.mark.parametrize(
    "text, message",
    [
        ("x;y,value\n1;2,3\n", "mixes separators"),
        ("x,y,value\n", "no data rows"),
        ("x,y,value\n1,2,3\n4,five,6\n", "Row 3, column y"),
    ],
)
def test_bad_csv_shows_an_error_beside_the_upload(browser, url, tmp_path, text, message):
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import WebDriverWait

    browser.get(url + "/")
    path = tmp_path / "bad.csv"
    path.write_text(text)
    browser.find_element(By.ID, "file").send_keys(str(path))
    browser.find_element(By.ID, "run").click()
    WebDriverWait(browser, 10).until(lambda d: d.find_element(By.ID, "csv-error").text != "")
    assert message in browser.find_element(By.ID, "csv-error").text
