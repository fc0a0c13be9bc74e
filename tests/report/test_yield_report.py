"""A statistical run as the designer reads it: the sentences, the tables, the JSON document, the CSV, the pictures
(read back from the figures' own data) and the page, from made-up records with known counts."""

from __future__ import annotations

import csv
import io
import json
import math
import re
from pathlib import Path

import pytest
from matplotlib.colors import to_hex

from netloop.jobs.corners.runner import CornerRun
from netloop.jobs.statistics import STATISTICAL_CAUTION, SampleRun, parse_sample_plan, summarise
from netloop.report.yield_document import SAMPLE_COLUMNS, sample_csv, yield_document
from netloop.report.yield_html import render_yield_html
from netloop.report.notation import prefix_for
from netloop.report.yield_plot import FAILS, PASSES, histogram_figure, scatter_figure
from netloop.report.yield_text import percent, supports, verdict_line, yield_summary


def record(corner: str, seed: int, outcome: str, pm: float, fc: float = 1e6, gm: float | None = 20.0, at: str = "out") -> dict:
    met = outcome == "pass"
    loop = {"requirements": [{"text": "pm >= 45", "passed": pm >= 45}], "stability": {"stable": True},
            "checks": [{"name": "nyquist-data", "passed": outcome != "inconclusive", "detail": "doubtful", "advice": ""}],
            "margins": {"phase_margin_deg": pm, "gain_margin_db": gm, "unity_gain_hz": fc}, "peaking": {"peak_db": 0.1 * met},
            "infinite": {} if gm is not None else {"margins.gain_margin_db": "+inf"}}
    return {"corner": f"{corner}#{seed}", "at": at, "settings": {"seed": str(seed)}, "outcome": outcome, "error": None, "loop": loop}


def make_run(records: list[dict], target: float | None = None, corners: str = "") -> SampleRun:
    plan = parse_sample_plan(f'netlist = "amp.cir"\nat = "out"\nrequire = ["pm >= 45"]\n{corners}[samples]\ncount = 5\n', "/plans/amp.toml")
    stats = summarise(records, ["pm >= 45"], target=target)
    return SampleRun(plan, CornerRun(plan.plan.path, "/plans/amp.results.jsonl", tuple(records), len(records), 0), stats)


@pytest.mark.parametrize("fraction,way,text", [(0.990063918, "down", "99.0 %"), (0.9999, "down", "99.9 %"), (0.9999, "up", "100 %"),
                                               (0.99, "up", "99.0 %"), (0.99999, "round", "99.9 %"), (1.0, "down", "100 %"),
                                               (0.0004, "up", "0.1 %"), (0.0, "up", "0 %"), (0.7254, "round", "72.5 %"),
                                               (0.7241, "up", "72.5 %"), (0.99941, "up", "100 %"), (0.7249, "down", "72.4 %")])
def test_percentages_never_claim_more_than_the_bound(fraction, way, text):
    """A lower bound is rounded down and an upper bound up; an estimate or a lower bound reads "100 %" only for 100 %."""
    assert percent(fraction, way) == text


def test_three_hundred_passing_samples_support_ninety_nine_percent():
    """The sentence of the issue: with 300 samples and no failure, yield >= 99.0 % at 95 % confidence
    (Clopper-Pearson lower bound 0.05 ** (1/300) = 0.99006); a target of 99 % passes on it."""
    run = make_run([record("tt", s, "pass", 60.0) for s in range(1, 301)], target=0.99)
    assert supports(run.statistics.deciding) == "with 300 samples and no failure, yield >= 99.0 % at 95 % confidence"
    assert verdict_line(run.statistics).startswith("PASS  yield >= 99.0 % at 95 % confidence, target 99 %")


def test_summary_names_no_verdict_samples_and_how_to_rerun_the_worst():
    """The summary says how a sample without a verdict is counted, lists the worst with its seed and the command that
    reruns it, the samples a target needs, and the statistical caution."""
    recs = [record("tt", 1, "pass", 60.0), record("tt", 2, "inconclusive", 30.0), record("tt", 3, "fail", 40.0)]
    text = yield_summary(make_run(recs, target=0.9))
    assert text.startswith("INCONCLUSIVE  the target 90 % is neither shown nor ruled out")
    assert "with 3 samples and 1 failure, 1 without a verdict (counted as failing), yield >= 1.6 % at 95 % confidence" in text
    assert "netloop yield /plans/amp.toml --sample 'tt#2'" in text
    assert "29 with no failure" in text  # ln 0.05 / ln 0.9 = 28.4
    assert "statistical models are the foundry's" in text and "small-signal" in text


