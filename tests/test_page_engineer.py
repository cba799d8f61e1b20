"""Real-browser tests of the engineer's page items (issues 14, 10 and 12): a nozzle from numbers, the gas from
propellants, separation marks, live engine figures, calm notes for harmless no-ops, and the warm-up progress.

Same parts as tests/test_page.py: a real `shockslate serve` subprocess (its own here, so the console can be read
and a second one can run without the thermochemistry library) and Debian's Chromium through playwright. Waits
are for states, never for fixed times.

Sources:
- A = pi r^2 for the requested throat radius (geometry).
- [SB] G. P. Sutton and O. Biblarz, Rocket Propulsion Elements, Table 5-5: LOX/CH4 chamber temperature at
  1000 psia (tests/data/propellant_check_values.csv, from memory).
- The engine figures on the page are the status's, which tests/test_protocol_design.py proves equal to
  solver/nozzle_report.py's (the report's module) for the same flow.
"""
from __future__ import annotations

import csv
import importlib.util
import math
from pathlib import Path

import pytest

from shockslate.solver import nozzle
from shockslate.solver import scenario as scn
from test_page import (  # noqa: F401 - fixtures are found by name
    CHROMIUM, ROOT, WAIT_MS, browser, load_through_upload, pause, start_server, step, stop_server, stream_duct)

HAS_CANTERA = importlib.util.find_spec("cantera") is not None
ROWS = list(csv.DictReader((Path(__file__).parent / "data" / "propellant_check_values.csv").open(encoding="utf-8")))
MINUS = "\u2212"


def _start_server(tmp_path_factory, *extra: str):
    """Its own paused, one-thread server (the console is read; a second one runs without thermochemistry)."""
    log_path = tmp_path_factory.mktemp("server-log") / "server.log"
    proc, url = start_server(["--paused", "--threads", "1", *extra], tmp_path_factory.mktemp("shockslate-data"),
                             log_path)
    return proc, url, log_path


@pytest.fixture(scope="module")
def engineer_server(tmp_path_factory):
    proc, url, log_path = _start_server(tmp_path_factory)
    try:
        yield url, log_path
    finally:
        stop_server(proc)


def _open(browser, url):
    context = browser.new_context(viewport={"width": 1440, "height": 1000})
    pg = context.new_page()
    errors: list[str] = []
    pg.on("pageerror", lambda e: errors.append(str(e)))
    pg.goto(url + "/")
    pg.wait_for_function("window.shockslate && window.shockslate.scenario && window.shockslate.frame", timeout=WAIT_MS)
    return context, pg, errors


@pytest.fixture
def page(browser, engineer_server):
    context, pg, errors = _open(browser, engineer_server[0])
    yield pg
    context.close()
    assert not errors, f"script errors on the page: {errors}"


def number(text: str) -> float:
    return float(text.replace(MINUS, "-").split()[0])


def fill_nozzle(page, values: dict) -> None:
    for sel, value in values.items():
        if sel in ("#nz-mode", "#nz-shape", "#nz-length-unit"):
            page.select_option(sel, value)
        else:
            page.fill(sel, str(value))


def build_small_nozzle(page, **more) -> None:
    """Open the dialog and build a 6 mm throat, contraction 4, area ratio 12 cone at 4 cells per throat radius."""
    revision = page.evaluate("window.shockslate.revision")
    page.click("#open-nozzle-dialog")
    fill_nozzle(page, {"#nz-length-unit": "mm", "#nz-mode": "axisymmetric", "#nz-shape": "cone", "#nz-throat": 6,
                       "#nz-contraction": 4, "#nz-chamber": 12, "#nz-area-ratio": 12, "#nz-half": 15, "#nz-cells": 4,
                       **more})
    page.click("#nz-build")
    page.wait_for_function("rev => window.shockslate.revision !== rev && window.shockslate.scenario.name === "
                           "'designed nozzle'", arg=revision, timeout=WAIT_MS)


# ----------------------------------------------------------------------------- nozzle from numbers

