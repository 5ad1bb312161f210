"""Figures (causalcheck/report/figures.py): valid PNGs, honest geometry, safe labels."""

from __future__ import annotations

import struct

import matplotlib.image
import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from report_documents import ALL_KINDS, audit_document, document_for, vet_document

from causalcheck.report import figures
from causalcheck.report.figures import FIGURES, figures_for, graph_layout, render_png
from causalcheck.sensitivity import bounds, bounds_grid

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def assert_valid_png(path) -> tuple[int, int]:
    data = path.read_bytes()
    assert data[:8] == PNG_SIGNATURE
    assert data[12:16] == b"IHDR"
    width, height = struct.unpack(">II", data[16:24])
    assert width > 0 and height > 0
    pixels = matplotlib.image.imread(path)
    assert pixels.shape[0] == height and pixels.shape[1] == width
    # a drawing, not a blank page: a good share of pixels are not white
    ink = (pixels[..., :3] < 0.9).any(axis=-1).mean()
    assert ink > 0.01
    return width, height


EXPECTED = {
    "audit": ["graph", "estimates", "decomposition", "sensitivity"],
    "vet": ["graph", "sensitivity"],
    "plan": ["graph", "plan"],
    "controls": ["graph"],
    "wording": [],
}


@pytest.mark.parametrize("kind", ALL_KINDS)
def test_every_figure_a_document_supports_is_a_valid_png(kind, tmp_path):
    document = document_for(kind)
    assert figures_for(document) == EXPECTED[kind]
    writers = {"graph": figures.graph_figure, "estimates": figures.estimates_figure,
               "decomposition": figures.decomposition_figure,
               "sensitivity": figures.sensitivity_figure, "plan": figures.plan_figure}
    for name in figures_for(document):
        path = writers[name](document, tmp_path / FIGURES[name][0])
        assert path == tmp_path / FIGURES[name][0]
        width, _ = assert_valid_png(path)
        # at most 7.8 inches at 150 dpi: shown at print size in the HTML report
        assert width <= 7.8 * 150 + 1


def test_missing_numbers_are_a_value_error_not_a_crash():
    with pytest.raises(ValueError, match="no decomposition"):
        render_png("decomposition", vet_document())
    with pytest.raises(ValueError, match="no plan options"):
        render_png("plan", audit_document())


def test_a_dollar_sign_in_a_label_is_not_math(tmp_path):
    document = audit_document()
    document["study"]["variables"]["income"]["label"] = "Income in $ (1,000s) $x^2$"
    path = tmp_path / "graph.png"
    figures.graph_figure(document, path)           # mathtext would fail or render x²
    assert_valid_png(path)


def test_the_robustness_value_lies_on_the_threshold_curve_of_the_contour():
    # the contour is drawn from causalcheck.sensitivity.bounds_grid; at (RV, RV) the adjusted
    # estimate must equal the threshold (Cinelli & Hazlett 2020, Sec. 4.1: the definition)
    document = vet_document()
    rv = document["robustness_value"]
    at_rv = bounds(document["estimate"], document["std_error"], document["dof"], rv, rv)
    assert float(at_rv.adjusted_estimate) == pytest.approx(0.0, abs=1e-9)
    grid = bounds_grid(document["estimate"], document["std_error"], document["dof"],
                       [0.0, rv / 2, rv], [0.0, rv / 2, rv])
    values = grid.bounds.adjusted_estimate
    assert values[0, 0] == pytest.approx(document["estimate"])
    assert values[1, 1] > 0 > values[2, 2] - 1e-9


def test_graph_layout_puts_causes_left_of_effects():
    edges = [("income", "rebate"), ("income", "use"), ("garden", "rebate"), ("rebate", "use"),
             ("rebate", "fixtures"), ("fixtures", "use"), ("income", "garden")]
    layout = graph_layout(edges)
    # layers are networkx's topological generations (networkx 3 documentation)
    graph = nx.DiGraph(edges)
    for x, generation in enumerate(nx.topological_generations(graph)):
        assert {layout[n][0] for n in generation} == {float(x)}
    assert all(layout[a][0] < layout[b][0] for a, b in edges)


@settings(max_examples=40, deadline=None)
@given(st.integers(min_value=2, max_value=9), st.lists(st.tuples(
    st.integers(0, 8), st.integers(0, 8)), min_size=1, max_size=25))
def test_graph_layout_on_random_dags(nodes, pairs):
    edges = sorted({(f"v{min(a, b) % nodes}", f"v{max(a, b) % nodes}") for a, b in pairs
                    if min(a, b) % nodes < max(a, b) % nodes})
    if not edges:
        return
    layout = graph_layout(edges)
    assert all(layout[a][0] < layout[b][0] for a, b in edges)
    # no two nodes share a position
    assert len(set(layout.values())) == len(layout)
    ys = np.array([y for _, y in layout.values()])
    assert np.isfinite(ys).all()
