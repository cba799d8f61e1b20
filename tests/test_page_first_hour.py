"""Real-browser tests of issue 12, 'the first hour of a new user': what a newcomer reads and does on the page.

Same parts as tests/test_page.py (its fixtures: a real `shockslate serve` subprocess, Debian's Chromium
through playwright). Waits are for states, never for fixed times. Checks of numbers on axes compare
labels with the tick values they stand for; no physics is judged here.
"""
from __future__ import annotations

import json
import re

from test_page import (  # noqa: F401 - fixtures are found by name
    WAIT_MS, browser, canvas_point, choose_tool, drag, fed_channel, load_through_upload, page, pause,
    server_url, step, stream_duct, wait_shapes)

MINUS = "\u2212"


def number(text: str) -> float:
    return float(text.replace(MINUS, "-"))


# ----------------------------------------------------------------------------- numbers on axes

def test_tick_labels_read_back_as_their_ticks_over_many_ranges(page):
    """Every label of every tick, read as a number, is its tick (to a millionth of the step): steps of
    2.5 x 10^n read 0.25, 0.75, 1.25, never 0.3, 0.8, 1.3. Ranges: a fixed list with the reported cases,
    then 4000 drawn from a seeded generator over 24 decades, both signs, many tick counts."""
    result = page.evaluate("""async () => {
        const { niceTicks, tickLabels } = await import('/colourbar.js');
        const cases = [[0, 1.4, 6], [0.2, 1.3, 5], [3, 14, 5], [0, 4.7e9, 6], [49.99996, 50.00004, 6],
                       [-1.3, 1.3, 5], [0.0001, 0.0009, 4], [1e-7, 3.3e-7, 6], [99990, 100010, 4], [0.3, 0.7, 4]];
        let seed = 12345;
        const rnd = () => (seed = (seed * 1103515245 + 12345) % 2147483648) / 2147483648;
        for (let n = 0; n < 4000; n++) {
            const scale = Math.pow(10, -12 + 24 * rnd());
            const lo = (rnd() - 0.5) * 4 * scale, span = scale * (0.01 + 3 * rnd());
            cases.push([lo, lo + span, 2 + Math.floor(rnd() * 10)]);
        }
        const bad = [];
        let quarter = 0;
        for (const [lo, hi, count] of cases) {
            const ticks = niceTicks(lo, hi, count);
            const labels = tickLabels(ticks);
            if (ticks.length < 2) { bad.push(['too few ticks', lo, hi, count, ticks]); continue; }
            const step = ticks[1] - ticks[0];
            const mantissa = step / Math.pow(10, Math.floor(Math.log10(step) + 1e-9));
            if (Math.abs(mantissa - 2.5) < 1e-6) quarter++;
            if (new Set(labels).size !== labels.length) bad.push(['repeated labels', lo, hi, labels]);
            labels.forEach((text, k) => {
                const back = Number(text.replace(/\\u2212/g, '-'));
                if (!(Math.abs(back - ticks[k]) <= 1e-6 * step)) bad.push(['label is not its tick', text, ticks[k], step]);
                if (ticks[k] < lo - 1e-6 * step || ticks[k] > hi + 1e-6 * step) bad.push(['tick outside', lo, hi, ticks[k]]);
            });
            if (ticks.length > 2 * count + 2) bad.push(['too many ticks', lo, hi, count, ticks.length]);
        }
        const reported = tickLabels(niceTicks(0.2, 1.3, 5));
        return { bad: bad.slice(0, 10), nbad: bad.length, quarter, reported, n: cases.length };
    }""")
    assert result["nbad"] == 0, result["bad"]
    assert result["quarter"] > 100  # the 2.5 steps were exercised
    assert result["reported"] == ["0.25", "0.50", "0.75", "1.00", "1.25"]


