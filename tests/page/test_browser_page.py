"""The browser page end to end in headless Chromium (Debian chromium and chromium-driver)."""

from __future__ import annotations

import csv
import os
import shutil

import pytest
from lagwise.demo import elmsworth_samples

from tests.batch_data import batch
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
    with running_service({"LAGWISE_DEADLINE_SECONDS": "300"}, workers=1) as base:
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
    WebDriverWait(browser, 10).until(lambda d: d.find_elements(By.ID, "value-3"))
    assert Select(browser.find_element(By.ID, "col-x")).first_selected_option.text == "easting"
    # The one numeric column not taken by coordinates or ids is ticked by its content.
    assert browser.find_element(By.ID, "value-3").is_selected()
    assert len(browser.find_elements(By.CSS_SELECTOR, ".value-pick")) == 1
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
    assert not browser.find_element(By.ID, "batch").is_displayed()
    browser.save_screenshot(str(tmp_path / "page.png"))


BATCH_COLUMNS = ("lead", "nitrate", "toluene", "empty")


def _batch_csv(path, columns=BATCH_COLUMNS, bad_cell=None):
    """The invented batch's analytes as a laboratory CSV: empty where not measured, <limit below it;
    ``empty`` is a column with one result only; ``bad_cell`` (column, row) holds text."""
    samples = batch()
    variables = dict(samples["variables"], empty=[1.0] + [None] * (len(samples["x"]) - 1))
    with open(path, "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["sample", "easting", "northing", *columns])
        for i, (x, y) in enumerate(zip(samples["x"], samples["y"], strict=True)):
            cells = []
            for name in columns:
                limit = samples["detection_limits"].get(name, [None] * len(samples["x"]))[i]
                value = variables[name][i]
                cells.append(f"<{limit}" if limit is not None else "" if value is None else value)
            if bad_cell is not None and i == bad_cell[1]:
                cells[columns.index(bad_cell[0])] = "n/a"
            writer.writerow([f"S{i + 1}", x, y, *cells])
    return path


def _tick(browser, header, names, units=None):
    from selenium.webdriver.common.by import By

    for name in header:
        box = browser.find_element(By.ID, f"value-{3 + header.index(name)}")
        if box.is_selected() != (name in names):
            box.click()
    for name, unit in (units or {}).items():
        browser.find_element(By.ID, f"unit-{3 + header.index(name)}").send_keys(unit)


def test_several_value_columns_give_results_per_variable(browser, url, tmp_path):
    """Three analytes of the invented batch (heterotopic, one below its detection limit) in one run."""
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support import expected_conditions as ec
    from selenium.webdriver.support.ui import Select, WebDriverWait

    browser.get(url + "/")
    browser.find_element(By.ID, "file").send_keys(str(_batch_csv(tmp_path / "batch.csv")))
    WebDriverWait(browser, 10).until(lambda d: d.find_elements(By.ID, "value-6"))
    assert [b.is_selected() for b in browser.find_elements(By.CSS_SELECTOR, ".value-pick")] == [
        True,
        False,
        False,
        False,
    ]
    _tick(browser, BATCH_COLUMNS, ("lead", "nitrate", "toluene"), {"lead": "mg/kg", "toluene": "ug/kg"})
    Select(browser.find_element(By.ID, "transform")).select_by_value("log")
    browser.find_element(By.ID, "run").click()
    WebDriverWait(browser, 240).until(ec.visibility_of_element_located((By.ID, "batch")))
    browser.save_screenshot(str(tmp_path / "batch-top.png"))
    rows = browser.find_elements(By.CSS_SELECTOR, "#batch-table tbody tr")
    cells = [[td.text for td in r.find_elements(By.TAG_NAME, "td")] for r in rows]
    assert [c[0] for c in cells] == ["lead", "nitrate", "toluene"]
    assert [c[1] for c in cells] == ["mg/kg", "", "ug/kg"]
    measured = batch()["variables"]
    assert [int(c[2]) for c in cells] == [sum(v is not None for v in measured[n]) for n in ("lead", "nitrate")] + [
        sum(v is not None for v in measured["toluene"]) + 1  # the censored result counts as a sample
    ]
    assert "Verdict for lead" in browser.find_element(By.ID, "shown-title").text
    Select(browser.find_element(By.ID, "variable")).select_by_index(2)
    assert "Verdict for toluene" in browser.find_element(By.ID, "shown-title").text
    assert "detection limit" in browser.find_element(By.ID, "warnings").text
    assert browser.find_element(By.CSS_SELECTOR, "#figure-variogram svg").is_displayed()
    assert "toluene" in browser.find_element(By.CSS_SELECTOR, "#figure-variogram").text
    browser.find_element(By.LINK_TEXT, "nitrate").click()
    assert "Verdict for nitrate" in browser.find_element(By.ID, "shown-title").text
    browser.save_screenshot(str(tmp_path / "batch.png"))


def _run_with_error(browser, url, path, names, field, seconds):
    """Upload ``path``, tick ``names``, run, and return the text that appears in ``field``."""
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import WebDriverWait

    browser.get(url + "/")
    browser.find_element(By.ID, "file").send_keys(str(path))
    WebDriverWait(browser, 10).until(lambda d: d.find_elements(By.ID, "value-6"))
    _tick(browser, BATCH_COLUMNS, names)
    browser.find_element(By.ID, "run").click()
    WebDriverWait(browser, seconds).until(lambda d: d.find_element(By.ID, field).text != "")
    return browser.find_element(By.ID, field).text


def test_errors_of_a_value_column_show_beside_it(browser, url, tmp_path):
    """A text cell is refused in the page beside its column; the service's refusal of a column with
    one result (a problem pointing at /samples/variables/empty) lands beside that column too."""
    from selenium.webdriver.common.by import By

    bad = _batch_csv(tmp_path / "bad.csv", bad_cell=("nitrate", 4))
    text = _run_with_error(browser, url, bad, ("lead", "nitrate"), "value-error-4", 10)
    assert "Row 6, column nitrate: 'n/a' is not a number" in text
    assert browser.find_element(By.ID, "value-error-3").text == ""

    one = _batch_csv(tmp_path / "one.csv")
    assert "/samples/variables/empty" in _run_with_error(browser, url, one, ("lead", "empty"), "value-error-6", 60)
    assert browser.find_element(By.ID, "value-error-3").text == ""
    assert browser.find_element(By.ID, "csv-error").text == ""


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


@pytest.mark.parametrize(
    "text, header, rows",
    [
        # RFC 4180: a quoted field holds the separator, quotes written twice and line breaks; CRLF ends records.
        (
            'x,y,value,id\r\n1,2,3,"A, north"\r\n4,5,6,"say ""hi"""\r\n',
            ["x", "y", "value", "id"],
            [["1", "2", "3", "A, north"], ["4", "5", "6", 'say "hi"']],
        ),
        ('x;y;value\n1;2;"7"\n\n3;4;"two\nlines"\n', ["x", "y", "value"], [["1", "2", "7"], ["3", "4", "two\nlines"]]),
        ('"x","y","value"\n1,2,3\n', ["x", "y", "value"], [["1", "2", "3"]]),
        ('"a,b";c\n1;2\n', ["a,b", "c"], [["1", "2"]]),
        ("\ufeffx\ty\tvalue\n1\t2\t3", ["x", "y", "value"], [["1", "2", "3"]]),
    ],
)
def test_quoted_csv_fields_are_read(browser, url, text, header, rows):
    browser.get(url + "/")
    assert browser.execute_script("return parseCsv(arguments[0])", text) == {"header": header, "rows": rows}


@pytest.mark.parametrize(
    "text, message",
    [
        ('x,y,value\n1,2,"3\n', "Row 2 has a quoted field that is not closed."),
        ('x,y,value\n1,2,"3"x\n', "Row 2 has text after the closing quote"),
    ],
)
def test_broken_quotes_are_named(browser, url, text, message):
    browser.get(url + "/")
    error = browser.execute_script("try { parseCsv(arguments[0]); return ''; } catch (e) { return e.message; }", text)
    assert error.startswith(message)
