"""``tracer report`` pages in a real headless Chromium (README, "Report pages").

Every expected pixel and value is computed here from the NPZ files with NumPy alone: the sRGB curve
is written out from IEC 61966-2-1 (linear segment 12.92 x up to 0.0031308, else 1.055 x^(1/2.4) -
0.055), and the page's half floats are NumPy's float16 rounding of the stored float32 values.
"""

from __future__ import annotations

import json
import os
import shutil
import time
from pathlib import Path

import numpy as np
import pytest

from tests.browser.driver import (canvas_pixels, console_errors, navigate, open_page, requested_urls, start_browser,
                                  wait_ready)
from tests.cli.cli_helpers import assert_user_error, invoke
from tests.dataset.plans import write_plan

pytestmark = pytest.mark.slow

ROOT = Path(__file__).resolve().parents[2]
SCREENSHOTS = os.environ.get("TRACER_SCREENSHOTS")      # a folder to keep the screenshots in (the README's come from here)


def srgb_bytes(linear) -> np.ndarray:
    """IEC 61966-2-1 encoding of linear values clamped to [0, 1], as 8-bit codes."""
    x = np.clip(np.asarray(linear, dtype=np.float64), 0.0, 1.0)
    encoded = np.where(x <= 0.0031308, 12.92 * x, 1.055 * np.power(x, 1 / 2.4) - 0.055)
    return np.rint(encoded * 255.0)


def half(array) -> np.ndarray:
    return np.asarray(array, dtype=np.float32).astype(np.float16).astype(np.float64)


def npz(path) -> dict:
    with np.load(path, allow_pickle=False) as archive:
        return {key: archive[key] for key in archive.files}


def manifest(folder) -> list[dict]:
    return [json.loads(line) for line in (Path(folder) / "manifest.jsonl").read_text().splitlines() if line.strip()]


def keep_screenshot(driver, tmp: Path, name: str) -> Path:
    path = tmp / f"{name}.png"
    driver.execute_script("window.scrollTo(0, 0)")
    driver.save_screenshot(str(path))
    assert path.stat().st_size > 10_000
    if SCREENSHOTS:
        Path(SCREENSHOTS).mkdir(parents=True, exist_ok=True)
        shutil.copy(path, Path(SCREENSHOTS) / path.name)
    return path


def assert_only_local_requests(driver, folder: Path) -> None:
    urls = requested_urls(driver)
    assert urls, "the performance log saw no requests at all"
    inside = folder.resolve().as_uri()
    outside = [url for url in urls if not url.startswith(inside)]
    assert not outside, outside
    assert console_errors(driver) == []


def set_exposure(driver, stops: float) -> None:
    driver.execute_script("const e = document.getElementById('exposure'); e.value = arguments[0];"
                          "e.dispatchEvent(new Event('input'));", str(stops))


def hover_pixel(driver, selector: str, x: int, y: int) -> None:
    from selenium.webdriver.common.action_chains import ActionChains
    from selenium.webdriver.common.by import By

    canvas = driver.find_element(By.CSS_SELECTOR, selector)
    driver.execute_script("arguments[0].scrollIntoView({block: 'center'})", canvas)
    zoom = canvas.size["width"] / int(canvas.get_attribute("width"))
    assert zoom >= 2
    dx = (x + 0.5) * zoom - canvas.size["width"] / 2
    dy = (y + 0.5) * zoom - canvas.size["height"] / 2
    ActionChains(driver).move_to_element_with_offset(canvas, int(round(dx)), int(round(dy))).perform()


def shown_values(driver, row_id: str) -> np.ndarray:
    text = driver.execute_script("return document.getElementById(arguments[0]).dataset.values", f"readout-{row_id}")
    return np.array([float(v) for v in json.loads(text)])


def assert_float16_equal(shown, stored) -> None:
    """The read-out (5 significant digits of the float16 value) against the float32 value in the NPZ:
    float16 rounding is at most 2**-11 relative (2**-25 absolute below 2**-14, subnormals)."""
    stored = np.atleast_1d(np.asarray(stored, dtype=np.float64))
    bound = np.abs(stored) * (2.0 ** -11 + 1e-4) + 2.0 ** -24
    assert np.all(np.abs(shown - stored) <= bound), (shown, stored)