def test_range_boxes_show_whole_numbers(page):
    """The from/to boxes hold numbers a user can read in full: 4.7e9 is '4.7e9', not '47390' cut off."""
    texts = page.evaluate("""async () => {
        const U = await import('/units.js');
        return [4.739e9, 101325, 0.25, -3.5e-6, 1234.5].map((v) => U.compact(v));
    }""")
    assert texts == ["4.739e9", "1.013e5", "0.25", "-3.5e-6", "1235"]
    page.select_option("#pressure-unit", "Pa")
    page.select_option("#view-select", "pressure")
    page.wait_for_function("window.shockslate.frame && window.shockslate.views[window.shockslate.frame.viewIndex].name"
                           " === 'pressure'", timeout=WAIT_MS)
    page.wait_for_function("document.querySelector('#range-max').value !== ''", timeout=WAIT_MS)
    fits = page.evaluate("""() => ['#range-min', '#range-max'].map((id) => {
        const el = document.querySelector(id);
        const cs = getComputedStyle(el);
        const ctx = document.createElement('canvas').getContext('2d');
        ctx.font = `${cs.fontSize} ${cs.fontFamily}`;
        const room = el.clientWidth - parseFloat(cs.paddingLeft) - parseFloat(cs.paddingRight) - 18; // spin buttons
        return [el.value, ctx.measureText(el.value).width, room, Number(el.value)];
    })""")
    for value, width, room, parsed in fits:
        assert width <= room, (value, width, room)
    # the box shows the newest frame's upper end to four figures (a running flow moves it: wait for a frame)
    page.wait_for_function("""() => {
        const shown = Number(document.querySelector('#range-max').value), max = window.shockslate.frame.max;
        return Math.abs(shown - max) <= 1e-3 * Math.abs(max);
    }""", timeout=WAIT_MS)
    page.select_option("#pressure-unit", "kPa")


def test_a_uniform_field_gets_round_ticks(page, tmp_path):
    """A still, uniform pressure field (the stream duct before its first step, 100 kPa everywhere) shows
    a colour bar of round numbers around 100 kPa, not 99.99996 ... 100.00004."""
    doc = stream_duct()
    doc["name"] = "page test uniform"
    load_through_upload(page, doc, tmp_path)
    pause(page)
    page.click("#reset-flow")
    page.select_option("#pressure-unit", "kPa")
    page.select_option("#view-select", "pressure")
    page.wait_for_function("window.shockslate.frame && window.shockslate.frame.step === 0 && "
                           "window.shockslate.views[window.shockslate.frame.viewIndex].name === 'pressure'",
                           timeout=WAIT_MS)
    page.wait_for_function("document.querySelector('#colour-bar').dataset.ticks", timeout=WAIT_MS)
    labels = page.evaluate("document.querySelector('#colour-bar').dataset.ticks").split(" ")
    values = [number(t) for t in labels]
    assert len(values) >= 2 and 98.9 <= values[0] < 100.0 < values[-1] <= 101.1, labels
    assert all(len(t.split(".")[-1]) <= 2 for t in labels), labels  # at most two decimals of kPa


# ----------------------------------------------------------------------------- what is loaded

def test_the_page_names_and_describes_what_is_loaded_and_marks_an_edit(page, tmp_path):
    doc = fed_channel()
    load_through_upload(page, doc, tmp_path)
    pause(page)
    assert page.inner_text("#scenario-name") == doc["name"]
    assert page.inner_text("#current-description") == doc["description"]
    assert not page.locator("#scenario-edited").is_visible()
    page.select_option("#pressure-unit", "bar")
    p0 = page.locator("[data-cond='reservoir.p0_pa']")
    p0.fill("30")
    p0.evaluate("el => el.dispatchEvent(new Event('change'))")
    page.wait_for_function("window.shockslate.scenario.conditions.reservoir.p0_pa === 3e6", timeout=WAIT_MS)
    assert page.inner_text("#scenario-name") == doc["name"] + " edited"
    assert page.locator("#scenario-edited").is_visible() and page.locator("#current-edited").is_visible()
    assert "p0 3000 kPa" in page.inner_text("#current-description")
    with page.expect_download() as info:
        page.click("#download-scenario")
    path = tmp_path / "edited.json"
    info.value.save_as(str(path))
    saved = json.loads(path.read_text())
    assert saved["name"] == doc["name"] + " edited" and "p0 3000 kPa" in saved["description"]
    assert saved["conditions"]["reservoir"]["p0_pa"] == 3e6
    page.click("#undo")  # back to what was loaded: no longer edited
    page.wait_for_function("window.shockslate.scenario.conditions.reservoir.p0_pa === 3e5", timeout=WAIT_MS)
    assert page.inner_text("#scenario-name") == doc["name"] and not page.locator("#scenario-edited").is_visible()
    page.select_option("#pressure-unit", "kPa")