def test_json_document_has_every_key_and_no_infinity():
    """The netloop.yield/1 document holds every documented key, JSON has no infinity (an infinite gain margin is null
    and listed), and the deciding yield is the last of the yields."""
    recs = [record("tt", 1, "pass", 60.0, gm=None), record("tt", 2, "fail", 40.0)]
    doc = yield_document(make_run(recs))
    json.dumps(doc, allow_nan=False)
    assert set(doc) == {"schema", "plan", "results_file", "verdict", "passed", "target", "confidence", "method", "samples", "deciding",
                        "yields", "spreads", "worst", "needed", "each_sample", "caution", "infinite"}
    assert doc["schema"] == "netloop.yield/1" and doc["verdict"] == "fail" and doc["deciding"] == doc["yields"][-1]
    assert doc["infinite"] == {"each_sample.0.figures.gm": "+inf", "worst.1.figures.gm": "+inf"}
    assert doc["each_sample"][1]["met"] == {"pm >= 45": False, "stable": True, "every requirement": False}
    assert set(doc["worst"][0]) == {"sample", "corner", "at", "seed", "verdict", "why", "figures", "rerun"}
    assert doc["worst"][0]["corner"] == "tt" and doc["worst"][0]["sample"] == "tt#2"  # the failing sample first
    assert doc["samples"] == {"count": 5, "first_seed": 1, "last_seed": 5, "corners": ["tt"], "nodes": ["out"], "measured": 2,
                              "ran": 2, "skipped": 0}


def test_csv_has_a_row_per_sample_with_its_seed_and_requirements():
    """One row per sample in plan order: seed, verdict, figures, and 1/0/empty per requirement."""
    recs = [record("tt", 1, "pass", 60.0), record("tt", 2, "inconclusive", 30.0)]
    rows = list(csv.reader(io.StringIO(sample_csv(make_run(recs)))))
    assert rows[0] == [*SAMPLE_COLUMNS, "pm >= 45"]
    assert [(r[0], r[3], r[4], r[-1]) for r in rows[1:]] == [("tt#1", "1", "pass", "1"), ("tt#2", "2", "inconclusive", "")]


def test_histograms_count_the_judged_samples_and_draw_the_requirement():
    """The phase-margin panel's bars add up to the samples with a verdict, per corner when stacked, and a dashed line
    stands at the requirement's 45 deg; the gain-margin panel of loops without one says so."""
    recs = [record(c, s, "pass" if pm >= 45 else "fail", pm) for c in ("cold", "hot") for s, pm in enumerate((50.0, 44.0, 61.5, 47.0), 1)]
    recs.append(record("hot", 9, "inconclusive", 10.0))
    fig = histogram_figure(make_run(recs, corners='[axes]\ntemp = [-40, 125]\n'))
    pm_ax = fig.axes[0]
    assert [sum(bar.get_height() for bar in bars) for bars in pm_ax.containers] == [4, 4]  # one stack per corner
    assert [line.get_xdata()[0] for line in pm_ax.lines] == [45.0]
    fig.canvas.draw()
    assert all(float(t).is_integer() for t in pm_ax.get_yticks())  # sample counts: whole numbers on the axis
    none = make_run([record("tt", 1, "pass", 60.0, gm=None)])
    assert "no sample has a gain margin" in histogram_figure(none).axes[1].texts[0].get_text()


def test_scatter_colours_each_sample_by_its_verdict():
    """Three passing samples are green and one failing red, at their (crossover, phase margin)."""
    recs = [record("tt", 1, "pass", 60.0, 1e6), record("tt", 2, "pass", 55.0, 2e6), record("tt", 3, "pass", 50.0, 3e6),
            record("tt", 4, "fail", 40.0, 4e6)]
    ax = scatter_figure(make_run(recs)).axes[0]
    points = {to_hex(c.get_facecolors()[0]): c.get_offsets().tolist() for c in ax.collections}
    assert points == {PASSES: [[1e6, 60.0], [2e6, 55.0], [3e6, 50.0]], FAILS: [[4e6, 40.0]]}


