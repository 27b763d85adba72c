"""The design-review sheet: `radialpn report` writes one self-contained HTML page whose every
section holds the numbers the public API computes for the same wire. No browser is assumed:
the page is parsed with the standard library's html.parser (a strict structural check) and its
numbers compared with direct library calls."""

import io
import re
from html.parser import HTMLParser

import numpy as np
import pytest
from rich.console import Console

import radialpn
from radialpn.cli import main

WIRE = dict(material="GaAs", core_type="p", core_radius_nm=60.0, shell_thickness_nm=45.0, core_doping_cm3=2e18,
            shell_doping_cm3=2e18, dit_cm2eV=5e12)
FLAGS = ["--material", "GaAs", "--core-type", "p", "--core-radius", "60nm", "--shell-thickness", "45nm",
         "--core-doping", "2e18", "--shell-doping", "2e18", "--dit", "5e12"]
SECTIONS = ("design", "answer", "bands", "map", "critical", "spread", "tunnelling", "caution")
VOID = {"meta", "br", "img", "hr", "input", "link"}


class Page(HTMLParser):
    """Text and SVG elements per <section id>, plus every tag and attribute seen; fails on a
    closing tag that does not match the open one (well-formed nesting)."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack, self.section, self.text, self.tags, self.attrs = [], None, {}, {}, []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.attrs.append((tag, a))
        if tag == "section":
            self.section = a["id"]
            self.text[self.section] = []
            self.tags[self.section] = []
        if self.section:
            self.tags[self.section].append((tag, a))
        if tag not in VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        a = dict(attrs)
        self.attrs.append((tag, a))
        if self.section:
            self.tags[self.section].append((tag, a))

    def handle_endtag(self, tag):
        if tag in VOID:
            return
        assert self.stack and self.stack[-1] == tag, f"</{tag}> closes <{self.stack[-1] if self.stack else None}>"
        self.stack.pop()
        if tag == "section":
            self.section = None

    def handle_data(self, data):
        if self.section:
            self.text[self.section].append(data)


@pytest.fixture(scope="module")
def sheet(tmp_path_factory):
    path = tmp_path_factory.mktemp("report") / "wire.html"
    buf = io.StringIO()
    code = main(["report"] + FLAGS + ["-o", str(path), "--samples", "5000", "--cells", "12x8"],
                console=Console(file=buf, width=80, color_system=None), out=io.StringIO())
    assert code == 0, buf.getvalue()
    html = path.read_text(encoding="utf-8")
    page = Page()
    page.feed(html)
    page.close()
    assert page.stack == [], f"unclosed tags {page.stack}"
    return html, page, {k: " ".join(" ".join(v).split()) for k, v in page.text.items()}


def test_every_section_present_and_self_contained(sheet):
    html, page, text = sheet
    assert tuple(text) == SECTIONS
    for tag, a in page.attrs:  # nothing fetched from elsewhere, nothing executed
        assert tag not in ("script", "link", "iframe", "img", "object")
        for k, v in a.items():
            assert not (k in ("src", "href") and v), (tag, k, v)
    assert "http://" not in html.replace('xmlns="http://www.w3.org/2000/svg"', "")
    assert "https://" not in html


def test_sections_hold_the_library_numbers(sheet):
    _, page, text = sheet
    ans = radialpn.predict(WIRE)
    ref = radialpn.solve(WIRE)
    # the same engine on the same design: the printed V_bi is the library's, to the printed 1 mV
    assert f"{ans['vbi_V'][0]:.3f} V" in text["answer"] and ans["regime"][0] in text["answer"]
    assert f"[{ans['vbi_low_V'][0]:.3f}, {ans['vbi_high_V'][0]:.3f} V]" in text["answer"]
    assert f"V_bi {ref['vbi_V'][0]:.3f} V" in text["answer"]  # the solver's check
    assert "60" in text["design"] and "2e18" in text["design"] and "5e12" in text["design"]
    crit = radialpn.critical_dimensions(WIRE, confirm=False)
    for col in ("core_radius_nm", "shell_thickness_nm"):
        v = crit[col]["value_nm"]
        assert (f"{float(f'{v:.3g}'):g} nm" in text["critical"]) if np.isfinite(v) else "none" in text["critical"]
    assert "✓ confirmed" in text["critical"]
    sp = radialpn.spread(WIRE, radialpn.DEFAULT_SPREADS, 5000)
    assert f"{100 * sp['yield']:.1f} %" in text["spread"] and "5,000" in text["spread"]
    assert "illustrative" in text["spread"]
    assert "confirm the design with measurements" in text["caution"]
    ref = radialpn.solve(WIRE)  # the section quotes the solver's own tunnelling columns, to the digits shown
    assert f"{float(ref['peak_field_V_per_cm'][0]):.3g} V/cm" in text["tunnelling"]
    assert f"10^{float(ref['tunnel_log10'][0]):.1f}" in text["tunnelling"]
    risk = float(ref["tunnel_log10"][0]) > radialpn.TUNNEL_RISK_LOG10
    assert ("At tunnelling risk" in text["tunnelling"]) == risk


def test_charts_are_drawn_from_real_arrays(sheet):
    _, page, _ = sheet
    lines = [a for t, a in page.tags["bands"] if t == "polyline"]
    prof = radialpn.profile(WIRE)
    assert len(lines) >= 3  # E_c, E_v (solver), E_F; the approximation's two where it has bands
    pts = [tuple(map(float, p.split(","))) for p in lines[0]["points"].split()]
    assert len(pts) == len(prof["r_nm"]) and all(np.isfinite(pts).ravel())
    # the map's two panels: 12 x 8 cells each, coloured by regime / V_bi, the design marked once
    cells = [a for t, a in page.tags["map"] if t == "rect" and a.get("class") == "cell"]
    assert len(cells) == 2 * 12 * 8
    assert sum(1 for t, a in page.tags["map"] if a.get("class") == "design") == 2
    bars = [a for t, a in page.tags["spread"] if t == "rect" and a.get("class") == "bar"]
    assert len(bars) == 40


def test_report_needs_an_output_and_rejects_bad_cells():
    buf = io.StringIO()
    code = main(["report"] + FLAGS, console=Console(file=buf, width=80, color_system=None), out=io.StringIO())
    assert code == 2 and "-o wire.html" in buf.getvalue() and buf.getvalue().count("\n") == 1
    buf = io.StringIO()
    code = main(["report"] + FLAGS + ["-o", "x.html", "--cells", "1x1"], console=Console(file=buf, width=80,
                                                                                      color_system=None),
                out=io.StringIO())
    assert code == 2 and "cells" in buf.getvalue()


def test_pdf_where_matplotlib_is_installed(tmp_path):
    pytest.importorskip("matplotlib")
    pdf = tmp_path / "wire.pdf"
    code = main(["report"] + FLAGS + ["--pdf", str(pdf), "--samples", "2000", "--cells", "6x4"],
                console=Console(file=io.StringIO(), width=80, color_system=None), out=io.StringIO())
    assert code == 0 and pdf.read_bytes()[:5] == b"%PDF-"


def test_files_are_not_written_under_another_format_s_suffix(tmp_path):
    # common practice: HTML under .csv or PNG under .jpg misleads whoever opens it; refused
    # before the work, nothing written
    plan = ["--material", "GaAs", "--core-type", "p", "--core-radius", "60nm", "--shell-thickness", "45nm",
            "--core-doping", "2e18", "--shell-doping", "2e18", "--dit", "5e12"]
    for argv, path in ((["report", *plan, "-o"], "sheet.csv"), (["report", *plan, "-o", "x.html", "--pdf"], "x.png"),
                       (["map", *plan, "--x", "shell-thickness:5nm:80nm", "--y", "core-radius:20nm:150nm", "--png"],
                        "m.jpg"), (["profile", *plan, "--png"], "bands.svg")):
        buf = io.StringIO()
        code = main([*argv, str(tmp_path / path)], console=Console(file=buf, width=100, color_system=None),
                    out=io.StringIO())
        assert code == 2 and "this writes" in buf.getvalue()
    assert not any(tmp_path.iterdir())