def test_after_a_reload_the_open_list_shows_the_scenario_on_screen(page):
    """The list of scenarios starts at the one loaded, also after the page is reloaded."""
    page.wait_for_function("document.querySelector('#scenario-pick').options.length > 1", timeout=WAIT_MS)
    builtins = page.evaluate("Array.from(document.querySelectorAll('#scenario-pick option')).map((o) => o.value)")
    other = [n for n in builtins if n != page.evaluate("window.shockslate.scenario.name")][-1]
    page.select_option("#scenario-pick", other)
    page.click("#scenario-load")
    page.wait_for_function("n => window.shockslate.scenario.name === n", arg=other, timeout=WAIT_MS)
    pause(page)
    page.reload()
    page.wait_for_function("n => window.shockslate.scenario && window.shockslate.scenario.name === n && "
                           "document.querySelector('#scenario-pick').options.length > 1", arg=other, timeout=WAIT_MS)
    assert page.evaluate("document.querySelector('#scenario-pick').value") == other
    assert page.inner_text("#current-name") == other


# ----------------------------------------------------------------------------- clearing, starting gas, undo

def test_clear_sketch_and_clear_all_do_what_they_say(page, tmp_path):
    doc = fed_channel()
    doc["probes"] = [{"name": "P1", "x_m": 0.12, "y_m": 0.02}]
    doc["initial"] = {"kind": "reservoir_upstream_of_x", "x_m": 0.05}
    load_through_upload(page, doc, tmp_path)
    pause(page)
    page.click("#clear-sketch")
    wait_shapes(page, 0)
    sc = page.evaluate("window.shockslate.scenario")
    assert len(sc["stations"]) == 1 and len(sc["probes"]) == 1  # clear sketch: shapes only, as its tip says
    assert "stations, probes" in page.get_attribute("#clear-sketch", "title")
    page.click("#clear-all")
    page.wait_for_function("window.shockslate.scenario.stations.length === 0", timeout=WAIT_MS)
    sc = page.evaluate("window.shockslate.scenario")
    assert (sc["sketch"]["shapes"], sc["stations"], sc["probes"], sc["initial"]) == ([], [], [], {"kind": "ambient"})
    assert page.evaluate("document.querySelector('#initial-kind').value") == "ambient"
    page.click("#undo")
    page.wait_for_function("window.shockslate.scenario.stations.length === 1", timeout=WAIT_MS)
    assert page.evaluate("window.shockslate.scenario.initial.kind") == "reservoir_upstream_of_x"


def test_the_starting_gas_is_shown_and_can_be_changed(page, tmp_path):
    doc = stream_duct()
    doc["initial"] = {"kind": "ambient"}
    load_through_upload(page, doc, tmp_path)
    pause(page)
    page.select_option("#initial-kind", "reservoir_upstream_of_x")
    page.wait_for_function("window.shockslate.scenario.initial.kind === 'reservoir_upstream_of_x'", timeout=WAIT_MS)
    assert page.evaluate("window.shockslate.scenario.initial.x_m") == 0.1  # the middle of the duct by default
    page.fill("#initial-x", "50")
    page.locator("#initial-x").evaluate("el => el.dispatchEvent(new Event('change'))")
    page.wait_for_function("window.shockslate.scenario.initial.x_m === 0.05", timeout=WAIT_MS)
    page.wait_for_function("window.shockslate.status && window.shockslate.status.steps === 0", timeout=WAIT_MS)
    # the flow starts from it: reservoir gas (p0 200 kPa) left of x = 50 mm, still ambient gas (100 kPa) right of it
    page.select_option("#pressure-unit", "kPa")
    for x_m, want in ((0.02, "200.0 kPa"), (0.15, "100.0 kPa")):
        page.evaluate("x => window.shockslate.send('inspect', {x_m: x, y_m: 0.05})", x_m)
        page.wait_for_function("""([x, want]) => {
            const dd = document.querySelector('#readout-values [data-key="p"] dd');
            const xx = document.querySelector('#readout-values [data-key="x"] dd');
            return dd && dd.textContent === want && xx.textContent.startsWith(String(x * 1000));
        }""", arg=[x_m, want], timeout=WAIT_MS)
    # and it is outlined on the picture: the dashed line is drawn in the reservoir colour at x = 50 mm
    page.wait_for_function("window.shockslate.framesDrawn > 0", timeout=WAIT_MS)
    colour = page.evaluate("""() => {
        const app = window.shockslate, c = document.querySelector('#view');
        const [px] = app.place.toPx(0.05, 0.05), dpr = window.devicePixelRatio || 1;
        const ctx = c.getContext('2d');
        let best = 0;
        for (let row = 5; row < c.height - 5; row += 3) {
            const d = ctx.getImageData(Math.round(px * dpr) - 1, row, 3, 1).data;
            for (let k = 0; k < 12; k += 4) if (d[k] > 240 && d[k + 1] > 140 && d[k + 1] < 175 && d[k + 2] < 90) best++;
        }
        return best;
    }""")
    assert colour >= 5  # PAINT_COLOURS.reservoir #ff9f43 along the line