def test_frequency_axes_carry_their_unit_once_and_the_corners_one_legend():
    """A crossover frequency axis labels its ticks as plain numbers and names the unit once (tick labels that each carry
    "MHz" ran into each other), and several corners get one legend for the four panels instead of one in each."""
    recs = [record(c, s, "pass", 50.0 + s, fc=f) for c, f in (("cold", 44e6), ("hot", 31e6)) for s in range(1, 5)]
    fig = histogram_figure(make_run(recs, corners='[axes]\ntemp = [-40, 125]\n'))
    fc_ax = fig.axes[2]
    fig.canvas.draw()
    assert fc_ax.get_xlabel() == "MHz"
    labels = [t.get_text() for t in fc_ax.get_xticklabels() if t.get_text()]
    assert labels and all(text.replace(".", "").replace("−", "").isdigit() for text in labels)
    assert [len(ax.get_legend_handles_labels()[0]) for ax in fig.axes] == [0, 0, 0, 0]
    assert [t.get_text() for t in fig.legends[0].get_texts()] == ["cold", "hot"]
    scatter = scatter_figure(make_run(recs, corners='[axes]\ntemp = [-40, 125]\n')).axes[0]
    assert scatter.get_xlabel() == "crossover frequency (MHz)"


@pytest.mark.parametrize("value,scale,prefix", [(38e6, 1e6, "M"), (999.0, 1.0, ""), (1e3, 1e3, "k"), (2.5e-9, 1e-9, "n")])
def test_prefix_is_the_si_prefix_of_engineering_notation(value, scale, prefix):
    """The prefix a frequency axis is labelled with is the SI prefix of the largest value's engineering notation (BIPM, The
    International System of Units, 9th edition 2019, table 7: M = 1e6, k = 1e3, n = 1e-9)."""
    assert prefix_for(value) == (scale, prefix)


# The caution the issue asks of the README and the reports (issue 17, item 6), in DEVELOPERS.md's words ("Caution that
# goes with every result"): the models are the foundry's; small-signal around each sample's operating point only; sign-off
# follows the team's flow and the foundry's guidance.
CAUTION_PARTS = ("statistical models are the foundry's", "small-signal stability yield around each sample's operating point only",
                 "sign-off follows your team's own verification flow and the foundry's guidance")


def _flat(text: str) -> str:
    return " ".join(text.replace("&#39;", "'").split()).lower()  # a sentence may begin with any of the parts


def test_every_report_of_a_statistical_run_carries_the_whole_caution():
    """The summary, the JSON document and the HTML page each carry all three parts of the statistical caution."""
    run = make_run([record("tt", s, "pass", 60.0) for s in range(1, 4)])
    for text in (yield_summary(run), yield_document(run)["caution"], render_yield_html(run), STATISTICAL_CAUTION):
        for part in CAUTION_PARTS:
            assert part in _flat(text)


def test_readme_and_the_yield_page_carry_the_caution_and_the_reload_per_sample():
    """README.md and docs/yield.md say that the models are the foundry's, that the yield is small-signal around each sample's
    operating point only, that sign-off follows the team's flow and foundry guidance, and why each sample reloads."""
    root = Path(__file__).resolve().parents[2]
    for name in ("README.md", "docs/yield.md"):
        text = _flat((root / name).read_text(encoding="utf-8"))
        assert "foundry's" in text and "small-signal stability yield around each sample's operating point only" in text, name
        assert "sign-off follows your team's own verification flow and the foundry's guidance" in text, name
        assert "a reload per sample is expected" in text and "draws the mismatch values when it reads the circuit" in text, name


def test_page_is_self_contained_with_both_pictures_and_the_caution():
    """The HTML page embeds the histograms and the scatter, the sentence the data supports and the caution."""
    page = render_yield_html(make_run([record("tt", s, "pass", 60.0) for s in range(1, 11)]))
    assert page.count("data:image/png;base64,") == 2 and "src=\"http" not in page
    assert "with 10 samples and no failure, yield &gt;= 74.1 % at 95 % confidence" in page
    assert math.isclose(0.05 ** 0.1, 0.7411, abs_tol=1e-4)
    assert "statistical models are the foundry" in page


