"""solver/templating.py and solver/templates/: the one path every HTML report is rendered through.

Checks are of the product's own promises (common practice, no source): user-given names are shown as text,
every report carries the caution twice, and the templates ship with the package.
"""
from __future__ import annotations

import fnmatch
import tomllib
from pathlib import Path

from shockslate.solver.report import CAUTION
from shockslate.solver.templating import number, render

ROOT = Path(__file__).resolve().parent.parent


def test_names_given_by_a_user_are_escaped_not_read_as_markup():
    text = render("_page.html.j2", caution="<b>c</b> & d")
    assert "&lt;b&gt;c&lt;/b&gt; &amp; d" in text and "<b>c</b>" not in text
    assert text.count('class="caution"') == 2  # at the top and at the bottom of every report


def test_every_report_template_extends_the_page_with_the_caution():
    for path in (ROOT / "solver" / "templates").glob("*.html.j2"):
        if not path.name.startswith("_"):
            assert '{% extends "_page.html.j2" %}' in path.read_text(), path.name
    assert "licensed engineering review" in CAUTION


def test_templates_ship_as_package_data():
    doc = tomllib.loads((ROOT / "pyproject.toml").read_text())
    globs = doc["tool"]["setuptools"]["package-data"]["shockslate.solver"]
    names = [p.relative_to(ROOT / "solver").as_posix() for p in (ROOT / "solver" / "templates").iterdir()]
    assert names and all(any(fnmatch.fnmatch(n, g) for g in globs) for n in names), names
    assert any(d.lower().startswith("jinja2") for d in doc["project"]["dependencies"])


def test_numbers_in_tables():
    assert number(0.000314159265) == "0.00031416"
    assert number(float("nan")) == "-" and number(None) == "" and number(12) == "12"