def test_undo_and_redo_cover_stations_probes_and_settings(page, tmp_path):
    load_through_upload(page, fed_channel(), tmp_path)
    pause(page)
    choose_tool(page, "probe")
    page.mouse.click(*canvas_point(page, 0.12, 0.02))
    page.wait_for_function("window.shockslate.scenario.probes.length === 1", timeout=WAIT_MS)
    page.evaluate("document.querySelector(\"[data-num='cfl']\").closest('details').open = true")
    cfl = page.locator("[data-num='cfl']")
    cfl.fill("0.3")
    cfl.evaluate("el => el.dispatchEvent(new Event('change'))")
    page.wait_for_function("window.shockslate.scenario.numerics.cfl === 0.3", timeout=WAIT_MS)
    page.click("#undo")
    page.wait_for_function("window.shockslate.scenario.numerics.cfl === 0.4", timeout=WAIT_MS)
    page.click("#undo")
    page.wait_for_function("window.shockslate.scenario.probes.length === 0", timeout=WAIT_MS)
    page.click("#redo")
    page.wait_for_function("window.shockslate.scenario.probes.length === 1", timeout=WAIT_MS)
    page.keyboard.press("Control+Shift+Z")
    page.wait_for_function("window.shockslate.scenario.numerics.cfl === 0.3", timeout=WAIT_MS)


# ----------------------------------------------------------------------------- histories in a later tab

def test_a_tab_opened_later_sees_the_probe_and_station_histories(page, browser, server_url, tmp_path):
    doc = fed_channel()
    doc["probes"] = [{"name": "P1", "x_m": 0.12, "y_m": 0.02}]
    load_through_upload(page, doc, tmp_path)
    pause(page)
    for _ in range(3):
        step(page, 10)
    t_first = page.evaluate("window.shockslate.histories.byName.get('P1').t[0]")
    context = browser.new_context(viewport={"width": 1440, "height": 1000})
    late = context.new_page()
    try:
        late.goto(server_url + "/")
        late.wait_for_function("window.shockslate && window.shockslate.scenario && "
                               "window.shockslate.histories.byName.has('P1')", timeout=WAIT_MS)
        h = late.evaluate("""() => { const h = window.shockslate.histories;
            return [h.byName.get('P1').t, h.stations.get('throat').t, h.stations.get('throat').mass_flow_kg_s]; }""")
        assert len(h[0]) >= 3 and h[0][0] <= t_first  # samples from before this tab was opened
        assert len(h[1]) >= 3 and len(h[2]) == len(h[1])
        late.select_option("#plot-source", "stationt:throat")
        assert late.evaluate("document.querySelector('#plot-quantity').value") == "mass_flow_kg_s"
    finally:
        context.close()


# ----------------------------------------------------------------------------- details