def test_two_corners_say_a_seed_is_one_die_and_the_spread_table_names_its_columns():
    """With two corners (the fewest that share a seed) the samples line says a seed draws the same mismatch at every
    corner; the spread table's head names its columns in lower case like every other head."""
    recs = [record(c, s, "pass", 50.0 + s) for c in ("cold", "hot") for s in range(1, 6)]
    lines = yield_summary(make_run(recs, corners='[axes]\ntemp = [-40, 125]\n')).splitlines()
    # from memory (netloop's sampling): one seed per die, the same die measured at each corner
    assert "samples                   5 at each of 2 corners, seeds 1 to 5; a seed draws the same mismatch at every corner (one die)" in lines
    assert any(line.startswith("pm >= 45") and " every corner " in line for line in lines)  # the dies: a yield over both corners
    page = render_yield_html(make_run(recs, corners='[axes]\ntemp = [-40, 125]\n'))
    assert "5 at each corner, seeds 1 to 5; a seed draws the same mismatch at every corner" in page
    assert "<th>interval</th>" in page or ">interval<" in page
    head = lines[lines.index("spread over the samples with a verdict") + 1]
    assert [w.strip() for w in head.split("  ") if w.strip()] == ["figure", "corner", "n", "mean", "std", "min", "max", "left out"]
    one = yield_summary(make_run([record("tt", s, "pass", 50.0 + s) for s in range(1, 6)])).splitlines()
    assert "samples                   5, seeds 1 to 5" in one  # one corner: nothing shared to say


def test_an_unwritable_sample_table_names_what_could_not_be_written(tmp_path):
    """Writing the sample CSV into a missing folder fails with one message naming the sample table, the path and why."""
    from netloop.errors import OutputError
    from netloop.report.yield_document import write_sample_csv

    path = tmp_path / "missing" / "samples.csv"
    with pytest.raises(OutputError) as err:
        write_sample_csv(make_run([record("tt", 1, "pass", 60.0)]), path)
    assert str(err.value) == f"cannot write the sample table to {str(path)!r}: No such file or directory"  # the OS's strerror (ENOENT)


TWO_CORNERS = '[axes]\ntemp = [-40, 125]\n'


def test_each_yield_in_the_document_carries_the_sentence_it_supports():
    """Each yield of the document has the sentence the data supports (the schema in yield_document's docstring lists
    "supports"): 1 pass of 2 gives the Clopper-Pearson lower bound 1 - 0.95 ** (1/2) = 0.0253 (Beta(1, 2) by hand), read
    down as 2.5 %; 2 stable of 2 give 0.05 ** (1/2) = 0.2236, 22.3 %."""
    doc = yield_document(make_run([record("tt", 1, "pass", 60.0), record("tt", 2, "fail", 40.0)]))
    assert {y["requirement"]: y["supports"] for y in doc["yields"]} == {
        "pm >= 45": "with 2 samples and 1 failure, yield >= 2.5 % at 95 % confidence",
        "stable": "with 2 samples and no failure, yield >= 22.3 % at 95 % confidence",
        "every requirement": "with 2 samples and 1 failure, yield >= 2.5 % at 95 % confidence"}


def _table_after(page: str, heading: str) -> list[list[tuple[str, str]]]:
    """The rows, as (class, text) per cell, of the first table after ``heading`` on a page."""
    part = re.search(rf"{re.escape(heading)}.*?<table[^>]*>(.*?)</table>", page, re.S)[1]
    return [re.findall(r'<t[dh](?: class="([^"]*)")?>([^<]*)</t[dh]>', row) for row in re.findall(r"<tr>(.*?)</tr>", part, re.S)]


def test_the_page_s_facts_and_worst_samples_read_as_the_summary_s():
    """The page's facts name the break node(s), the corners and the samples as the summary's head does (docs/yield.md,
    Outputs); in the worst samples, a verdict is green (ok) for pass, red (bad) for fail and amber (warn) without one,
    the classes the report's style sheet colours so."""
    recs = [record(c, s, outcome, pm) for c in ("cold", "hot") for s, outcome, pm in ((1, "pass", 60.0), (2, "fail", 40.0),
                                                                                     (3, "inconclusive", 50.0))]
    page = render_yield_html(make_run(recs, corners=TWO_CORNERS))
    facts = {row[0][1]: row[1][1] for row in _table_after(page, '<section id="yield">')}
    assert (facts["break node(s)"], facts["corners"]) == ("out", "cold, hot")
    assert facts["samples"] == "5 at each corner, seeds 1 to 5; a seed draws the same mismatch at every corner"
    verdicts = {row[-2] for row in _table_after(page, "<h2>Worst samples</h2>")[1:]}
    assert verdicts == {("ok", "pass"), ("bad", "fail"), ("warn", "inconclusive")}


