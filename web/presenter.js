// Presenting the flow to a room: full screen with a millimetre scale and large labels drawn on the
// picture, a clip of the picture recorded in the browser (WebM), and looking back through the last
// seconds of frames the server keeps (server/frame_ring.py) while the run goes on.
//
// The labels are drawn onto the picture itself, so a recorded clip and a screenshot carry them too.

import { cssAt } from "./colourmaps.js";
import { download, safeName } from "./files.js";
import * as U from "./units.js";

const $ = (sel) => document.querySelector(sel);

/** Longest clip, seconds: recording stops by itself there (a minute of WebM is a few MB). */
export const CLIP_MAX_S = 60;
/** The caution drawn under the labels, so that clips and screens carry it (README "Caution"). */
export const CAUTION = "shockslate: inviscid, calorically perfect gas model; not for sizing pressure hardware " +
  "or clearing a test; defer to local codes and licensed engineering review.";
const CAUTION_SHORT = "shockslate: inviscid, perfect-gas model; not for sizing pressure hardware or clearing a test.";
const CAUTION_PX = 12;
/** Frames per second the clip samples the picture at. */
export const CLIP_FPS = 30;
/** Frame channels (PROTOCOL.md "Binary frames"): 0 live, 1 recalled from the server's ring, 2 the comparison run. */
export const LIVE = 0;
export const RECALLED = 1;
export const COMPARISON = 2;

/**
 * A round length for a scale bar, in mm: the largest 1, 2 or 5 times a power of ten that is at most
 * `maxMm` (so the bar is never longer than the room given to it).
 */
export function roundScaleMm(maxMm) {
  if (!(maxMm > 0) || !Number.isFinite(maxMm)) return NaN;
  const power = Math.pow(10, Math.floor(Math.log10(maxMm)));
  for (const m of [5, 2, 1]) if (m * power <= maxMm * (1 + 1e-12)) return m * power;
  return power;
}

/** "20 mm", "0.5 mm", "1 m" (metres from 1000 mm up). */
export function scaleText(mm) {
  const short = (v) => String(Number(v.toPrecision(3)));
  return mm >= 1000 ? `${short(mm / 1000)} m` : `${short(mm)} mm`;
}

/** The MIME type of WebM this browser can record, or "" when it records none. */
export function clipType() {
  if (typeof MediaRecorder === "undefined") return "";
  for (const t of ["video/webm;codecs=vp9", "video/webm;codecs=vp8", "video/webm"]) {
    if (MediaRecorder.isTypeSupported(t)) return t;
  }
  return "";
}

export class Presenter {
  constructor(app) {
    this.app = app;
    this.presenting = false;
    this.scale = null; // {mm, px} of the last scale bar drawn
    this.labels = []; // texts of the last labels drawn on the picture (for tests and the console)
    this.labelPx = 0; // their font size, CSS px
    this.recorder = null;
    this.recording = false; // from start until the recorder has stopped (the labels stay that long)
    this.clipMaxS = CLIP_MAX_S; // the cap on a clip's length, s
    this.clipStart = 0;
    this.clipTimer = null;
    this.lastClip = null; // {size, type, seconds, name} of the last recorded clip
    this.scrubbing = false;
    this.ring = null; // the `frame_ring` listing being scrubbed through
    this.liveFrame = null; // the newest live frame, kept while looking back
    this.recalled = null; // the recalled frame on screen
  }

  setup() {
    $("#present-full").addEventListener("click", () => this.toggleFullScreen());
    document.addEventListener("fullscreenchange", () => this.setPresenting(!!document.fullscreenElement));
    $("#present-labels").addEventListener("change", () => this.relayout());
    $("#clip-toggle").addEventListener("click", () => (this.recorder ? this.stopClip() : this.startClip()));
    $("#scrub-back").addEventListener("click", () => this.lookBack());
    $("#scrub-live").addEventListener("click", () => this.backToLive());
    $("#scrub").addEventListener("input", () => this.recallAtSlider());
    document.addEventListener("keydown", (e) => {
      if (e.key === "Escape" && this.presenting && !document.fullscreenElement) this.setPresenting(false);
    });
    if (!clipType()) {
      $("#clip-toggle").disabled = true;
      $("#clip-toggle").title = "this browser cannot record WebM video from a canvas";
    }
  }

  // ---------------------------------------------------------------- full screen
  async toggleFullScreen() {
    if (this.presenting) {
      if (document.fullscreenElement) await document.exitFullscreen().catch(() => {});
      this.setPresenting(false);
      return;
    }
    const stage = $("#stage");
    try {
      await stage.requestFullscreen({ navigationUI: "hide" });
    } catch (err) {
      // no full screen here (an embedded frame, a policy): fill the window instead
      console.info(`full screen refused (${err && err.message}); filling the window`);
    }
    this.setPresenting(true);
  }

  setPresenting(on) {
    this.presenting = on;
    document.body.classList.toggle("presenting", on);
    $("#present-full").textContent = on ? "leave full screen" : "full screen";
    $("#present-full").setAttribute("aria-pressed", String(on));
    this.relayout();
    // the wave diagram and the comparison take their full-screen sizes at once, not at their next data
    requestAnimationFrame(() => {
      if (this.app.waves) this.app.waves.draw();
      if (this.app.compare) this.app.compare.draw();
    });
  }

