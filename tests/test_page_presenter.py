"""Real-browser tests of the presenter tools (web/presenter.js, web/xt_diagram.js) against the real server.

The server (uvicorn subprocess) and Debian's Chromium are the fixtures of test_page.py. Waits are for states
(a frame arrived, rows came in), never for fixed times.
"""
from __future__ import annotations

import math

import pytest

from test_page import WAIT_MS, browser, page, pause, server_url  # noqa: F401  (fixtures)


def load_builtin(page, name: str) -> None:
    """Open a built-in scenario the way a user does: pick it in the open list and load it."""
    page.wait_for_selector(f"#scenario-pick option[value='{name}']", state="attached", timeout=WAIT_MS)
    page.select_option("#scenario-pick", name)
    page.click("#scenario-load")
    page.wait_for_function("n => window.shockslate.scenario.name === n", arg=name, timeout=WAIT_MS)


def run(page) -> None:
    page.evaluate("window.shockslate.send('run')")
    page.wait_for_function("window.shockslate.status && window.shockslate.status.state === 'running'",
                           timeout=WAIT_MS)


def test_full_screen_shows_a_round_millimetre_scale_and_large_labels(page):
    load_builtin(page, "shock_tube_reflection")
    width_before = page.evaluate("window.shockslate.place.widthPx")
    page.click("#present-full")
    page.wait_for_function("window.shockslate.presenter.presenting && window.shockslate.presenter.scale",
                           timeout=WAIT_MS)
    # read what was drawn and the pixels of one drawing together, after the layout has settled
    shown = page.evaluate("""async () => {
        const frame = () => new Promise((r) => requestAnimationFrame(() => r()));
        await frame(); await frame(); await frame();
        const a = window.shockslate, p = a.presenter, s = p.scale, dpr = window.devicePixelRatio || 1;
        const ctx = document.querySelector('#view').getContext('2d');
        const rgba = Array.from(ctx.getImageData(Math.round((s.x + s.px / 2) * dpr), Math.round((s.y + 1) * dpr), 1, 1).data);
        return {scale: s, labels: p.labels, px: p.labelPx, mPerPx: a.place.metresPerPx, w: a.place.widthPx, rgba,
                full: document.fullscreenElement ? document.fullscreenElement.id : null,
                body: document.body.classList.contains('presenting')};
    }""")
    assert shown["body"]
    assert shown["full"] in ("stage", None)  # headless Chromium may refuse full screen: the page then fills the window
    mm = shown["scale"]["mm"]
    mantissa = mm / 10 ** math.floor(math.log10(mm) + 1e-12)
    assert round(mantissa, 9) in (1.0, 2.0, 5.0), mm  # a round length: 1, 2 or 5 times a power of ten
    # the bar is that many mm of the domain at the picture's scale, and at most a quarter of the picture wide
    assert shown["scale"]["px"] == pytest.approx(mm / 1000 / shown["mPerPx"], rel=1e-9)
    assert shown["w"] / 10 <= shown["scale"]["px"] <= shown["w"] / 4 + 1e-9
    assert f"{mm:g} mm" in shown["labels"] or (mm >= 1000 and any(t.endswith(" m") for t in shown["labels"]))
    assert any(t.startswith("t = ") and t.endswith(" ms") for t in shown["labels"])  # time in ms
    assert any(t.startswith("pressure, kPa: ") for t in shown["labels"])  # legend with its unit
    assert shown["px"] >= 18  # large labels (the page's own text is 13 px)
    assert any("not for sizing pressure hardware" in t for t in shown["labels"])  # the caution stays on the picture
    assert page.locator(".stage-caution").is_visible()  # and under it in full screen
    assert shown["w"] >= width_before  # the picture grew (or stayed) in full screen
    assert shown["rgba"][:3] == [255, 255, 255], shown["rgba"]  # the bar is painted, white, on the picture
    page.click("#present-full")
    page.wait_for_function("!window.shockslate.presenter.presenting && !document.fullscreenElement", timeout=WAIT_MS)
    page.wait_for_function("window.shockslate.presenter.scale === null", timeout=WAIT_MS)  # labels off again


