"""Benchmark: drawing each report figure, against the floor cost of a PNG from matplotlib.

The peer, measured in the same run, is the cheapest figure matplotlib's Agg canvas can write:
an empty 7 x 5 inch Figure saved as PNG at the same 150 dpi, so the ratio is the cost of our
drawing on top of the unavoidable encode. Each figure is drawn from the hand-made documents of
``tests/report_documents.py`` (the audit one computed from 1,500 invented rows), five times, and
the median is reported; the whole ``--out`` bundle (all figures, HTML, Markdown, JSON) is timed
too.

Run: ``python -m pytest -m benchmark tests/benchmarks/test_bench_report.py -s``
"""

from __future__ import annotations

import io
import statistics
import sys
import time
from pathlib import Path

import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from report_documents import ALL_KINDS, document_for

from causalcheck.report.bundle import write_bundle
from causalcheck.report.figures import figures_for, render_png


def _median_seconds(work, repeats: int = 5) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        work()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def _empty_png() -> bytes:
    figure = Figure(figsize=(7, 5), dpi=150)
    FigureCanvasAgg(figure)
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=150)
    return buffer.getvalue()


@pytest.mark.benchmark
def test_each_figure_under_a_second(tmp_path):
    _empty_png()
    render_png("graph", document_for("audit"))             # warm the font cache
    floor = _median_seconds(_empty_png)
    print(f"\npeer: empty 7x5 in figure to PNG at 150 dpi: {floor * 1000:.0f} ms")
    print(f"{'document':10} {'figure':14} {'ms':>7} {'x peer':>7}")
    worst = 0.0
    for kind in ALL_KINDS:
        document = document_for(kind)
        for name in figures_for(document):
            seconds = _median_seconds(lambda name=name, document=document:
                                      render_png(name, document))
            worst = max(worst, seconds)
            print(f"{kind:10} {name:14} {seconds * 1000:7.0f} {seconds / floor:7.1f}")
    for kind in ALL_KINDS:
        folder = tmp_path / kind
        seconds = _median_seconds(lambda folder=folder, kind=kind:
                                  write_bundle(folder, document_for(kind), kind=kind),
                                  repeats=3)
        print(f"{kind:10} {'whole bundle':14} {seconds * 1000:7.0f} {seconds / floor:7.1f}")
    assert worst < 1.0
