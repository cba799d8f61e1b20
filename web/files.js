// Scenario files and exports: download the scenario JSON, upload one, pick a built-in or a kept
// one, keep the current one on this machine, and export the picture (PNG), fields (.npz) and
// station distributions (.csv).

const $ = (sel) => document.querySelector(sel);

/** Start a browser download of a Blob or URL under `filename`. */
export function download(hrefOrBlob, filename) {
  const a = document.createElement("a");
  const url = typeof hrefOrBlob === "string" ? hrefOrBlob : URL.createObjectURL(hrefOrBlob);
  a.href = url;
  if (filename) a.download = filename;
  document.body.append(a);
  a.click();
  a.remove();
  if (typeof hrefOrBlob !== "string") setTimeout(() => URL.revokeObjectURL(url), 10000);
}

/** A file-name-safe form of a scenario name. */
export function safeName(name) {
  return (name || "scenario").replace(/[^A-Za-z0-9._-]+/g, "_").slice(0, 60) || "scenario";
}

/** A server URL with the page's access token added when the server runs with one. */
function withToken(url) {
  const token = new URLSearchParams(location.search).get("token");
  if (!token || /[?&]token=/.test(url)) return url;
  return url + (url.includes("?") ? "&" : "?") + "token=" + encodeURIComponent(token);
}

export function setupFiles(app) {
  $("#download-scenario").addEventListener("click", () => {
    if (!app.scenario) return;
    const text = JSON.stringify(app.scenario, null, 2) + "\n";
    download(new Blob([text], { type: "application/json" }), `${safeName(app.scenario.name)}.json`);
  });

  $("#upload-scenario").addEventListener("change", async (ev) => {
    const file = ev.target.files && ev.target.files[0];
    ev.target.value = "";
    if (!file) return;
    let doc;
    try {
      doc = JSON.parse(await file.text());
    } catch (err) {
      app.showMessage(`The file ${file.name} is not JSON: ${err.message}`);
      return;
    }
    app.send("load_scenario", { scenario: doc });
  });

  $("#scenario-load").addEventListener("click", () => {
    const name = $("#scenario-pick").value;
    if (name) app.send("load_scenario", { name });
  });
  $("#scenario-pick").addEventListener("change", () => {
    const opt = $("#scenario-pick").selectedOptions[0];
    $("#scenario-description").textContent = (opt && opt.dataset.description) || "";
  });

  $("#save-server").addEventListener("click", () => {
    const name = $("#save-name").value.trim() || (app.scenario && app.scenario.name) || "";
    if (!name) {
      app.showMessage("Give the scenario a name to keep it on this machine.");
      return;
    }
    app.send("save_scenario", { name });
  });

  $("#export-png").addEventListener("click", () => app.exportPicture());
  $("#export-npz").addEventListener("click", () => app.send("export", { what: "npz" }));
  $("#export-csv").addEventListener("click", () => app.send("export", { what: "csv" }));
}

/** Fill the scenario picker from a `scenario_list` message. */
export function showScenarioList(msg) {
  const pick = $("#scenario-pick");
  const keep = pick.value;
  pick.replaceChildren();
  const group = (label, items) => {
    if (!items || !items.length) return;
    const g = document.createElement("optgroup");
    g.label = label;
    for (const it of items) {
      const o = new Option(it.name, it.name);
      o.dataset.description = it.description || "";
      g.append(o);
    }
    pick.append(g);
  };
  group("built in", msg.builtin);
  group("kept on this machine", msg.saved);
  if (keep && Array.from(pick.options).some((o) => o.value === keep)) pick.value = keep;
  pick.dispatchEvent(new Event("change"));
}

/** Follow an `export_ready` message: fetch the file the server made. */
export function fetchExport(msg) {
  const ext = { npz: "npz", csv: "csv", scenario: "json" }[msg.what] || "";
  download(withToken(msg.url), msg.filename || (ext ? `shockslate-${msg.what}.${ext}` : undefined));
}
