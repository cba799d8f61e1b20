"""The export files on the shelf (the user data folder's exports/): list them and delete them from the page.

Exports are written by server/exports.py under fresh random names; only names of that form are
listed or deleted (Exports.find), so no other file can be reached through these messages.
"""
from __future__ import annotations

from .errors import RequestError
from .exports import EXPORT_NAME, Exports

KINDS_BY_SUFFIX = {".npz": "npz", ".vti": "vti", ".csv": "csv", ".json": "scenario"}


def listing(exports: Exports, token: str | None = None) -> list[dict]:
    """[{name, what, bytes, modified_s, url}], newest first."""
    if not exports.folder.is_dir():
        return []
    query = f"?token={token}" if token else ""
    out = []
    for path in exports.folder.iterdir():
        if not EXPORT_NAME.fullmatch(path.name) or not path.is_file():
            continue
        stat = path.stat()
        out.append({"name": path.name, "what": KINDS_BY_SUFFIX.get(path.suffix, path.suffix.lstrip(".")),
                    "bytes": stat.st_size, "modified_s": stat.st_mtime, "url": f"/exports/{path.name}{query}"})
    out.sort(key=lambda f: f["modified_s"], reverse=True)
    return out


def delete(exports: Exports, name: str | None, every: bool = False) -> int:
    """Delete one export file by name, or all of them; the number deleted. RequestError for a name that is
    not an export's (never any other file)."""
    if every:
        names = [f["name"] for f in listing(exports)]
    else:
        if exports.find(name or "") is None:
            known = [f["name"] for f in listing(exports)]
            raise RequestError("name", name, "the file name of an export (see list_exports): "
                               + (", ".join(known[:5]) + (" ..." if len(known) > 5 else "") if known
                                  else "there are none"),
                               f"There is no export file named {name!r}.")
        names = [name]
    done = 0
    for n in names:
        path = exports.find(n)
        if path is not None:
            path.unlink(missing_ok=True)
            done += 1
    return done
