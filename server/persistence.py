"""Scenario files the server keeps: the current one after every change, and scenarios saved by name.

Everything lives in one user data folder (default ~/.local/share/shockslate, or $SHOCKSLATE_DATA_DIR):
  current.json      the scenario on screen, rewritten after every accepted change (atomically)
  saved/<name>.json scenarios saved by name from the page
  exports/          files made for download
Built-in scenarios are read from the repository's scenarios/ folder. A name from the page is never a
path: it must be letters, digits, '-', '_' and spaces, and the resolved file must sit in its folder.
"""
from __future__ import annotations

import json
import os
import re
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

from shockslate.solver import scenario as scn
from shockslate.solver.suggest import did_you_mean

from .errors import RequestError

ENV_DATA_DIR = "SHOCKSLATE_DATA_DIR"
CURRENT_FILE = "current.json"
SAVED_DIR = "saved"
EXPORTS_DIR = "exports"
NAME_PATTERN = re.compile(r"[A-Za-z0-9_\- ]{1,64}")
#: Kept (named) scenarios in one data folder: listing them is sent to every tab, so their number is bounded.
MAX_SAVED = 500
NAME_RULE = "1 to 64 characters: letters, digits, '-', '_' and spaces (not only spaces, no leading or trailing space)"


class ScenarioNameError(RequestError):
    """A scenario name that is not allowed, or that names no scenario."""


class AutosaveFailed(RequestError):
    """The scenario could not be written to the data folder, so the change that asked for it was not made.
    Every tab is told: the folder is shared by all of them."""


def default_data_dir() -> Path:
    """$SHOCKSLATE_DATA_DIR, else $XDG_DATA_HOME/shockslate, else ~/.local/share/shockslate."""
    env = os.environ.get(ENV_DATA_DIR)
    if env:
        return Path(env).expanduser()
    xdg = os.environ.get("XDG_DATA_HOME")
    base = Path(xdg).expanduser() if xdg else Path.home() / ".local" / "share"
    return base / "shockslate"


def check_name(name: object, field: str = "name") -> str:
    """The name if it is allowed as a scenario name, else ScenarioNameError naming field, value and rule."""
    if (not isinstance(name, str) or not NAME_PATTERN.fullmatch(name) or name.strip() != name):
        raise ScenarioNameError(field, name, NAME_RULE, f"The name {name!r} is not allowed; a name is {NAME_RULE}.",
                                "name")
    return name


def _inside(path: Path, folder: Path) -> Path:
    """path, resolved, after checking it lies directly in folder (defence in depth behind check_name)."""
    resolved = path.resolve()
    if resolved.parent != folder.resolve():
        raise ScenarioNameError("name", path.name, NAME_RULE, f"The name {path.stem!r} does not stay inside {folder}.",
                                "name")
    return resolved


