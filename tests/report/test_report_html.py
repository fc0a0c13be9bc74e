"""The HTML report: one self-contained page with embedded plots, names escaped."""

from __future__ import annotations

import base64
import html
from html.parser import HTMLParser

import control
import pytest
from report_loops import W, conditional, make_result, two_stage

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


class _Tables(HTMLParser):
    """Collects, per <h3> heading (or <h2> for the overview), its table's rows as (class, text) per cell (Python's html.parser)."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tables: dict[str, list[list[tuple[str, str]]]] = {}
        self.heading = ""
        self._in_heading = False
        self._cell: list | None = None

    def handle_starttag(self, tag, attrs):
        if tag in ("h2", "h3"):
            self._in_heading, self.heading = True, ""
        elif tag == "tr":
            self.tables.setdefault(self.heading, []).append([])
        elif tag in ("td", "th"):
            self._cell = [dict(attrs).get("class", "th" if tag == "th" else ""), ""]

    def handle_endtag(self, tag):
        if tag in ("h2", "h3"):
            self._in_heading = False
        elif tag in ("td", "th") and self._cell is not None:
            self.tables[self.heading][-1].append(tuple(self._cell))
            self._cell = None

    def handle_data(self, data):
        if self._in_heading:
            self.heading += data
        elif self._cell is not None:
            self._cell[1] += data


def _tables(page: str) -> dict[str, list[list[tuple[str, str]]]]:
    parser = _Tables()
    parser.feed(page)
    return parser.tables


def test_the_break_table_names_netlist_node_method_and_both_sides(stable_result):
    """The "Where the loop was broken" table reads, row by row, what measure() recorded of the break: the netlist, the
    node, the probe method, the driver and load sides with their terminals, why, and the silenced sources."""
    from netloop.report import render_html

    rows = _tables(render_html(stable_result, plots=False))["Where the loop was broken"]
    # the BreakInfo that report_loops.make_result builds, as measure() assembles it (netloop.jobs.loop_result)
    assert [(label, value) for (_, label), (_, value) in rows] == [
        ("netlist", "circuits/front_end.cir"),
        ("node", "xamp.n5"),
        ("method", "tian"),
        ("driver side", "xamp.n5__a: xamp.m6.d"),
        ("load side", "xamp.n5__b: xamp.m1.g, cc.1"),
        ("decided by", "the only terminal that is a transistor drain drives the node"),
        ("silenced sources", "vin (AC magnitude 0 in the probe deck)"),
    ]


def test_each_gain_crossover_marks_its_phase_margin_good_or_bad(stable_result, unstable_result):
    """In the gain-crossover table the phase-margin cell is marked ok (green) where the margin is positive and bad (red)
    where it is negative: the stable two-stage loop's one crossover is ok, the unstable three-pole loop's is bad."""
    from netloop.report import render_html

    for result, sign in ((stable_result, 1), (unstable_result, -1)):
        s = control.tf("s")
        a0, poles = (1e4, (1e3, 3e7, 1e8)) if sign > 0 else (1e4, (1e3, 1e6, 2e6))
        tf = a0 / ((1 + s / (W * poles[0])) * (1 + s / (W * poles[1])) * (1 + s / (W * poles[2])))
        _, pm, _, _, _, _ = control.stability_margins(tf)  # python-control 0.10 on the closed form of each loop
        assert pm * sign > 0
        head, *rows = _tables(render_html(result, plots=False))["Gain crossovers (|T| = 0 dB)"]
        column = [text for _, text in head].index("phase margin")
        assert [row[column] for row in rows] == [("num ok" if sign > 0 else "num bad", f"{pm:.2f} deg")]


def test_the_second_order_estimate_row_is_styled_as_an_estimate(stable_result):
    """Without fitted poles the closed-loop table ends with the second-order estimate from the phase margin, in a cell
    whose class the page's stylesheet styles (italic, "estimate"), and its damping is the one of that phase margin."""
    import math
    import re
    from dataclasses import replace

    from netloop.analysis import analyse
    from netloop.report import render_html

    f = stable_result.analysis.freq_hz
    result = replace(stable_result, analysis=analyse(f, two_stage(f), fit_poles=False))
    page = render_html(result, plots=False)
    rows = _tables(page)["Closed loop and Nyquist"]
    (cls, text), = [row[1] for row in rows if row[0][1] == "2nd-order ESTIMATE"]
    assert cls == "estimate" and f".{cls} {{" in page
    zeta = float(re.search(r"damping (\S+),", text).group(1))
    # a second-order loop's phase margin from its damping: PM = atan(2 z / sqrt(sqrt(1 + 4 z^4) - 2 z^2))
    # (Ogata, Modern Control Engineering, 5th ed., sec. 7-7); zeta is printed to 3 decimals
    pm = math.degrees(math.atan(2 * zeta / math.sqrt(math.sqrt(1 + 4 * zeta**4) - 2 * zeta**2)))
    assert pm == pytest.approx(result.analysis.margins.phase_margin_deg, abs=0.1)