def test_the_nozzle_dialog_builds_the_numbers_in_the_users_units_and_undo_takes_it_back(page, tmp_path):
    load_through_upload(page, stream_duct(), tmp_path)
    page.click("#open-nozzle-dialog")
    assert page.locator("#nozzle-dialog").is_visible()
    # lengths typed in centimetres: 0.6 cm throat radius, 1.2 cm chamber
    fill_nozzle(page, {"#nz-length-unit": "cm", "#nz-mode": "axisymmetric", "#nz-shape": "bell", "#nz-throat": 0.6,
                       "#nz-contraction": 4, "#nz-chamber": 1.2, "#nz-area-ratio": 8, "#nz-cells": 4})
    assert page.locator("#nz-bell").is_visible() and not page.locator("#nz-half").is_visible()
    page.click("#nz-build")
    page.wait_for_function("window.shockslate.scenario.name === 'designed nozzle'", timeout=WAIT_MS)
    assert not page.locator("#nozzle-dialog").is_visible()
    doc = page.evaluate("window.shockslate.scenario")
    drawn = nozzle.drawn_nozzle(scn.parse_scenario(doc))
    assert drawn.throat_area_m2 == pytest.approx(math.pi * 0.006 ** 2, rel=0.01)  # A = pi r^2, r = 0.6 cm
    assert "bell" in doc["description"] and doc["mode"] == "axisymmetric"
    assert page.inner_text("#scenario-name").startswith("designed nozzle")
    assert sorted(s["name"] for s in doc["stations"]) == ["exit", "throat"]
    # one undo: the duct is back
    page.click("#undo")
    page.wait_for_function("window.shockslate.scenario.mode === 'planar' && "
                           "window.shockslate.scenario.sketch.shapes.length === 0", timeout=WAIT_MS)


def test_a_refused_nozzle_number_is_named_in_the_dialog_in_the_users_units(page):
    page.click("#open-nozzle-dialog")
    fill_nozzle(page, {"#nz-length-unit": "mm", "#nz-shape": "cone", "#nz-throat": -5, "#nz-contraction": 4,
                       "#nz-chamber": 12, "#nz-area-ratio": 8, "#nz-cells": 4})
    name = page.evaluate("window.shockslate.scenario.name")
    page.click("#nz-build")
    error = page.locator("#nozzle-dialog .dialog-error")
    error.wait_for(state="visible", timeout=WAIT_MS)
    text = error.inner_text()
    assert "Throat radius" in text and f"{MINUS}5 mm" in text and "greater than 0" in text, text
    assert "invalid" in page.get_attribute("#nz-throat", "class")
    assert page.locator("#nozzle-dialog").is_visible()
    assert page.evaluate("window.shockslate.scenario.name") == name  # nothing changed
    # a bell angle above its range is named too
    fill_nozzle(page, {"#nz-throat": 6, "#nz-shape": "bell", "#nz-tn": 75, "#nz-te": 8})
    page.click("#nz-build")
    page.wait_for_function("document.querySelector('#nozzle-dialog .dialog-error').textContent.includes('inflection')",
                           timeout=WAIT_MS)
    assert "75" in error.inner_text() and "60" in error.inner_text()
    page.click("#nz-cancel")
    assert not page.locator("#nozzle-dialog").is_visible()


# ----------------------------------------------------------------------------- engine figures, separation marks

def test_engine_figures_and_separation_marks_show_on_the_page(page):
    build_small_nozzle(page)
    pause(page)
    # a 4 bar chamber through area ratio 12 at sea level: over-expanded far below 0.4 of ambient
    p0 = page.locator('[data-cond="reservoir.p0_pa"]')
    page.select_option("#pressure-unit", "kPa")
    p0.fill("400")
    p0.press("Enter")
    page.wait_for_function("window.shockslate.scenario.conditions.reservoir.p0_pa === 400000", timeout=WAIT_MS)
    for _ in range(3):
        step(page, 400)
    page.wait_for_function("window.shockslate.status.engine && window.shockslate.status.separation && "
                           "window.shockslate.status.separation.separates", timeout=WAIT_MS)
    page.wait_for_function("!document.querySelector('#engine-block').hidden", timeout=WAIT_MS)
    eng = page.evaluate("window.shockslate.status.engine")
    rows = page.evaluate("""() => Array.from(document.querySelectorAll('#engine-table tbody tr')).map((tr) =>
        Array.from(tr.children).map((td) => td.textContent))""")
    labels = [r[0] for r in rows]
    assert labels == ["thrust coefficient C_F", "C_F, ideal with divergence factor", "characteristic velocity c*",
                      "specific impulse I_sp"]
    cf, cf_div, cstar, isp = rows
    assert number(cf_div[2]) == pytest.approx(eng["ideal_thrust_coefficient_with_divergence"], rel=1e-3)
    # each beside its ideal, with its unit, the very numbers of the status (4 significant figures)
    assert number(cf[2]) == pytest.approx(eng["ideal_thrust_coefficient"], rel=1e-3)
    assert cstar[1].endswith(" m/s") and cstar[2].endswith(" m/s")
    assert number(cstar[1]) == pytest.approx(eng["c_star_sim_m_s"], rel=1e-3)
    assert number(cstar[2]) == pytest.approx(eng["c_star_m_s"], rel=1e-3)
    assert isp[1].endswith(" s") and isp[2].endswith(" s")
    assert number(isp[2]) == pytest.approx(eng["ideal_specific_impulse_s"], rel=1e-3)
    assert "kPa" in page.inner_text("#engine-note")
    # the caution line and the marks on the wall
    caution = page.inner_text("#separation-caution")
    assert "Summerfield" in caution and "not what a real nozzle does" in caution and " mm" in caution
    assert page.evaluate("window.shockslate.status.separation.marks_m.length") > 0
    # draw the picture once more now that the status holding the marks is in hand (while paused no new frame
    # need come): turning the stations-and-probes layer off and on redraws it
    page.click("#ov-marks")
    page.click("#ov-marks")
    page.evaluate("window.shockslate.framesDrawn = 0")
    page.click("#ov-marks")
    page.click("#ov-marks")
    page.wait_for_function("window.shockslate.framesDrawn > 0", timeout=WAIT_MS)
    # under load a late status or resize may redraw the picture once more: wait (bounded) for a red mark
    # the marks are read afresh each time: a step still finishing may send one more status with moved marks
    red = page.wait_for_function("""() => {
        const all = window.shockslate.status.separation.marks_m || [];
        const m = all.filter((_, k) => k % Math.max(1, Math.floor(all.length / 40)) === 0).slice(0, 5);
        const c = document.querySelector('#view'), dpr = window.devicePixelRatio || 1;
        const ctx = c.getContext('2d');
        let found = 0;
        for (const [x, y] of m) {
            const [px, py] = window.shockslate.place.toPx(x, y);
            const d = ctx.getImageData(Math.round(px * dpr) - 1, Math.round(py * dpr) - 1, 3, 3).data;
            for (let k = 0; k < d.length; k += 4) if (d[k] > 200 && d[k + 1] < 130 && d[k + 2] < 130) { found++; break; }
        }
        return found >= 1;
    }""", timeout=WAIT_MS).json_value()
    assert red, "no separation mark drawn on the wall"
    # the page's caution footer stays
    assert "licensed engineering review" in page.inner_text("footer.caution")