# --- fixtures ----------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def dataset(tmp_path_factory):
    """8 items (plume, figurine) of 48 x 40 pixels at 1 and 4 spp, and predictions: the baseline filter on 1 spp."""
    from tracer.dataset.run import build_dataset

    tmp = tmp_path_factory.mktemp("report")
    plan = write_plan(tmp / "plan", views=4, width=48, height=40, input_spp=(1, 4), reference_spp=32)
    build_dataset(plan, tmp / "ds")
    for record in manifest(tmp / "ds"):
        source = tmp / "ds" / record["files"]["spp0001.npz"]["path"]
        assert invoke("denoise", source, "--out", tmp / "pred" / record["id"]).exit_code == 0
    result = invoke("score-dataset", tmp / "ds", "--predictions", tmp / "pred", "--input-spp", 1,
                    "--json", tmp / "scores.json")
    assert result.exit_code == 0, result.output
    return tmp


@pytest.fixture(scope="module")
def browser():
    driver = start_browser()
    yield driver
    driver.quit()


def write(path, out) -> None:
    result = invoke("report", path, "--out", out)
    assert result.exit_code == 0, result.output
    assert (out / "index.html").is_file()


# --- the render page -----------------------------------------------------------------------------

def test_render_page_exposure_and_hover(dataset, browser, tmp_path):
    record = manifest(dataset / "ds")[2]
    source = dataset / "ds" / record["files"]["reference.npz"]["path"]
    arrays = npz(source)
    out = tmp_path / "render-report"
    write(source, out)
    open_page(browser, out)
    keys = browser.execute_script("return Array.from(document.querySelectorAll('.buffer')).map(b => b.dataset.key)")
    assert sorted(keys) == sorted(k for k in arrays if k != "meta")          # every buffer of the file

    radiance = half(arrays["radiance"])
    at_zero = canvas_pixels(browser, "#view")[..., :3].astype(np.float64)
    assert np.abs(at_zero - srgb_bytes(radiance)).max() <= 1
    set_exposure(browser, 1.5)
    brighter = canvas_pixels(browser, "#view")[..., :3].astype(np.float64)
    assert np.abs(brighter - srgb_bytes(radiance * 2 ** 1.5)).max() <= 1         # radiance x 2^stops, sRGB
    assert np.abs(brighter - srgb_bytes(radiance * 2 ** 1.0)).max() > 1          # a wrong factor would show
    assert (brighter > at_zero + 1).mean() > 0.5

    # a pixel whose radiance differs from every neighbour's by more than the tolerance
    height, width = radiance.shape[:2]
    luminance = arrays["radiance"].sum(axis=2)
    candidates = [(abs(luminance[y, x] - luminance[y - 1:y + 2, x - 1:x + 2]).reshape(-1)[[0, 1, 2, 3, 5, 6, 7, 8]].min(), x, y)
                  for y in range(1, height - 1) for x in range(1, width - 1) if arrays["event1_hit"][y, x] > 0]
    _, x, y = max(candidates)
    hover_pixel(browser, "#view", x, y)
    assert browser.find_element("id", "readout-pixel").text == f"pixel x {x}, y {y}"
    for key in ("radiance", "radiance_variance", "event1_depth", "event1_normal", "alpha", "albedo"):
        assert_float16_equal(shown_values(browser, key), arrays[key][y, x])
    from selenium.webdriver.common.keys import Keys

    browser.find_element("id", "view").send_keys(Keys.ARROW_RIGHT, Keys.ARROW_DOWN)     # the keyboard moves it too
    assert browser.find_element("id", "readout-pixel").text == f"pixel x {x + 1}, y {y + 1}"
    assert_float16_equal(shown_values(browser, "radiance"), arrays["radiance"][y + 1, x + 1])
    assert_only_local_requests(browser, out)
    keep_screenshot(browser, tmp_path, "report-render")


# --- the dataset page ----------------------------------------------------------------------------