  /** Whether the picture carries the scale bar and the large labels now. */
  labelsShown() {
    return this.presenting || this.recording || $("#present-labels").checked;
  }

  /** Size of the labels for a picture `widthPx` wide, CSS px: large, growing with the picture. */
  static labelSize(widthPx) {
    return Math.round(Math.max(18, Math.min(32, widthPx / 48)));
  }

  /** Height of the band under the flow that holds the labels (0 when they are off), CSS px. */
  bandPx(widthPx) {
    return this.labelsShown() ? Math.round(2.4 * Presenter.labelSize(widthPx)) + CAUTION_PX + 6 : 0;
  }

  /** Labels switched on or off: the canvas gains or loses its band. */
  relayout() {
    this.app.lastSize = "";
    this.app.layoutCanvas();
  }

  /**
   * Drawn after the picture and its overlays (main.js drawPicture): the look-back mark, and in the band
   * under the flow the scale bar (a round length in mm), the flow time in ms and the colour legend.
   */
  drawOn(ctx, place, canvasHeightPx) {
    this.scale = null;
    this.labels = [];
    if (this.scrubbing && this.recalled) this.drawLookBackMark(ctx, place);
    const band = canvasHeightPx - place.heightPx;
    if (!this.labelsShown() || band < 20) return;
    const w = place.widthPx, top = place.heightPx;
    const px = Math.min(Presenter.labelSize(w), Math.floor((band - CAUTION_PX - 6) / 2.4));
    this.labelPx = px;
    ctx.save();
    ctx.font = `600 ${px}px system-ui, sans-serif`;
    ctx.textBaseline = "alphabetic";
    ctx.fillStyle = "#ffffff";
    const pad = Math.round(px * 0.6);
    const base = top + px * 1.15;
    // scale bar, left: a round length in mm no longer than a quarter of the picture
    const mPerPx = place.metresPerPx;
    const mm = roundScaleMm((w / 4) * mPerPx * 1000);
    let used = pad;
    if (Number.isFinite(mm)) {
      const len = mm / 1000 / mPerPx;
      const text = scaleText(mm);
      const barY = top + px * 1.55;
      const barH = Math.max(3, Math.round(px * 0.28));
      ctx.fillRect(pad, barY, len, barH);
      ctx.fillRect(pad, barY - px * 0.3, 2, px * 0.3 + barH);
      ctx.fillRect(pad + len - 2, barY - px * 0.3, 2, px * 0.3 + barH);
      ctx.fillText(text, pad + 4, base);
      this.scale = { mm, px: len, x: pad, y: barY, height: barH };
      this.labels.push(text);
      used = pad + Math.max(len, ctx.measureText(text).width) + 2 * pad;
    }
    // flow time after the scale; the legend (quantity, unit, range) at the right
    const f = this.app.frame;
    if (f) {
      const t = `t = ${U.num(f.timeS * 1e3, 4)} ms`;
      ctx.fillText(t, used, base + px * 0.45);
      this.labels.push(t);
      const info = this.app.viewInfo(f.viewIndex);
      const { unit, scale } = U.displayUnit(info.unit);
      const legend = `${info.label}${unit ? `, ${unit}` : ""}: ${U.num(f.min / scale, 4)} to ${U.num(f.max / scale, 4)}`;
      ctx.textAlign = "right";
      ctx.fillText(legend, w - pad, base + px * 0.45);
      this.labels.push(legend);
      // the colour ramp of the legend, low to high, left of its text
      const rampW = Math.round(px * 7), rampH = Math.round(px * 0.7);
      const rampX = w - pad - ctx.measureText(legend).width - pad - rampW;
      if (rampX > used + ctx.measureText(t).width + pad) {
        const grad = ctx.createLinearGradient(rampX, 0, rampX + rampW, 0);
        for (let k = 0; k <= 10; k++) grad.addColorStop(k / 10, cssAt(this.app.mapName, k / 10));
        ctx.fillStyle = grad;
        ctx.fillRect(rampX, base + px * 0.45 - rampH, rampW, rampH);
      }
    }
    // the caution goes wherever the picture goes (a clip, a screen in a meeting room)
    ctx.textAlign = "left";
    ctx.fillStyle = "#9aa6b2";
    const room = w - 2 * pad;
    let caution = CAUTION;
    ctx.font = `${CAUTION_PX}px system-ui, sans-serif`;
    if (ctx.measureText(caution).width > room) caution = CAUTION_SHORT; // a narrow picture: the short form
    const size = Math.max(8, Math.min(CAUTION_PX, Math.floor(CAUTION_PX * room / ctx.measureText(caution).width)));
    ctx.font = `${size}px system-ui, sans-serif`;
    ctx.fillText(caution, pad, top + band - 5);
    this.labels.push(caution);
    ctx.restore();
  }

  drawLookBackMark(ctx, place) {
    ctx.save();
    ctx.strokeStyle = "#f0b43c";
    ctx.lineWidth = 4;
    ctx.strokeRect(2, 2, place.widthPx - 4, place.heightPx - 4);
    ctx.restore();
  }