def test_a_recorded_clip_is_a_non_empty_webm_file(page):
    run(page)
    assert page.evaluate("(() => { const m = window.MediaRecorder; return !!m && m.isTypeSupported('video/webm'); })()"), \
        "headless Chromium here cannot record WebM"
    with page.expect_download(timeout=WAIT_MS) as download:
        page.click("#clip-toggle")
        page.wait_for_selector("#clip-mark", state="visible", timeout=WAIT_MS)
        # labels go onto the picture while recording, so the clip carries the scale and the time
        page.wait_for_function("window.shockslate.presenter.scale !== null", timeout=WAIT_MS)
        page.wait_for_function("document.querySelector('#clip-time').textContent.startsWith('2 s')", timeout=WAIT_MS)
        page.click("#clip-toggle")
    page.wait_for_selector("#clip-mark", state="hidden", timeout=WAIT_MS)
    clip = page.evaluate("(() => { const c = window.shockslate.presenter.lastClip; "
                         "return {size: c.size, type: c.type, recorder: c.recorderType, name: c.name, s: c.seconds}; })()")
    assert clip["type"] == "video/webm" and clip["recorder"].startswith("video/webm")
    assert clip["size"] > 1000 and clip["s"] >= 2.0
    assert download.value.suggested_filename == clip["name"] and clip["name"].endswith("-clip.webm")
    head = page.evaluate("""async () => {
        const b = window.shockslate.presenter.lastClip.blob;
        return Array.from(new Uint8Array(await b.slice(0, 4).arrayBuffer()));
    }""")
    assert head == [0x1A, 0x45, 0xDF, 0xA3]  # the EBML magic number that opens every WebM (Matroska) file


def test_a_clip_stops_by_itself_at_its_length_cap(page):
    run(page)
    assert page.evaluate("window.shockslate.presenter.clipMaxS") == 60  # the page's cap: one minute
    page.evaluate("window.shockslate.presenter.clipMaxS = 1")  # a short cap, so the test need not wait a minute
    with page.expect_download(timeout=WAIT_MS):
        page.click("#clip-toggle")
        page.wait_for_selector("#clip-mark", state="visible", timeout=WAIT_MS)
        assert page.inner_text("#clip-time").endswith("of 1 s")
        page.wait_for_selector("#clip-mark", state="hidden", timeout=WAIT_MS)  # no click: the cap stopped it
    page.wait_for_function("window.shockslate.presenter.lastClip && window.shockslate.presenter.lastClip.size > 0",
                           timeout=WAIT_MS)
    seconds = page.evaluate("window.shockslate.presenter.lastClip.seconds")
    assert seconds >= 1.0  # not before the cap; that it stopped at all, with no click, is the cap at work
    assert page.inner_text("#clip-toggle") == "record clip"


def test_looking_back_shows_an_earlier_frame_while_the_run_goes_on_then_live(page):
    load_builtin(page, "shock_tube_reflection")
    run(page)
    page.wait_for_function("window.shockslate.frame && window.shockslate.frame.step > 200", timeout=WAIT_MS)
    # the ring starts again with the loaded flow: wait (bounded) until it holds a few instants to look back on
    drawn = page.evaluate("window.shockslate.framesDrawn")
    page.wait_for_function("n => window.shockslate.framesDrawn >= n + 4", arg=drawn, timeout=WAIT_MS)
    page.click("#scrub-back")
    page.wait_for_function("window.shockslate.presenter.recalled !== null && !document.querySelector('#scrub').disabled",
                           timeout=WAIT_MS)
    kept = page.evaluate("window.shockslate.presenter.ring.steps")
    assert len(kept) >= 3 and kept == sorted(kept)
    # the slider to its oldest end: the frame on screen becomes the oldest kept one
    page.evaluate("""() => { const s = document.querySelector('#scrub'); s.value = '0';
                             s.dispatchEvent(new Event('input', {bubbles: true})); }""")
    page.wait_for_function("s => window.shockslate.frame.step === s && window.shockslate.frame.channel === 1",
                           arg=kept[0], timeout=WAIT_MS)
    live_then = page.evaluate("window.shockslate.presenter.liveFrame.step")
    # the run goes on behind the recalled frame: newer live frames arrive but are not drawn
    page.wait_for_function("n => window.shockslate.presenter.liveFrame.step > n", arg=live_then, timeout=WAIT_MS)
    assert page.evaluate("window.shockslate.frame.step") == kept[0]
    assert "looking back" in page.inner_text("#scrub-state") and " ms" in page.inner_text("#scrub-state")
    page.click("#scrub-live")
    page.wait_for_function("window.shockslate.frame.channel === 0 && !window.shockslate.presenter.scrubbing",
                           timeout=WAIT_MS)
    page.wait_for_function("n => window.shockslate.frame.step > n", arg=live_then, timeout=WAIT_MS)
    assert page.inner_text("#scrub-state") == "live"


