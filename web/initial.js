// The starting gas panel: what the fluid cells hold when the flow starts (the scenario's `initial`).
// Each change sends `set_initial`; the server restarts the flow from it and answers with the scenario.

import { plain } from "./units.js";

const $ = (sel) => document.querySelector(sel);
const $$ = (sel) => Array.from(document.querySelectorAll(sel));

/** Show only the inputs the chosen kind needs. */
function showInputs(kind) {
  for (const el of $$("[data-initial]")) el.hidden = el.dataset.initial !== kind;
}

/** A number in mm from an input, in metres; null (input marked) when it is not a number. */
function metres(input) {
  const v = Number(input.value.trim());
  if (input.value.trim() === "" || !Number.isFinite(v)) {
    input.classList.add("invalid");
    return null;
  }
  input.classList.remove("invalid");
  return v / 1000;
}

/** The set_initial fields for a kind from the inputs; defaults in the middle of the domain when empty. */
function intent(app, kind) {
  const d = app.scenario.domain;
  if (kind === "reservoir_upstream_of_x") {
    if ($("#initial-x").value.trim() === "") $("#initial-x").value = plain(500 * (d.x_min_m + d.x_max_m));
    const x_m = metres($("#initial-x"));
    return x_m === null ? null : { kind, x_m };
  }
  if (kind === "reservoir_in_circle") {
    const defaults = [["#initial-cx", 500 * (d.x_min_m + d.x_max_m)], ["#initial-cy", 500 * (d.y_min_m + d.y_max_m)],
      ["#initial-r", 125 * (d.y_max_m - d.y_min_m)]];
    for (const [id, mm] of defaults) if ($(id).value.trim() === "") $(id).value = plain(mm);
    const cx = metres($("#initial-cx")), cy = metres($("#initial-cy")), r = metres($("#initial-r"));
    return cx === null || cy === null || r === null ? null : { kind, centre_m: [cx, cy], radius_m: r };
  }
  return { kind };
}

export function setupInitial(app) {
  const kindSel = $("#initial-kind");
  const send = () => {
    if (!app.scenario) return;
    const fields = intent(app, kindSel.value);
    if (fields) app.send("set_initial", fields);
  };
  kindSel.addEventListener("change", () => {
    // a newly chosen kind starts from the middle of this domain, not from numbers left by another scenario
    for (const id of ["#initial-x", "#initial-cx", "#initial-cy", "#initial-r"]) $(id).value = "";
    showInputs(kindSel.value);
    send();
  });
  for (const id of ["#initial-x", "#initial-cx", "#initial-cy", "#initial-r"]) $(id).addEventListener("change", send);
  showInputs(kindSel.value);
}

/** Show the scenario's starting gas (inputs the user is typing in are left alone). */
export function fillInitial(app) {
  const ini = (app.scenario && app.scenario.initial) || { kind: "ambient" };
  const put = (el, v) => { if (document.activeElement !== el) { el.value = v; el.classList.remove("invalid"); } };
  put($("#initial-kind"), ini.kind);
  if (ini.x_m != null) put($("#initial-x"), plain(ini.x_m * 1000));
  if (ini.centre_m) {
    put($("#initial-cx"), plain(ini.centre_m[0] * 1000));
    put($("#initial-cy"), plain(ini.centre_m[1] * 1000));
  }
  if (ini.radius_m != null) put($("#initial-r"), plain(ini.radius_m * 1000));
  showInputs(ini.kind);
}