def test_a_sketch_without_a_nozzle_shows_no_engine_figures(page, tmp_path):
    load_through_upload(page, stream_duct(), tmp_path)
    pause(page)
    step(page, 2)
    try:
        page.wait_for_function("window.shockslate.status.revision === window.shockslate.revision && "
                               "window.shockslate.status.engine === null", timeout=WAIT_MS)
    except Exception:
        raise AssertionError(page.evaluate("JSON.stringify({rev: window.shockslate.revision, "
                                           "status: window.shockslate.status}).slice(0, 3000)")) from None
    assert page.locator("#engine-block").is_hidden() and page.locator("#separation-caution").is_hidden()


# ----------------------------------------------------------------------------- gas from propellants

@pytest.mark.skipif(not HAS_CANTERA, reason="the design extra (Cantera) is not installed in this environment")
def test_gas_from_propellants_is_computed_and_applied_with_frozen_gamma_stated(page):
    row = next(r for r in ROWS if r["fuel"] == "CH4" and r["reactant_state"] == "liquid")
    page.click("#propellant-block summary")
    note = page.inner_text("#pg-note")
    assert "frozen gamma at chamber conditions" in note
    page.select_option("#pressure-unit", "kPa")
    page.select_option("#pg-fuel", "CH4")
    page.select_option("#pg-oxidiser", "O2")
    page.select_option("#pg-state", "liquid")
    page.fill("#pg-mixture", row["mixture_ratio"])
    page.fill("#pg-p0", str(float(row["p0_pa"]) / 1e3))
    page.click("#pg-compute")
    page.wait_for_function("document.querySelector('#pg-result').textContent.includes('T0')", timeout=WAIT_MS)
    page.wait_for_function("window.shockslate.scenario.gas.preset === null", timeout=WAIT_MS)
    sc = page.evaluate("window.shockslate.scenario")
    # [SB] Table 5-5, LOX/CH4 at 1000 psia (from memory; the row's source column)
    assert sc["conditions"]["reservoir"]["t0_k"] == pytest.approx(float(row["published_value"]),
                                                                  abs=float(row["tolerance"]))
    assert sc["conditions"]["reservoir"]["p0_pa"] == pytest.approx(float(row["p0_pa"]))
    assert 1.1 < sc["gas"]["gamma"] < 1.3
    assert float(page.input_value("#gas-gamma")) == pytest.approx(sc["gas"]["gamma"], rel=1e-4)
    result = page.inner_text("#pg-result")
    assert "frozen gamma" in result and " K" in result and "kg/kmol" in result and "kPa" in result
    # a mixture ratio out of range is named in the block
    page.fill("#pg-mixture", "500")
    page.click("#pg-compute")
    page.wait_for_function("!document.querySelector('#propellant-block .dialog-error').hidden", timeout=WAIT_MS)
    assert "Mixture ratio" in page.inner_text("#propellant-block .dialog-error")


