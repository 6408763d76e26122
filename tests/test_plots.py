"""Pictures: files per check that open as non-blank images, a paginated interval chart."""

from __future__ import annotations

import sys
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from meanband.report import plots
from meanband.store.report_json import ReportError
from report_rows import make_row, sample_rows

pytest.importorskip("matplotlib")


def image(path):
    from matplotlib.image import imread

    pixels = imread(path)
    assert pixels.ndim == 3 and pixels.shape[0] > 100 and pixels.shape[1] > 100
    return pixels


def test_every_check_gets_a_run_chart_qq_plot_and_histogram(tmp_path):
    rows = sample_rows()
    result = plots.write_plots(rows, tmp_path)
    stems = plots.slugs(rows)
    assert len(set(stems)) == len(rows)
    for stem in stems:
        for series in ("run", "qq", "hist"):
            pixels = image(tmp_path / f"{stem}.{series}.png")
            assert pixels[..., :3].var() > 0  # not blank
    page = image(tmp_path / "intervals-01.png")
    assert page[..., :3].var() > 0
    assert sorted(p.name for p in result.written) == sorted(p.name for p in tmp_path.iterdir())
    assert len(result.written) == 1 + 3 * len(rows)
    assert result.skipped == []


def test_svg_as_well(tmp_path):
    rows = sample_rows()[:1]
    written = plots.write_plots(rows, tmp_path, formats=("png", "svg")).written
    svgs = [p for p in written if p.suffix == ".svg"]
    assert len(svgs) == 4
    for path in svgs:
        assert ET.parse(path).getroot().tag.endswith("svg")


def test_interval_chart_is_paginated(tmp_path):
    rng = np.random.default_rng(9)
    rows = [make_row(f"t.py::test_channel[{i}]", rng.normal(5.0, 0.2, 12), band={"high": 6.0})
            for i in range(45)]
    written = plots.interval_chart_pages(rows, tmp_path, ["png"], per_page=40)
    assert [p.name for p in written] == ["intervals-01.png", "intervals-02.png"]
    # The full page holds 40 rows, the second 5: it is shorter.
    assert image(written[0]).shape[0] > image(written[1]).shape[0]


def test_rows_without_trials_are_skipped_with_the_reason(tmp_path):
    row = dict(sample_rows()[0], values=None, warmup=None)
    result = plots.write_plots([row], tmp_path)
    assert [p.name for p in result.written] == ["intervals-01.png"]
    assert result.skipped_lines() == ["no per-check plots for test_quote.py::test_quote_latency: "
                                      "the report was written without trials"]


def test_many_skipped_rows_make_one_line(tmp_path):
    rows = [dict(row, values=None, warmup=None) for row in sample_rows()]
    (line,) = plots.write_plots(rows, tmp_path, checks="all").skipped_lines()
    assert line.startswith("no per-check plots for test_quote.py::test_quote_latency, ")
    assert line.endswith(" and 3 more: the report was written without trials")


@pytest.mark.parametrize(("checks", "drawn"), [("failed", 2), ("none", 0)])
def test_per_check_plots_can_be_limited(tmp_path, checks, drawn):
    rows = sample_rows()  # one FAIL and one UNDECIDED among them
    result = plots.write_plots(rows, tmp_path, checks=checks)
    runs = sorted(p.name for p in result.written if p.name.endswith(".run.png"))
    assert len(runs) == drawn
    assert len(result.written) == 1 + 3 * drawn
    if drawn:
        assert runs == ["tests-test_chamber--test_probe_mean--probe-b.run.png",
                        "tests-test_quote--test_batch_latency.run.png"]
    with pytest.raises(ReportError, match="choose one of all, failed, none"):
        plots.write_plots(rows, tmp_path, checks="some")


@pytest.mark.parametrize(
    ("band", "values", "expected"),
    [
        # Two-sided band 10..20: 0 at the low edge, 1 at the high edge.
        ({"low": 10.0, "high": 20.0}, [12.0, 14.0], (None, 0.3, None)),
        # Budget <= 2: the fraction of the budget.
        ({"high": 2.0}, [0.9, 1.1], (-np.inf, 0.5, None)),
        # Lower limit >= 10: multiples of the limit above the edge.
        ({"low": 10.0}, [11.9, 12.1], (None, 0.2, np.inf)),
    ],
)
def test_band_position(band, values, expected):
    row = make_row("t.py::test_x", values, band=band)
    position = plots.band_position(row["decision"])
    interval = row["decision"]["interval"]
    assert position.mean == pytest.approx(expected[1])
    if expected[0] is not None:
        assert position.low == expected[0]
    if expected[2] is not None:
        assert position.high == expected[2]
    if "low" in band and "high" in band:
        width = band["high"] - band["low"]
        assert position.low == pytest.approx((interval["low"] - band["low"]) / width)
        assert position.high == pytest.approx((interval["high"] - band["low"]) / width)