def test_the_histograms_title_counts_dies_and_a_single_corner_gets_no_corner_key():
    """Over two corners the title counts dies ("5 dies at 2 corners"; Clopper-Pearson with no failure in 5: lower bound
    0.05 ** (1/5) = 0.5493, read down as 54.9 %); one corner has nothing to tell apart, so no key of corners."""
    recs = [record(c, s, "pass", 50.0 + s) for c in ("cold", "hot") for s in range(1, 6)]
    fig = histogram_figure(make_run(recs, corners=TWO_CORNERS))
    assert fig._suptitle.get_text() == ("amp.toml: 5 dies at 2 corners: every requirement met by 100 % (yield >= 54.9 % at 95 % "
                                        "confidence)")
    assert histogram_figure(make_run(recs[:5])).legends == []


def test_a_histogram_of_equal_values_spans_one_percent_of_them_either_side():
    """Five samples with the same gain margin (20 dB, no requirement on it) give a range of 1 % of the value either side,
    19.8 to 20.2 dB, the bar in its middle; five equal peakings of 0 dB (failing samples here) give -1 to 1 dB."""
    recs = [record("tt", s, "fail", 40.0) for s in range(1, 6)]
    fig = histogram_figure(make_run(recs))
    assert fig.axes[1].get_xlim() == pytest.approx((19.8, 20.2))
    assert fig.axes[3].get_xlim() == pytest.approx((-1.0, 1.0))


def test_the_spread_says_a_gain_margin_without_phase_crossover_is_none():
    """A loop without a phase crossover has no gain margin (null: netloop.analysis.results.Margins), which the spread's
    "left out" column counts as "1 none (no phase crossover)"."""
    bare = record("tt", 1, "pass", 60.0, gm=None)
    bare["loop"]["infinite"] = {}  # the document of such a loop: gain_margin_db null and not infinite
    lines = yield_summary(make_run([bare, record("tt", 2, "pass", 61.0)])).splitlines()
    (gm_row,) = [line for line in lines if line.startswith("gain margin ")]
    assert gm_row.endswith("  1 none (no phase crossover)")


def test_a_target_every_die_misses_fails_with_the_dies_and_their_failures():
    """Every die fails at the hot corner: 0 of 5 pass, Clopper-Pearson upper bound 1 - 0.05 ** (1/5) = 0.4507, read up
    as 45.1 %, below the 90 % target: FAIL, counting dies as README's example line does ("60 dies, 1 failure")."""
    recs = [record("cold", s, "pass", 60.0) for s in range(1, 6)] + [record("hot", s, "fail", 40.0) for s in range(1, 6)]
    run = make_run(recs, target=0.9, corners=TWO_CORNERS)
    assert verdict_line(run.statistics) == "FAIL  yield below the target 90 % at 95 % confidence: at most 45.1 % (5 dies, 5 failures)"


def test_two_break_nodes_name_the_node_in_the_yields_and_the_worst_samples():
    """With two break nodes each yield row names its node ("tt at fb"), the dies' row "every corner and node"; the worst
    samples have an "at" column and each sample's four figures as its record gives them (40 deg, 20 dB, 1 MHz, 0 dB)."""
    recs = [record("tt", s, "pass" if pm >= 45 else "fail", pm, at=node) for node, pm in (("out", 60.0), ("fb", 40.0)) for s in (1, 2)]
    lines = yield_summary(make_run(recs)).splitlines()
    corners = [re.split(r"\s{2,}", line)[1] for line in lines if line.startswith("pm >= 45 ")]
    assert corners == ["tt at out", "tt at fb", "every corner and node"]
    head = next(i for i, line in enumerate(lines) if line.startswith("sample "))
    assert re.split(r"\s{2,}", lines[head]) == ["sample", "at", "seed", "phase margin", "gain margin", "crossover frequency",
                                                "closed-loop peaking", "verdict", "why"]
    assert re.split(r"\s{2,}", lines[head + 2]) == ["tt#1", "fb", "1", "40.00 deg", "20.00 dB", "1.00 MHz", "0.00 dB", "fail", "pm >= 45"]