def test_station_labels_stay_inside_the_picture_and_apart(page, tmp_path):
    doc = fed_channel()
    doc["stations"] = [{"name": "S1", "start_m": [0.1, 0.0], "end_m": [0.1, 0.04], "role": None},
                       {"name": "S2", "start_m": [0.102, 0.0], "end_m": [0.102, 0.04], "role": "exit"},
                       {"name": "S3", "start_m": [0.158, 0.01], "end_m": [0.158, 0.04], "role": None}]
    load_through_upload(page, doc, tmp_path)
    page.wait_for_function("window.shockslate.labelBoxes.length === 3", timeout=WAIT_MS)
    boxes = page.evaluate("window.shockslate.labelBoxes")
    width, height = page.evaluate("[window.shockslate.place.widthPx, window.shockslate.place.heightPx]")
    for b in boxes:
        assert 0 <= b["x"] and b["x"] + b["w"] <= width and 0 <= b["y"] and b["y"] + b["h"] <= height, b
    for i, a in enumerate(boxes):
        for b in boxes[i + 1:]:
            apart = a["x"] + a["w"] <= b["x"] or b["x"] + b["w"] <= a["x"] or a["y"] + a["h"] <= b["y"] or \
                b["y"] + b["h"] <= a["y"]
            assert apart, (a, b)


def test_drop_downs_show_their_whole_text(page):
    """Every visible drop-down is at least as wide as it would be with nothing holding it in: a twin, free
    of width limits, is measured beside it (same font and padding)."""
    page.evaluate("for (const d of document.querySelectorAll('details')) d.open = true")
    measured = page.evaluate("""() => Array.from(document.querySelectorAll('select')).filter((s) => s.offsetParent).map((s) => {
        const twin = s.cloneNode(true);
        twin.removeAttribute('id');
        twin.style.cssText = 'position:absolute; visibility:hidden; width:auto; max-width:none; min-width:0';
        s.parentNode.append(twin);
        const need = twin.offsetWidth;
        twin.remove();
        return [s.id || s.dataset.field, s.offsetWidth, need];
    })""")
    assert len(measured) >= 15
    cut = [m for m in measured if m[1] + 0.5 < m[2]]
    assert cut == []


def test_messages_and_the_readout_do_not_push_the_page_down(page, tmp_path):
    load_through_upload(page, fed_channel(), tmp_path)
    pause(page)
    where = "() => [document.querySelector('#view').getBoundingClientRect().top, " \
            "document.querySelector('#station-table').getBoundingClientRect().top]"
    before = page.evaluate(where)
    p0 = page.locator("[data-cond='reservoir.p0_pa']")
    p0.fill("-5")
    p0.evaluate("el => el.dispatchEvent(new Event('change'))")
    page.wait_for_selector(".message[data-kind='error']", timeout=WAIT_MS)
    page.mouse.move(*canvas_point(page, 0.1, 0.02))
    page.wait_for_function("document.querySelector('#readout-values [data-key=\"cell\"] dd').textContent === 'fluid'",
                           timeout=WAIT_MS)
    assert page.evaluate(where) == before


def test_the_area_column_uses_one_unit(page, tmp_path):
    doc = fed_channel()  # planar: areas per metre of depth; 15 mm throat = 0.015 m2, a 4 mm station = 0.004 m2
    doc["stations"].append({"name": "small", "start_m": [0.12, 0.0], "end_m": [0.12, 0.004], "role": None})
    load_through_upload(page, doc, tmp_path)
    page.wait_for_function("document.querySelectorAll('#station-table tbody tr').length === 2", timeout=WAIT_MS)
    areas = page.evaluate("Array.from(document.querySelectorAll('#station-table tbody tr')).map("
                          "(tr) => tr.children[5].firstChild.textContent)")
    assert all(a.endswith(" m²") for a in areas), areas


def test_a_planar_axis_plot_is_not_called_the_axis(page, tmp_path):
    load_through_upload(page, fed_channel(), tmp_path)
    page.select_option("#plot-source", "axis")
    page.wait_for_function("document.querySelector('#plot').dataset.xlabel", timeout=WAIT_MS)
    assert page.evaluate("document.querySelector('#plot').dataset.xlabel") == "x along y = 0, mm"


