"""The HTML report: one self-contained page with embedded plots, names escaped."""

from __future__ import annotations

import base64
import html
from html.parser import HTMLParser

import control
from report_loops import W, make_result, two_stage

from netloop.report import write_html


class _Refs(HTMLParser):
    """Collects tags and every src/href attribute of a page (Python's html.parser)."""

    def __init__(self):
        super().__init__()
        self.tags: list[str] = []
        self.refs: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.refs.extend(value or "" for name, value in attrs if name in ("src", "href"))


def test_html_is_self_contained_and_escapes_names(tmp_path, unstable_result):
    """The page loads nothing from outside (no http(s) or protocol-relative src/href, no script or stylesheet link),
    embeds PNG plots as data URIs, and escapes a netlist name that looks like markup."""
    result = make_result(two_stage, netlist="<script>alert(1)</script>.cir", requirements=("pm>=60",))
    page = write_html(result, tmp_path / "one.html").read_text(encoding="utf-8")
    refs = _Refs()
    refs.feed(page)
    assert not any(r.startswith(("http://", "https://", "//")) for r in refs.refs)
    assert "script" not in refs.tags and "link" not in refs.tags
    images = [r for r in refs.refs if r.startswith("data:image/png;base64,")]
    assert len(images) == 2
    assert base64.b64decode(images[0].split(",", 1)[1])[:8] == b"\x89PNG\r\n\x1a\n"
    assert "<script>alert(1)</script>" not in page and "&lt;script&gt;alert(1)&lt;/script&gt;.cir" in page
    s = control.tf("s")
    _, pm, _, _, _, _ = control.stability_margins(1e4 / ((1 + s / (W * 1e3)) * (1 + s / (W * 3e7)) * (1 + s / (W * 1e8))))
    assert f"{pm:.2f} deg" in page  # python-control 0.10 stability_margins on two_stage's T(s) (67.03)
    assert result.caution in html.unescape(page) and "pm&gt;=60" in page


def test_html_of_several_loops_links_each_section(tmp_path, stable_result, unstable_result):
    """A page of several loops has an overview row linking to each loop's section, and says which fail."""
    page = write_html([stable_result, unstable_result], tmp_path / "many.html").read_text(encoding="utf-8")
    refs = _Refs()
    refs.feed(page)
    anchors = [r[1:] for r in refs.refs if r.startswith("#")]
    assert len(anchors) == 2 and all(f'id="{a}"' in page for a in anchors)
    assert "FAIL: 1 of 2 loop(s) pass, 1 fail" in page
    assert sum(r.startswith("data:image/png;base64,") for r in refs.refs) == 6


def _banners(page: str) -> list[str]:
    return [part.split('"', 1)[0] for part in page.split('<div class="verdict ')[1:]]


def test_html_banner_is_green_only_for_a_pass_that_needs_no_note(stable_result, quiet_free_result, marginal_result, inconclusive_result):
    """The banner is green (pass) for a plain PASS, amber (note) for a PASS of a loop that does not regulate or sits below
    common practice, grey for an inconclusive loop, and an inconclusive loop never reads PASS."""
    from netloop.report import render_html

    assert _banners(render_html(stable_result, plots=False)) == ["pass"]
    assert _banners(render_html(quiet_free_result, plots=False)) == ["note"]
    page = render_html(marginal_result, plots=False)
    assert _banners(page) == ["note"] and "below common practice" in page
    page = render_html(inconclusive_result, plots=False)
    assert _banners(page) == ["inconclusive"] and ">INCONCLUSIVE " in page and ">PASS " not in page
    page = render_html([stable_result, inconclusive_result], plots=False)
    assert _banners(page)[0] == "inconclusive" and "INCONCLUSIVE: 1 of 2 loop(s) pass, 1 inconclusive" in page


def test_the_page_leads_the_closed_loop_with_measured_figures(tmp_path, marginal_result):
    """Issue 15.6: on the page the closed-loop table starts with the measured peaking and |T/(1+T)|, then the poles fitted
    to the measured 1/(1+T); no estimate from the phase margin stands beside them (the marginal loop's fitted pair
    matches numpy.roots of its closed-form 1 + T: (1 + s/w1)(1 + s/w2)(1 + s/w3) + 1000)."""
    import re

    import numpy as np

    page = write_html(marginal_result, tmp_path / "m.html").read_text(encoding="utf-8")
    rows = re.findall(r"<tr><th>([^<]*)</th><td[^>]*>([^<]*)</td></tr>", page)
    labels = [html.unescape(label) for label, _ in rows]
    i = labels.index("closed-loop peaking")
    assert labels[i : i + 3] == ["closed-loop peaking", "|T/(1+T)| at worst crossover", "closed-loop poles"]
    assert "ESTIMATE" not in page
    char = np.polyadd(np.polymul(np.polymul([1 / (W * 1e3), 1], [1 / (W * 1e6), 1]), [1 / (W * 2e6), 1]), [1e3])
    pair = max((r for r in np.roots(char) if r.imag > 0), key=lambda r: r.real)
    assert f"damping {-pair.real / abs(pair):.3f}" in html.unescape(rows[i + 2][1])