def write_atomically(path: Path, text: str | list[str]) -> None:
    """Write through a temporary file and a rename, so a crash never leaves half a file. text: a string, or
    pieces written one after the other."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=path.name + ".", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as f:
            f.writelines([text] if isinstance(text, str) else text)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def _compact(value) -> str:
    return json.dumps(value, separators=(",", ":"))


class DocumentText:
    """Compact JSON text of scenario documents, equal to json.dumps(doc, separators=(",", ":")), made faster for
    a big sketch: the text of a shape dict met in the last document is reused, so a change costs the encoding of
    the shapes it adds, not of all of them (a sketch of 30 polygons of 15,000 points is 19 MB of JSON and took
    1.4 s to encode). Shape dicts are taken as read-only: the session never changes one in place."""

    def __init__(self) -> None:
        self._shapes: dict[int, tuple[dict, str]] = {}

    def __call__(self, doc: dict) -> str:
        return "".join(self.pieces(doc))

    def pieces(self, doc: dict) -> list[str]:
        """The text in pieces that join to it (a file takes them as they are: no 19 MB string is copied)."""
        sketch = doc.get("sketch") if isinstance(doc, dict) else None
        if not isinstance(sketch, dict) or not isinstance(sketch.get("shapes"), list):
            return [_compact(doc)]
        known, fresh = self._shapes, {}
        shapes: list[str] = []
        for shape in sketch["shapes"]:
            hit = known.get(id(shape))
            text = hit[1] if hit is not None and hit[0] is shape else _compact(shape)
            fresh[id(shape)] = (shape, text)
            shapes += (",", text) if shapes else ("[", text)
        self._shapes = fresh
        shapes.append("]" if shapes else "[]")
        out: list[str] = ["{"]
        for n, (key, value) in enumerate(doc.items()):
            out.append(("," if n else "") + _compact(key) + ":")
            if key != "sketch":
                out.append(_compact(value))
                continue
            out.append("{")
            for m, (k, v) in enumerate(sketch.items()):
                out.append(("," if m else "") + _compact(k) + ":")
                if k == "shapes":
                    out += shapes
                else:
                    out.append(_compact(v))
            out.append("}")
        out.append("}")
        return out


@dataclass(frozen=True)
class Restored:
    """What start-up found: the scenario (or None) and a warning to show when the file was bad."""

    scenario: scn.Scenario | None
    warning: str | None = None


class ScenarioStore:
    """The user data folder: current scenario, named saves, built-in listing."""

    def __init__(self, data_dir: Path | str | None = None):
        self.data_dir = Path(data_dir).expanduser() if data_dir is not None else default_data_dir()
        self.saved_dir = self.data_dir / SAVED_DIR
        self.exports_dir = self.data_dir / EXPORTS_DIR
        self.current_path = self.data_dir / CURRENT_FILE
        #: JSON text of the current scenario's documents (the autosave and the `scenario` broadcast share it)
        self.document_text = DocumentText()

    # -------------------------------------------------------------- current
    def save_current(self, scenario: scn.Scenario, document: dict | None = None) -> None:
        """Write the current scenario; AutosaveFailed (a plain sentence, no Python wording) when it cannot be.

        document: the scenario's scenario_to_dict when the caller has it already (a big sketch's takes long)."""
        try:
            # compact: the autosave is rewritten on every change, and a big sketch's indented JSON takes seconds
            doc = document if document is not None else scn.scenario_to_dict(scenario)
            write_atomically(self.current_path, [*self.document_text.pieces(doc), "\n"])
        except OSError as err:
            reason = err.strerror or "the file could not be written"
            raise AutosaveFailed(
                "autosave", str(self.current_path), "a data folder the server can write to",
                f"The change was not made because it could not be saved to {self.current_path} ({reason}). "
                "Free some disk space or fix the folder's permissions, then try again.") from None

    def restore_current(self) -> Restored:
        """The scenario of the last session. Any damage to the file (bad bytes, nesting too deep, numbers too
        long, a folder in its place, a document that no longer validates) sets it aside under a timestamped
        name and says so: the server still starts, and the user's file is kept, not lost."""
        if not os.path.lexists(self.current_path):
            return Restored(None)
        try:
            if not self.current_path.is_file():
                raise scn.ScenarioError(f"{CURRENT_FILE} is not a file")
            return Restored(scn.load_scenario(self.current_path))
        except Exception as err:  # noqa: BLE001 - whatever is wrong with the file, start clean and keep it
            reason = err if isinstance(err, scn.ScenarioError) else _plain_reason(err)
            aside = self._set_aside()
            kept = f"it was kept as {aside}" if aside else "it could not be moved aside either"
            return Restored(None, f"The scenario of the last session could not be restored ({reason}); {kept}. "
                                  "The built-in default scenario was opened instead.")

    def _set_aside(self) -> Path | None:
        stamp = time.strftime("%Y%m%d-%H%M%S")
        for n in range(100):
            aside = self.current_path.with_name(f"current.damaged-{stamp}{'-' + str(n) if n else ''}.json")
            if os.path.lexists(aside):
                continue
            try:
                os.replace(self.current_path, aside)
            except OSError:
                return None
            return aside
        return None

    # ---------------------------------------------------------------- named
    def saved_path(self, name: str) -> Path:
        check_name(name)
        return _inside(self.saved_dir / f"{name}.json", self.saved_dir)

    def save_named(self, name: str, scenario: scn.Scenario) -> Path:
        """Save under `name` in saved/; the document's own name becomes `name` too."""
        check_name(name)
        if name in scn.builtin_names():
            raise ScenarioNameError("name", name, "a name that is not a built-in scenario's",
                             f"The name {name!r} belongs to a built-in scenario; pick another.", "not_builtin")
        path = self.saved_path(name)
        if not path.exists() and len(self.saved_names()) >= MAX_SAVED:
            raise ScenarioNameError("name", name, f"at most {MAX_SAVED} kept scenarios",
                                    f"There are already {MAX_SAVED} kept scenarios, the most this folder holds; "
                                    "delete one or save over an existing name.")
        data = scn.scenario_to_dict(scenario)
        data["name"] = name
        write_atomically(path, json.dumps(data, indent=2) + "\n")
        return path

    def load_named(self, name: str) -> scn.Scenario:
        """A saved scenario by name, else a built-in one; never any other file."""
        check_name(name)
        path = self.saved_path(name)
        if path.is_file():
            return scn.load_scenario(path)
        if name in scn.builtin_names():
            return scn.load_builtin(name)
        known = scn.builtin_names() + self.saved_names()
        raise ScenarioNameError("name", name, "the name of a built-in or saved scenario (see list_scenarios)",
                                f"There is no built-in or saved scenario named {name!r}{did_you_mean(name, known) or '.'}",
                                "one_of")

    def delete_named(self, name: str) -> None:
        """Delete a kept scenario; a built-in's name or a name that is not kept is refused, never any other file."""
        check_name(name)
        if name in scn.builtin_names():
            raise ScenarioNameError("name", name, "the name of a kept scenario (built-ins cannot be deleted)",
                                    f"The scenario {name!r} is a built-in; only scenarios kept on this machine can be "
                                    "deleted.")
        path = self.saved_path(name)
        if not path.is_file():
            raise ScenarioNameError("name", name, "the name of a kept scenario (see list_scenarios)",
                                    f"There is no kept scenario named {name!r}"
                                    f"{did_you_mean(name, self.saved_names()) or '.'}")
        path.unlink()

    def saved_names(self) -> list[str]:
        if not self.saved_dir.is_dir():
            return []
        return sorted(p.stem for p in self.saved_dir.glob("*.json") if NAME_PATTERN.fullmatch(p.stem))

    def listing(self) -> dict:
        """{builtin: [{name, description}], saved: [{name}]} for the scenario_list message."""
        builtin = []
        for name in scn.builtin_names():
            try:
                description = scn.load_builtin(name).description
            except scn.ScenarioError as err:
                description = f"(cannot be loaded: {err})"
            builtin.append({"name": name, "description": description})
        return {"builtin": builtin, "saved": [{"name": n} for n in self.saved_names()]}


def _plain_reason(err: BaseException) -> str:
    """A sentence for a file that could not even be read as JSON, without Python's wording."""
    if isinstance(err, UnicodeDecodeError):
        return "it is not UTF-8 text"
    if isinstance(err, RecursionError):
        return "its brackets are nested too deeply"
    if isinstance(err, ValueError) and "digits" in str(err):
        return "it holds a number with too many digits"
    if isinstance(err, OSError):
        return f"it could not be read: {err.strerror or 'input/output error'}"
    return "it is not a readable scenario file"


def scenario_from_argument(value: str, store: ScenarioStore) -> scn.Scenario:
    """--scenario on the command line: a built-in or saved name, or a path to a scenario file.

    A path is accepted here because the person starting the server typed it; names from the page
    go through load_named only.
    """
    path = Path(value).expanduser()
    if path.suffix == ".json" or os.sep in value:
        return scn.load_scenario(path)
    return store.load_named(value)