@pytest.fixture(scope="module")
def plain_server(tmp_path_factory):
    proc, url, _log = _start_server(tmp_path_factory, "--without-thermochemistry")
    try:
        yield url
    finally:
        stop_server(proc)


def test_without_the_thermochemistry_library_the_page_says_so_and_how_to_add_it(browser, plain_server):
    context, page, errors = _open(browser, plain_server)
    try:
        page.click("#propellant-block summary")
        missing = page.locator("#pg-unavailable")
        assert missing.is_visible()
        text = missing.inner_text()
        assert "not installed" in text or "without-thermochemistry" in text
        assert "make run" in text and "[design]" in text and "restart the server" in text
        assert page.locator("#pg-compute").is_disabled()
        # the server refuses it plainly too, should a message get through
        page.evaluate("window.shockslate.send('propellant_gas', {fuel: 'H2', oxidiser: 'O2', mixture_ratio: 6, "
                      "p0_pa: 7e6})")
        page.wait_for_function("Array.from(document.querySelectorAll('#messages .message')).some((m) => "
                               "m.textContent.includes('not available'))", timeout=WAIT_MS)
    finally:
        context.close()
    assert not errors, errors


# ----------------------------------------------------------------------------- calm notes for harmless no-ops

def test_harmless_no_ops_are_calm_notes_not_red_errors(page, tmp_path):
    load_through_upload(page, stream_duct(), tmp_path)  # a load clears undo; the duct has no shapes
    page.evaluate("document.querySelector('#messages').replaceChildren()")

    def last_message():
        page.wait_for_function("document.querySelector('#messages .message')", timeout=WAIT_MS)
        return page.evaluate("""() => { const m = document.querySelector('#messages .message');
            return {kind: m.dataset.kind, text: m.textContent, note: m.classList.contains('note')}; }""")

    page.locator("#view").focus()
    page.keyboard.press("Control+z")  # undo with nothing to undo
    msg = last_message()
    assert msg["kind"] == "note" and msg["note"] and "no change to undo" in msg["text"], msg
    page.evaluate("document.querySelector('#messages').replaceChildren()")
    page.click("#clear-sketch")  # clearing an empty sketch
    msg = last_message()
    assert msg["kind"] == "note" and "already empty" in msg["text"], msg
    page.evaluate("document.querySelector('#messages').replaceChildren()")
    page.evaluate("window.shockslate.send('remove_probe', {name: 'not there'})")  # deleting a missing probe
    msg = last_message()
    assert msg["kind"] == "note" and "not there" in msg["text"], msg
    assert page.locator(".invalid").count() == 0
    # a real mistake stays a red error
    page.evaluate("document.querySelector('#messages').replaceChildren()")
    page.evaluate("window.shockslate.send('set_numerics', {cfl: 5})")
    msg = last_message()
    assert msg["kind"] == "error" and not msg["note"], msg


# ----------------------------------------------------------------------------- warm-up progress

def test_the_warm_up_shows_its_stage_on_the_page_and_in_the_console(page, engineer_server):
    log = engineer_server[1].read_text()
    # the server's console said which kernels it compiled, stage by stage, then that they were ready
    for k in range(1, 7):
        assert f"stage {k} of 6" in log, log[-2000:]
    assert "solver kernels ready" in log
    assert page.locator("#warming").is_hidden()  # nothing compiles now
    # a tab that joins while the kernels compile shows the stage as a bar (the hello and notices of a warming
    # server, as PROTOCOL.md gives them)
    page.evaluate("""() => window.shockslate.receive({...window.shockslate.hello, warming: true,
        warming_stage: {stage: 'flux', done: 1, total: 6, label: 'face fluxes and stage update, axisymmetric'}})""")
    assert page.locator("#warming").is_visible()
    assert page.evaluate("document.querySelector('#warming-bar').value") == 1
    assert page.evaluate("document.querySelector('#warming-bar').max") == 6
    assert "face fluxes" in page.inner_text("#warming-stage") and "stage 2 of 6" in page.inner_text("#warming-stage")
    page.evaluate("""() => window.shockslate.receive({type: 'notice', kind: 'warming', stage: 'views', done: 2,
        total: 6, label: 'derived views', message: 'Compiling the solver kernels: derived views (stage 3 of 6).'})""")
    assert page.evaluate("document.querySelector('#warming-bar').value") == 2
    page.evaluate("() => window.shockslate.receive({type: 'notice', kind: 'ready', message: 'The solver kernels are ready (1 s).'})")
    assert page.locator("#warming").is_hidden()