def test_band_position_with_an_edge_at_zero_stays_finite():
    row = make_row("t.py::test_offset", [-0.2, -0.1, -0.15, -0.12], band={"high": 0.0})
    position = plots.band_position(row["decision"])
    assert np.isfinite(position.mean) and position.mean < 1.0


def test_slugs_are_readable_unique_and_bounded():
    rows = [
        {"nodeid": "tests/test_a.py::test_x[1-2]", "series": "warm"},
        {"nodeid": "tests/test_a.py::test_x[1/2]", "series": "warm"},
        {"nodeid": "tests/test_a.py::test_" + "y" * 200, "series": ""},
        {"nodeid": "tests/test_a.py::test_z", "series": ""},
        {"nodeid": "tests/test_a.py::test_z", "series": ""},
    ]
    stems = plots.slugs(rows)
    assert len(set(stems)) == len(stems)
    assert stems[0].startswith("tests-test_a--test_x-1-2---warm")
    assert all(len(s) <= 100 for s in stems)
    assert stems[4] == "tests-test_a--test_z-2"


def test_verdicts_differ_in_shape_not_only_colour():
    markers = [style["marker"] for style in plots._STYLE.values()]
    assert len(set(markers)) == len(markers) == 3


def test_unknown_format_is_refused():
    with pytest.raises(ReportError, match="unknown plot format jpeg"):
        plots.check_formats("png,jpeg")
    assert plots.check_formats("SVG, png") == ("svg", "png")


def test_missing_matplotlib_says_how_to_install(monkeypatch):
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    with pytest.raises(plots.PlotsUnavailable, match=r"pip install 'pytest-meanband\[plots\]'"):
        plots.require_matplotlib()


def test_a_pooled_run_chart_marks_where_each_run_ends(tmp_path):
    from meanband.report.merge import merge_reports
    from meanband.store import report_json

    rng = np.random.default_rng(13)
    shards = []
    for level in (5.0, 5.6):  # two machines at different levels: the chart should show it
        rows = [make_row("t.py::test_pump", rng.normal(level, 0.1, 15), band={"high": 7.0})]
        shards.append(report_json.build_report(rows, environment={}, configuration={}))
    merged = merge_reports([("a.json", shards[0]), ("b.json", shards[1])], pool=True)
    figure = plots._draw_run(merged["rows"][0], "pooled")
    (ax,) = figure.axes
    boundaries = [line.get_xdata()[0] for line in ax.get_lines()
                  if line.get_label() == "next pooled run"]
    assert boundaries == [15.5]


def test_plots_are_written_atomically_and_never_through_a_planted_link(tmp_path):
    rows = sample_rows()[:1]
    first = plots.write_plots(rows, tmp_path / "img").written
    victim = tmp_path / "victim.txt"
    victim.write_text("keep me")
    planted = first[0]
    planted.unlink()
    planted.symlink_to(victim)
    again = plots.write_plots(rows, tmp_path / "img").written
    assert sorted(p.name for p in again) == sorted(p.name for p in first)
    assert victim.read_text() == "keep me"
    assert not planted.is_symlink() and image(planted).ndim == 3
    assert [p.name for p in (tmp_path / "img").iterdir() if p.name.startswith(".")] == []


def test_a_temperature_budget_keeps_a_pass_and_a_fail_apart():
    # Against 61.2 degC a PASS near 61.16 and a FAIL near 61.30 both sat at about 1.00 when the
    # position was a fraction of the limit; a temperature's zero means nothing, so the data
    # set the scale and the two lie on either side of the edge.
    passing = make_row("t.py::test_oven[a]", [61.14, 61.16, 61.15, 61.17, 61.16, 61.15],
                       band={"high": 61.2}, unit="degC")
    failing = make_row("t.py::test_oven[b]", [61.29, 61.31, 61.30, 61.30, 61.29, 61.31],
                       band={"high": 61.2}, unit="degC")
    assert passing["decision"]["verdict"] == "PASS" and failing["decision"]["verdict"] == "FAIL"
    below = plots.band_position(passing["decision"])
    above = plots.band_position(failing["decision"])
    assert below.mean < 0.8 and below.high <= 1.0
    assert above.mean > 1.2 and above.high > above.mean  # an upper bound: its low end is open
    # Volts keep the fraction of the limit: zero volts is zero.
    volts = make_row("t.py::test_rail", [4.9, 5.1, 5.0, 5.0], band={"high": 6.0}, unit="V")
    assert plots.band_position(volts["decision"]).mean == pytest.approx(5.0 / 6.0)