def test_kept_scenarios_and_exports_can_be_listed_and_deleted(page, tmp_path):
    load_through_upload(page, fed_channel(), tmp_path)
    pause(page)
    page.on("dialog", lambda d: d.accept())
    page.fill("#save-name", "page test to delete")
    page.click("#save-server")
    page.wait_for_selector("#scenario-pick option[value='page test to delete']", state="attached", timeout=WAIT_MS)
    page.select_option("#scenario-pick", "page test to delete")
    assert page.is_enabled("#scenario-delete")
    page.click("#scenario-delete")
    page.wait_for_selector("#scenario-pick option[value='page test to delete']", state="detached", timeout=WAIT_MS)
    page.select_option("#scenario-pick", page.evaluate("document.querySelector('#scenario-pick option').value"))
    assert not page.is_enabled("#scenario-delete")  # built-ins cannot be deleted

    count = page.evaluate("document.querySelectorAll('#export-list li').length")
    with page.expect_download():
        page.click("#export-npz")
    page.wait_for_function("n => document.querySelectorAll('#export-list li').length === n + 1", arg=count,
                           timeout=WAIT_MS)
    with page.expect_download():
        page.click("#export-csv")
    page.wait_for_function("n => document.querySelectorAll('#export-list li').length === n + 2", arg=count,
                           timeout=WAIT_MS)
    assert page.inner_text("#export-list li:first-child").startswith("csv")  # newest first
    page.click("#export-list li:first-child button")
    page.wait_for_function("n => document.querySelectorAll('#export-list li').length === n + 1", arg=count,
                           timeout=WAIT_MS)
    assert page.inner_text("#export-list li:first-child").startswith("npz")
    page.click("#export-delete-all")
    page.wait_for_function("document.querySelectorAll('#export-list li').length === 0", timeout=WAIT_MS)


# ----------------------------------------------------------------------------- the top bar

def test_the_top_bar_shows_flow_time_pace_and_state_with_solver_figures_on_request(page, tmp_path):
    load_through_upload(page, stream_duct(), tmp_path)
    page.evaluate("localStorage.removeItem('shockslate.expert')")
    page.evaluate("window.shockslate.send('run')")
    page.wait_for_function("document.querySelector('#fig-pace').textContent.endsWith('/s')", timeout=WAIT_MS)
    pace = page.inner_text("#fig-pace")
    assert re.fullmatch(r"[\d.]+ (µs|ms|s)/s", pace), pace
    assert page.inner_text("#fig-state") == "running"
    assert not page.locator("#fig-steps").is_visible() and not page.locator("#fig-cells").is_visible()
    page.check("#show-expert")
    assert page.locator("#fig-steps").is_visible() and page.locator("#fig-frames").is_visible()
    page.uncheck("#show-expert")
    pause(page)
    # the settled slot follows the status's `flow` (solver/steady.py); after running it carries one
    flow = page.evaluate("window.shockslate.status.flow")
    assert flow in ("settling", "steady") and page.inner_text("#fig-steady") == flow
    page.evaluate("() => window.shockslate.receive({...window.shockslate.status, flow: null})")
    assert not page.locator("#fig-steady-box").is_visible()
    page.evaluate("() => window.shockslate.receive({...window.shockslate.status, flow: 'steady', residual: 2e-4})")
    assert page.inner_text("#fig-steady") == "steady"
    assert "0.00020 of the mass" in page.get_attribute("#fig-steady-box", "title")


def test_a_start_that_is_still_compiling_says_so_and_notices_stay_until_dismissed(page):
    # issue 'the first hour': while the kernels compile the page says so (not a dead 'paused' picture), and a
    # notice from the start (a damaged autosave set aside) stays until the user dismisses it
    page.evaluate("""() => window.shockslate.receive({...window.shockslate.hello, warming: true,
        notices: ['The scenario of the last session could not be restored; it was kept as current.damaged-x.json.']})""")
    warming = page.locator('#messages [data-field="warming"]')
    assert warming.is_visible() and "compiles them" in warming.inner_text()
    notice = page.locator("#messages .message", has_text="current.damaged-x.json")
    assert notice.is_visible()
    page.evaluate("() => window.shockslate.receive({type: 'notice', kind: 'ready', message: 'The solver kernels are ready (1 s).'})")
    assert warming.count() == 0
    page.wait_for_timeout(4500)  # longer than a fading note
    assert notice.is_visible()
    notice.locator("button.close").click()
    assert notice.count() == 0