def test_wave_diagram_of_the_shock_tube_draws_position_against_time(page):
    load_builtin(page, "shock_tube_reflection")
    pause(page)
    page.click("#reset-flow")
    page.wait_for_function("window.shockslate.status && window.shockslate.status.steps === 0", timeout=WAIT_MS)
    page.select_option("#wave-field", "pressure")
    page.select_option("#wave-line", "domain")
    page.wait_for_selector("#xt-block", state="visible", timeout=WAIT_MS)
    run(page)
    page.wait_for_function("window.shockslate.waves.rows.length >= 100 && window.shockslate.waves.axes.tMs",
                           timeout=WAIT_MS)
    axes = page.evaluate("window.shockslate.waves.axes")
    assert axes["xLabel"] == "x, mm" and axes["yLabel"] == "flow time, ms"
    assert axes["xMm"] == pytest.approx([0.0, 1000.0])  # the 1 m tube, in mm
    assert axes["tMs"][0] < axes["tMs"][1]
    assert "pressure, kPa:" in axes["legend"]
    # the driver's 1000 kPa and the driven gas's 100 kPa both appear (common knowledge of the scenario file)
    assert axes["range"][0] == pytest.approx(1.0e5, rel=0.05) and axes["range"][1] == pytest.approx(1.0e6, rel=0.05)
    # the plot holds many colours (the waves), not one flat fill
    colours = page.evaluate("""() => {
        const c = document.querySelector('#xt'), dpr = window.devicePixelRatio || 1;
        const d = c.getContext('2d').getImageData(Math.round(70 * dpr), Math.round(30 * dpr),
                                                  Math.round((c.clientWidth - 90) * dpr), Math.round(200 * dpr)).data;
        const seen = new Set();
        for (let k = 0; k < d.length; k += 4) seen.add((d[k] << 16) | (d[k + 1] << 8) | d[k + 2]);
        return seen.size;
    }""")
    assert colours > 20
    # a longer tube: the line along it follows the domain (and its history starts again)
    generation = page.evaluate("window.shockslate.waves.generation")
    page.evaluate("window.shockslate.send('set_domain', {x_min_m: 0.0, x_max_m: 1.2, y_min_m: 0.0, y_max_m: 0.02})")
    page.wait_for_function("g => window.shockslate.waves.line.end_m[0] === 1.2 && window.shockslate.waves.generation > g",
                           arg=generation, timeout=WAIT_MS)
    page.evaluate("window.shockslate.send('set_domain', {x_min_m: 0.0, x_max_m: 1.0, y_min_m: 0.0, y_max_m: 0.02})")
    page.wait_for_function("window.shockslate.waves.line.end_m[0] === 1.0", timeout=WAIT_MS)
    page.select_option("#wave-line", "")
    page.wait_for_selector("#xt-block", state="hidden", timeout=WAIT_MS)


def test_a_comparison_run_is_drawn_beside_the_main_picture_and_ends_on_request(page):
    load_builtin(page, "shock_tube_reflection")
    page.wait_for_function("document.querySelector('#compare-setting').options.length > 3", timeout=WAIT_MS)
    page.select_option("#compare-setting", "conditions.reservoir.p0_pa")
    assert page.input_value("#compare-value") == "1000" and page.inner_text("#compare-unit") == "kPa"  # the main's
    page.fill("#compare-value", "500")
    page.click("#compare-start")
    page.wait_for_selector("#compare-wrap", state="visible", timeout=WAIT_MS)
    label = page.inner_text("#compare-label")
    assert label.startswith("comparison — reservoir pressure p0 500.0 kPa (main run: 1000 kPa)"), label
    page.click("#reset-flow")  # both runs start again from their own starting gas
    run(page)
    page.wait_for_function("window.shockslate.compare.frame && window.shockslate.compare.frame.step > 100",
                           timeout=WAIT_MS)
    drawn = page.evaluate("""() => {
        const a = window.shockslate, c = document.querySelector('#compare-view'), dpr = window.devicePixelRatio || 1;
        const d = c.getContext('2d').getImageData(0, 0, c.width, c.height).data;
        const seen = new Set();
        for (let k = 0; k < d.length; k += 4) seen.add((d[k] << 16) | (d[k + 1] << 8) | d[k + 2]);
        return {colours: seen.size, w: c.width / dpr, mainW: a.place.widthPx, channel: a.compare.frame.channel,
                mainChannel: a.frame.channel};
    }""")
    assert drawn["channel"] == 2 and drawn["mainChannel"] == 0, drawn  # tagged frames, each in its own place
    # as wide as the main picture, and a flow drawn in it (two gas states and the waves between), not a blank
    assert drawn["w"] == pytest.approx(drawn["mainW"]) and drawn["colours"] > 3, drawn
    assert " ms" in page.inner_text("#compare-label")
    page.click("#compare-stop")
    page.wait_for_selector("#compare-wrap", state="hidden", timeout=WAIT_MS)