  // ---------------------------------------------------------------- clip
  startClip() {
    const type = clipType();
    if (!type) {
      this.app.showMessage("This browser cannot record WebM video from a canvas.", "error", "clip");
      return;
    }
    const canvas = $("#view");
    this.recording = true;
    this.relayout(); // the labels' band is there before the first recorded frame
    const stream = canvas.captureStream(CLIP_FPS);
    const chunks = [];
    let recorder;
    try {
      recorder = new MediaRecorder(stream, { mimeType: type, videoBitsPerSecond: 4_000_000 });
    } catch (err) {
      this.recording = false;
      this.relayout();
      this.app.showMessage(`Recording could not start: ${err.message}`, "error", "clip");
      return;
    }
    recorder.ondataavailable = (e) => { if (e.data && e.data.size) chunks.push(e.data); };
    recorder.onstop = () => {
      stream.getTracks().forEach((t) => t.stop());
      this.recording = false;
      this.relayout();
      const seconds = (performance.now() - this.clipStart) / 1000;
      const blob = new Blob(chunks, { type: "video/webm" });
      const name = `${safeName(this.app.scenario ? this.app.scenario.name : "flow")}-${this.app.viewName}-clip.webm`;
      this.lastClip = { size: blob.size, type: blob.type, recorderType: type, seconds, name, blob };
      if (blob.size) download(blob, name);
      else this.app.showMessage("The clip came out empty: the picture did not change while recording.", "error", "clip");
    };
    this.recorder = recorder;
    this.clipStart = performance.now();
    recorder.start(1000);
    $("#clip-toggle").textContent = "stop clip";
    $("#clip-mark").hidden = false;
    this.tickClip();
    this.clipTimer = setInterval(() => this.tickClip(), 250);
    this.app.scheduleDraw();
  }

  tickClip() {
    const s = (performance.now() - this.clipStart) / 1000;
    $("#clip-time").textContent = `${Math.floor(s)} s of ${this.clipMaxS} s`;
    if (s >= this.clipMaxS) this.stopClip();
    else this.app.scheduleDraw(); // a fresh picture for the stream even while the flow stands still
  }

  stopClip() {
    if (!this.recorder) return;
    clearInterval(this.clipTimer);
    const recorder = this.recorder;
    this.recorder = null;
    if (recorder.state !== "inactive") recorder.stop();
    $("#clip-toggle").textContent = "record clip";
    $("#clip-mark").hidden = true;
    this.app.scheduleDraw();
  }

  // ---------------------------------------------------------------- looking back
  /** Decide what to do with a frame (main.js onFrame): true to show it. */
  takeFrame(f) {
    if (f.channel === COMPARISON) { // the comparison run's picture, drawn under the main one (compare.js)
      if (this.app.compare) this.app.compare.takeFrame(f);
      return false;
    }
    if (f.channel === RECALLED) {
      if (!this.scrubbing) return false; // a late answer after going back to live
      this.recalled = f;
      this.showScrubTime();
      return true;
    }
    if (this.scrubbing) {
      this.liveFrame = f;
      this.showScrubTime();
      return false;
    }
    return true;
  }

  lookBack() {
    this.scrubbing = true;
    this.liveFrame = this.app.frame;
    document.body.classList.add("looking-back");
    $("#scrub-live").disabled = false;
    $("#scrub-state").textContent = "asking the server for the kept frames…";
    this.app.send("list_frames");
  }

  /** The `frame_ring` listing: the slider spans the kept instants, starting at the newest. */
  takeRing(msg) {
    if (!this.scrubbing) return;
    this.ring = msg;
    const n = msg.steps.length;
    const slider = $("#scrub");
    if (!n) {
      $("#scrub-state").textContent = "no frames kept yet: the server keeps them while a tab watches the flow";
      return;
    }
    slider.max = String(n - 1);
    slider.value = String(n - 1);
    slider.disabled = false;
    this.recallAtSlider();
  }

  recallAtSlider() {
    if (!this.scrubbing || !this.ring || !this.ring.steps.length) return;
    const k = Math.max(0, Math.min(this.ring.steps.length - 1, Number($("#scrub").value)));
    this.app.send("recall_frame", { steps: this.ring.steps[k] });
  }

  showScrubTime() {
    const r = this.recalled, l = this.liveFrame;
    if (!r) return;
    const behind = l ? ` — ${U.num((l.timeS - r.timeS) * 1e3, 3)} ms before live (${U.num(l.timeS * 1e3, 4)} ms)` : "";
    $("#scrub-state").textContent = `looking back: ${U.num(r.timeS * 1e3, 4)} ms, step ${r.step}${behind}`;
  }

  backToLive() {
    this.scrubbing = false;
    this.ring = null;
    this.recalled = null;
    document.body.classList.remove("looking-back");
    $("#scrub").disabled = true;
    $("#scrub-live").disabled = true;
    $("#scrub-state").textContent = "live";
    if (this.liveFrame) this.app.showFrame(this.liveFrame);
    this.liveFrame = null;
  }
}
