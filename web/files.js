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
    const onScreen = app.scenario && opt && opt.value === app.scenario.name;
    // the description of another scenario than the one on screen, to choose by
    $("#scenario-description").textContent = (!onScreen && opt && opt.dataset.description) || "";
    $("#scenario-delete").disabled = !(opt && opt.dataset.kept === "true");
  });
  $("#scenario-delete").addEventListener("click", () => {
    const opt = $("#scenario-pick").selectedOptions[0];
    if (!opt || opt.dataset.kept !== "true") return;
    if (window.confirm(`Delete the kept scenario “${opt.value}” from this machine?`)) {
      app.send("delete_scenario", { name: opt.value });
    }
  });

  $("#save-server").addEventListener("click", () => {
    const name = $("#save-name").value.trim() || (app.scenario && app.scenario.name) || "";
    if (!name) {
      app.showMessage("Give the scenario a name to keep it on this machine.", "note"); // nothing was lost: a calm note
      return;
    }
    app.send("save_scenario", { name });
  });

  $("#export-png").addEventListener("click", () => app.exportPicture());
  $("#export-npz").addEventListener("click", () => app.send("export", { what: "npz" }));
  $("#export-vti").addEventListener("click", () => app.send("export", { what: "vti" }));
  $("#export-csv").addEventListener("click", () => app.send("export", { what: "csv" }));
  $("#export-delete-all").addEventListener("click", () => {
    if (window.confirm("Delete every export file made on this machine?")) app.send("delete_export", { all: true });
  });
}

function bytesText(n) {
  if (n >= 1e6) return `${(n / 1e6).toFixed(1)} MB`;
  if (n >= 1e3) return `${(n / 1e3).toFixed(1)} kB`;
  return `${n} B`;
}

/** The export files the server keeps, from an `export_list` message: download or delete each. */
export function showExportList(app, msg) {
  const files = msg.files || [];
  $("#export-keep").textContent = files.length ? `(${files.length}; the newest ${msg.keep} are kept)` : "(none)";
  $("#export-list").replaceChildren(...files.map((f) => {
    const li = document.createElement("li");
    li.dataset.name = f.name;
    const when = new Date(f.modified_s * 1000).toLocaleTimeString();
    const a = Object.assign(document.createElement("a"), {
      href: withToken(f.url), textContent: `${f.what} · ${bytesText(f.bytes)} · ${when}`, title: f.name,
    });
    a.download = f.name;
    const del = Object.assign(document.createElement("button"), { textContent: "delete", title: `delete ${f.name}` });
    del.addEventListener("click", () => app.send("delete_export", { name: f.name }));
    li.append(a, del);
    return li;
  }));
  $("#export-delete-all").hidden = files.length === 0;
}

/** Fill the scenario picker from a `scenario_list` message; it starts at the scenario on screen. */
export function showScenarioList(msg, current) {
  const pick = $("#scenario-pick");
  pick.replaceChildren();
  const group = (label, items, kept) => {
    if (!items || !items.length) return;
    const g = document.createElement("optgroup");
    g.label = label;
    for (const it of items) {
      const o = new Option(it.name, it.name);
      o.dataset.description = it.description || "";
      o.dataset.kept = String(kept);
      g.append(o);
    }
    pick.append(g);
  };
  group("built in", msg.builtin, false);
  group("kept on this machine", msg.saved, true);
  syncScenarioPick(current);
}

/** Point the picker at the scenario on screen (or what it was loaded from), when the list has it. */
export function syncScenarioPick(current) {
  const pick = $("#scenario-pick");
  const names = Array.from(pick.options).map((o) => o.value);
  const want = [current && current.name, current && current.origin].find((n) => n && names.includes(n));
  if (want) pick.value = want;
  pick.dispatchEvent(new Event("change"));
}

/** Follow an `export_ready` message: fetch the file the server made. */
export function fetchExport(msg) {
  const ext = { npz: "npz", vti: "vti", csv: "csv", scenario: "json" }[msg.what] || "";
  download(withToken(msg.url), msg.filename || (ext ? `shockslate-${msg.what}.${ext}` : undefined));
}