def test_the_overview_gives_each_loop_its_lower_gain_margin(conditional_result, stable_result):
    """The overview row of the conditionally stable loop gives its lower gain margin, the smallest |T| (dB) where the phase
    crosses -180 deg with |T| > 1 below crossover; the two-stage loop, which has no such crossing, gives "-"."""
    import numpy as np
    from scipy.optimize import brentq

    from netloop.report import render_html

    def phase(f):
        return np.degrees(np.unwrap(np.angle(conditional(np.logspace(0, np.log10(f), 400)))))[-1]

    # the -180 deg crossings of the closed form below the 99.5 kHz crossover (scipy brentq); the conditionally stable
    # loop of Franklin, Powell and Emami-Naeini, Feedback Control of Dynamic Systems, sec. 6.4: gain may fall that far
    grid = np.logspace(0, 5, 101)
    phases = [phase(f) + 180 for f in grid]
    roots = [brentq(lambda f: phase(f) + 180, a, b) for a, b, pa, pb in zip(grid, grid[1:], phases, phases[1:]) if pa * pb < 0]
    lower_gm = min(20 * np.log10(abs(conditional(f))) for f in roots)
    head, *rows = _tables(render_html([conditional_result, stable_result], plots=False))["All loops"]
    column = [text for _, text in head].index("lower GM")
    assert [row[column][1] for row in rows] == [f"{lower_gm:.2f} dB", "-"]


def test_the_subtitle_gives_one_loop_its_verdict_and_several_their_count(stable_result, unstable_result):
    """Under the title, one loop reads its verdict, break node and probe method; several loops read only how many they are
    (each has its own verdict below), then the netlist."""
    import re

    from netloop.report import render_html

    def subtitle(results):
        return html.unescape(re.search(r'<p class="sub">([^<]*)</p>', render_html(results, plots=False)).group(1))

    # make_result's loops: the stable two-stage loop broken at xamp.n5 with the Tian probe, in circuits/front_end.cir
    assert subtitle(stable_result).startswith("STABLE (PM 67.0") and subtitle(stable_result).endswith(
        ", loop broken at xamp.n5 (tian probe); netlist circuits/front_end.cir")
    assert subtitle([stable_result, unstable_result]) == "2 loops; netlist circuits/front_end.cir"


def test_the_simulation_table_says_how_the_loop_was_simulated(stable_result):
    """The "Simulation" table reads SimInfo: the backend (with the processes only when several ran side by side), the
    points, the refinement rounds and whether the phase margin settled (marked bad when not); the gain-crossover table
    gives each delay margin with its unit."""
    from dataclasses import replace

    from netloop.report import render_html

    def rows(result):
        return {label: (cls, value) for (_, label), (cls, value) in _tables(render_html(result, plots=False))["Simulation"]}

    one = rows(stable_result)
    assert one["backend"] == ("", "analytic") and one["frequency points"] == ("", "201")
    assert one["refinement"] == ("", "0 round(s); phase margin settled")
    unsettled = replace(stable_result, sim=replace(stable_result.sim, processes=2, refinement_rounds=3, refined=False))
    two = rows(unsettled)
    assert two["backend"] == ("", "analytic, 2 processes side by side")
    assert two["refinement"] == ("bad", "3 round(s); phase margin NOT settled")
    head, *crossings = _tables(render_html(stable_result, plots=False))["Gain crossovers (|T| = 0 dB)"]
    column = [text for _, text in head].index("delay margin")
    assert crossings[0][column][1] == "19.6 ns"  # PM / (360 deg fc), as the text summary gives it