def test_dataset_table_filters_and_compare_divider(dataset, browser, tmp_path):
    from selenium.webdriver.common.action_chains import ActionChains
    from selenium.webdriver.support.ui import Select

    records = manifest(dataset / "ds")
    out = tmp_path / "dataset-report"
    write(dataset / "ds", out)
    open_page(browser, out)
    visible = lambda: browser.execute_script(
        "return Array.from(document.querySelectorAll('#items tr')).filter(r => !r.hidden).map(r => r.dataset.id)")
    assert visible() == [r["id"] for r in records]                               # one row per manifest record
    assert browser.execute_script("return document.querySelectorAll('#items img').length") == 3 * len(records)
    keep_screenshot(browser, tmp_path, "report-dataset")
    for split in sorted({r["split"] for r in records}):
        Select(browser.find_element("id", "filter-split")).select_by_value(split)
        assert visible() == [r["id"] for r in records if r["split"] == split]
    Select(browser.find_element("id", "filter-split")).select_by_value("")
    Select(browser.find_element("id", "filter-volume")).select_by_value("figurine.nrrd")
    assert visible() == [r["id"] for r in records if r["volume"].endswith("figurine.nrrd")]

    record = records[6]                                                          # a figurine view
    navigate(browser, "#item=" + record["id"])
    left = half(npz(dataset / "ds" / record["files"]["spp0001.npz"]["path"])["radiance"])
    right = half(npz(dataset / "ds" / record["files"]["reference.npz"]["path"])["radiance"])
    width = left.shape[1]
    shown = canvas_pixels(browser, "#compare")[..., :3].astype(np.float64)
    assert browser.find_element("id", "divider").get_attribute("value") == "50"
    assert np.abs(shown[:, :width // 2] - srgb_bytes(left[:, :width // 2])).max() <= 1       # candidate on the left
    assert np.abs(shown[:, width // 2:] - srgb_bytes(right[:, width // 2:])).max() <= 1      # reference on the right
    assert np.abs(shown[:, :width // 2] - srgb_bytes(right[:, :width // 2])).max() > 1       # and they differ
    features = browser.execute_script("return Array.from(document.querySelectorAll('#features canvas')).map(c => c.dataset.key)")
    assert {"albedo", "event1_normal", "event1_depth", "alpha", "event2_position"} <= set(features)
    hover_pixel(browser, "#compare", width // 2 - 4, left.shape[0] // 2)
    keep_screenshot(browser, tmp_path, "report-compare")

    canvas = browser.find_element("id", "compare")
    ActionChains(browser).move_to_element_with_offset(canvas, -canvas.size["width"] // 4, 0).click_and_hold() \
        .move_by_offset(-2, 0).release().perform()                                   # drag the divider to about 25 %
    quarter = int(browser.find_element("id", "divider").get_attribute("value"))
    assert 20 <= quarter <= 28
    column = round(quarter / 100 * width)
    shown = canvas_pixels(browser, "#compare")[..., :3].astype(np.float64)
    assert np.abs(shown[:, column:] - srgb_bytes(right[:, column:])).max() <= 1
    browser.find_element("tag name", "body").send_keys("f")                        # flip: the left image whole
    shown = canvas_pixels(browser, "#compare")[..., :3].astype(np.float64)
    assert np.abs(shown - srgb_bytes(left)).max() <= 1
    browser.find_element("tag name", "body").send_keys("f")                        # and the right one
    shown = canvas_pixels(browser, "#compare")[..., :3].astype(np.float64)
    assert np.abs(shown - srgb_bytes(right)).max() <= 1
    assert_only_local_requests(browser, out)


def test_broken_dataset_is_flagged(dataset, browser, tmp_path):
    broken = tmp_path / "ds"
    shutil.copytree(dataset / "ds", broken)
    records = manifest(broken)
    (broken / records[1]["files"]["spp0004.npz"]["path"]).unlink()
    with open(broken / records[5]["files"]["reference.npz"]["path"], "ab") as handle:
        handle.write(b"\0")
    out = tmp_path / "broken-report"
    result = invoke("report", broken, "--out", out)
    assert result.exit_code == 0, result.output
    warning = [line for line in result.stderr.splitlines() if line.startswith("warning:")]
    assert len(warning) == 1 and "2 file(s) missing or altered" in warning[0]
    assert f"{records[1]['id']}: 4 spp: missing" in warning[0]
    assert f"{records[5]['id']}: reference (32 spp): checksum mismatch" in warning[0]
    open_page(browser, out)
    flagged = browser.execute_script("return Array.from(document.querySelectorAll('#items tr.flagged')).map(r => r.dataset.id)")
    assert flagged == [records[1]["id"], records[5]["id"]]
    assert "2 item(s)" in browser.find_element("id", "flag-summary").text
    browser.find_element("id", "filter-flagged").click()
    assert browser.execute_script("return Array.from(document.querySelectorAll('#items tr')).filter(r => !r.hidden).length") == 2
    navigate(browser, "#item=" + records[1]["id"])                                   # the item still opens
    assert "4 spp: missing" in browser.find_element("css selector", "#section .alert").text
    assert_only_local_requests(browser, out)


# --- the score page ------------------------------------------------------------------------------

def test_score_page_sorted_worst_first_and_linked(dataset, browser, tmp_path):
    result = json.loads((dataset / "scores.json").read_text())
    out = tmp_path / "score-report"
    write(dataset / "scores.json", out)
    open_page(browser, out)
    rows = lambda: browser.execute_script(
        "return Array.from(document.querySelectorAll('#scores tr')).map(r => [r.dataset.id, r.cells[2].textContent])")
    by_psnr = sorted(result["items"], key=lambda item: item["scores"]["psnr_db"])
    assert rows() == [[item["id"], f"{item['scores']['psnr_db']:.2f}"] for item in by_psnr]     # worst first
    browser.find_element("css selector", "button.sort[data-column='2']").click()
    assert [r[0] for r in rows()] == [item["id"] for item in reversed(by_psnr)]
    dots = browser.execute_script("return document.querySelectorAll('#psnr-plot circle.candidate').length")
    assert dots == sum(1 for item in result["items"] if item["equal_quality_spp"] is not None) > 0
    assert browser.execute_script("return document.querySelectorAll('#psnr-plot polyline.ladder').length") == len(result["items"])
    keep_screenshot(browser, tmp_path, "report-score")

    worst = by_psnr[0]["id"]
    link = browser.find_element("css selector", f"#scores tr[data-id='{worst}'] a")
    before = int(browser.execute_script("return document.documentElement.dataset.ready"))
    link.click()
    wait_ready(browser, before + 1)
    assert browser.execute_script("return location.hash") == "#item=" + worst
    prediction = half(npz(dataset / "pred" / f"{worst}.npz")["radiance"])
    reference = half(npz(next(dataset.glob(f"ds/items/{worst}/reference.npz")))["radiance"])
    width = prediction.shape[1]
    shown = canvas_pixels(browser, "#compare")[..., :3].astype(np.float64)
    assert np.abs(shown[:, :width // 2] - srgb_bytes(prediction[:, :width // 2])).max() <= 1
    assert np.abs(shown[:, width // 2:] - srgb_bytes(reference[:, width // 2:])).max() <= 1
    assert_only_local_requests(browser, out)


# --- size and time -------------------------------------------------------------------------------

def test_a_200_item_report_is_written_in_30_s_and_opens_in_3_s(tmp_path, browser):
    """Two rendered items of 128 x 128 pixels (1, 4 spp and a 32-spp reference), each listed 100 times."""
    from tracer.dataset.manifest import write_manifest
    from tracer.dataset.run import build_dataset

    plan = write_plan(tmp_path / "plan", views=1, width=128, height=128, input_spp=(1, 4), reference_spp=32,
                      splits='train = 0.5\nvalidation = 0.25\ntest = 0.25\nby = "view"')
    build_dataset(plan, tmp_path / "two")
    seeds = manifest(tmp_path / "two")
    big = tmp_path / "big"
    records = []
    for index in range(200):
        record = json.loads(json.dumps(seeds[index % len(seeds)]))
        record["index"], record["id"] = index, f"{index:05d}-copy"
        record["split"] = ("train", "validation", "test")[index % 3]
        for entry in record["files"].values():
            source = tmp_path / "two" / entry["path"]
            entry["path"] = f"items/{record['id']}/{Path(entry['path']).name}"
            (big / entry["path"]).parent.mkdir(parents=True, exist_ok=True)
            shutil.copy(source, big / entry["path"])
        records.append(record)
    write_manifest(big, records)
    out = tmp_path / "big-report"
    started = time.perf_counter()
    write(big, out)
    written = time.perf_counter() - started
    opened = open_page(browser, out)
    rows = browser.execute_script("return document.querySelectorAll('#items tr').length")
    print(f"200-item report: written in {written:.2f} s, opened in {opened:.2f} s, "
          f"{sum(f.stat().st_size for f in out.rglob('*') if f.is_file()) / 1e6:.1f} MB")
    assert rows == 200
    assert written < 30.0
    assert opened < 3.0
    assert console_errors(browser) == []


# --- bad input -----------------------------------------------------------------------------------

def test_bad_paths_are_one_line_and_write_nothing(tmp_path, dataset):
    out = tmp_path / "out"
    assert_user_error(invoke("report", tmp_path / "nothing.npz", "--out", out), "nothing.npz", "not found")
    (tmp_path / "empty").mkdir()
    assert_user_error(invoke("report", tmp_path / "empty", "--out", out), "not a dataset folder (manifest.jsonl missing)")
    (tmp_path / "notes.txt").write_text("hello")
    assert_user_error(invoke("report", tmp_path / "notes.txt", "--out", out), "notes.txt", "not a render .npz")
    (tmp_path / "other.json").write_text('{"a": 1}')
    assert_user_error(invoke("report", tmp_path / "other.json", "--out", out), "not a score-dataset result")
    (tmp_path / "bad.npz").write_bytes(b"not a zip")
    assert_user_error(invoke("report", tmp_path / "bad.npz", "--out", out), "bad.npz", "not a readable NPZ")
    taken = tmp_path / "taken"
    taken.mkdir()
    (taken / "thesis.tex").write_text("keep me")
    assert_user_error(invoke("report", dataset / "ds", "--out", taken), "not empty and holds no earlier report")
    assert not out.exists()
    assert [p.name for p in taken.iterdir()] == ["thesis.tex"]
    assert not any(p.name.startswith(".") for p in tmp_path.iterdir())              # no staging folder left
