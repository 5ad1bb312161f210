"""The HTML report (causalcheck/report/html.py), checked as a reader's browser shows it.

Headless Chromium (Debian's ``chromium``) renders the page offline: no console errors, every
image an inline PNG that decodes, the verdict first in the document and on the first screen.
The tests skip, saying why, only when Chromium is not installed.
"""

from __future__ import annotations

import base64
import io
import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import matplotlib.image
import pytest
from report_documents import ALL_KINDS, audit_document, document_for

from causalcheck.cli import main
from causalcheck.report.bundle import write_bundle
from causalcheck.report.figures import figures_for
from causalcheck.report.html import png_size, render_html
from causalcheck.report.markdown import render_markdown

ROOT = Path(__file__).resolve().parents[1]
WATER = ROOT / "scenarios" / "water_rebate" / "study.toml"
CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
EVIL = "<script>alert(1)</script>"

needs_chromium = pytest.mark.skipif(CHROMIUM is None, reason="headless Chromium is not "
                                    "installed (Debian: apt-get install chromium)")


def chromium(page: Path, profile: Path, *flags: str) -> subprocess.CompletedProcess:
    """Run headless Chromium offline on a local page."""
    command = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
               "--no-first-run", "--disable-background-networking",
               "--disable-component-update", "--disable-sync", f"--user-data-dir={profile}",
               "--window-size=1280,900", *flags, page.resolve().as_uri()]
    return subprocess.run(command, capture_output=True, text=True, timeout=120, check=False)


class _Images(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.images: list[dict[str, str | None]] = []
        self.scripts = 0
        self.section_ids: list[str] = []

    def handle_starttag(self, tag, attrs):
        attributes = dict(attrs)
        if tag == "img":
            self.images.append(attributes)
        elif tag == "script":
            self.scripts += 1
        elif tag == "section" and attributes.get("id"):
            self.section_ids.append(attributes["id"])


def parse(html_text: str) -> _Images:
    parser = _Images()
    parser.feed(html_text)
    return parser


def assert_inline_pngs(html_text: str, expected: int) -> None:
    found = parse(html_text)
    assert len(found.images) == expected
    for image in found.images:
        source = image.get("src") or ""
        assert source.startswith("data:image/png;base64,"), source[:40]
        data = base64.b64decode(source.split(",", 1)[1], validate=True)
        assert data and png_size(data) is not None
        pixels = matplotlib.image.imread(io.BytesIO(data), format="png")
        assert pixels.shape[0] > 0 and pixels.shape[1] > 0
        assert image.get("alt")


def assert_self_contained(html_text: str) -> None:
    lowered = html_text.lower()
    for pattern in (r"\bsrc=\"(?!data:)", r"\bhref=\"(?!#)", r"url\(", r"@import", r"<link\b"):
        assert not re.search(pattern, lowered), pattern


@pytest.fixture()
def evil_report(tmp_path) -> Path:
    document = audit_document()
    document["study"]["variables"]["income"]["label"] = EVIL
    document["study"]["title"] = "Tom & Jerry's <b>study</b>"
    return write_bundle(tmp_path / "report", document, kind="audit").folder / "report.html"


def test_user_strings_are_escaped(evil_report):
    page = evil_report.read_text(encoding="utf-8")
    assert EVIL not in page and "<b>study</b>" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    assert "Tom &amp; Jerry&#x27;s &lt;b&gt;study&lt;/b&gt;" in page
    assert parse(page).scripts == 0
    markdown = (evil_report.parent / "report.md").read_text(encoding="utf-8")
    assert EVIL not in markdown and "&lt;script>alert(1)&lt;/script>" in markdown


@pytest.mark.parametrize("kind", ALL_KINDS)
def test_report_is_self_contained_and_in_reading_order(kind):
    document = document_for(kind)
    page = render_html(document)
    assert_self_contained(page)
    found = parse(page)
    assert found.scripts == 0
    # the verdict first, then the sections in the order a reader asks
    order = ["verdict", "claim", "estimates", "decomposition", "sensitivity", "tests", "notes",
             "cautions", "methods"]
    ids = found.section_ids
    assert ids[0] == "verdict" and ids[-2:] == ["cautions", "methods"]
    assert [order.index(i) for i in ids] == sorted(order.index(i) for i in ids)
    assert_inline_pngs(page, expected=len(figures_for(document)))
    markdown = render_markdown(document)
    assert markdown.index("## Verdict") < markdown.index("## Cautions") \
        < markdown.index("## Methods and references")


def test_wording_section_escapes_the_report_sentences_and_sits_after_sensitivity():
    document = audit_document()
    document["wording"] = {
        "reviewed": True, "source": "report.md", "supported_level": 3,
        "supported_grade": "possible-cause", "format": "markdown", "lines": 4, "sentences": 3,
        "evidence": {"design": "observational", "robustness_value": 0.3},
        "claims": [{"line": 2, "sentence": f"The rebate {EVIL} cut water use.", "level": 5,
                    "grade": "causal", "prescriptive": True,
                    "verdict": "stronger than the evidence",
                    "suggestion": f"The rebate {EVIL} may have cut water use."}],
        "notes": []}
    page = render_html(document, images={})
    assert EVIL not in page and "The rebate &lt;script&gt;alert(1)&lt;/script&gt; cut" in page
    ids = parse(page).section_ids
    assert ids.index("sensitivity") < ids.index("wording") < ids.index("cautions")
    assert "<td>5 causal, advice</td><td>stronger than the evidence</td>" in page
    markdown = render_markdown(document, figures=[])
    assert EVIL not in markdown and "| 2 | The rebate &lt;script>alert(1)&lt;/script> cut" \
        in markdown


def test_methods_section_cites_in_full():
    page = render_html(audit_document(), images={})
    assert "Cinelli, C., &amp; Hazlett, C. (2020). Making sense of sensitivity: extending " \
           "omitted variable bias. Journal of the Royal Statistical Society: Series B, 82(1), " \
           "39-67." in page
    assert "Gelbach, J. B. (2016)" in page


@pytest.mark.browser
@needs_chromium
def test_chromium_renders_without_console_errors(evil_report, tmp_path):
    result = chromium(evil_report, tmp_path / "profile", "--enable-logging=stderr", "--v=0",
                      "--dump-dom")
    assert result.returncode == 0, result.stderr[-2000:]
    console = [line for line in result.stderr.splitlines()
               if ":CONSOLE" in line or "Uncaught" in line or "net::ERR" in line]
    assert console == []
    dom = result.stdout
    assert "<script" not in dom                      # the label stayed text
    assert_inline_pngs(dom, expected=4)
    assert parse(dom).section_ids[0] == "verdict"


@pytest.mark.browser
@needs_chromium
def test_verdict_is_on_the_first_screen(evil_report, tmp_path):
    # a test-only copy measures where the browser put the verdict (the report has no script)
    probe = tmp_path / "probe.html"
    probe.write_text(evil_report.read_text(encoding="utf-8").replace(
        "</body>", "<script>var r = document.getElementById('verdict').getBoundingClientRect();"
        "document.documentElement.setAttribute('data-top', Math.round(r.top));"
        "document.documentElement.setAttribute('data-width', Math.round(r.width));"
        "</script></body>"), encoding="utf-8")
    result = chromium(probe, tmp_path / "profile", "--dump-dom")
    top = int(re.search(r'data-top="(-?\d+)"', result.stdout).group(1))
    width = int(re.search(r'data-width="(\d+)"', result.stdout).group(1))
    assert 0 <= top < 450 and width > 400
    shot = tmp_path / "shot.png"
    result = chromium(evil_report, tmp_path / "profile", f"--screenshot={shot}")
    assert result.returncode == 0 and shot.exists()
    pixels = matplotlib.image.imread(shot)
    assert pixels.shape[:2] == (900, 1280)
    # not blank: text and the verdict's shaded box show on the first screen
    dark = (pixels[..., :3] < 0.4).all(axis=-1)
    assert dark.mean() > 0.01
    assert dark[top:top + 200].any()


@pytest.mark.browser
@needs_chromium
def test_water_scenario_report_through_the_cli(tmp_path, capsys):
    folder = tmp_path / "water-report"
    assert main(["audit", str(WATER), "--out", str(folder), "--quiet"]) == 0
    capsys.readouterr()
    page = folder / "report.html"
    text = page.read_text(encoding="utf-8")
    assert_self_contained(text)
    result = chromium(page, tmp_path / "profile", "--enable-logging=stderr", "--v=0",
                      "--dump-dom")
    assert [line for line in result.stderr.splitlines() if ":CONSOLE" in line] == []
    assert_inline_pngs(result.stdout, expected=4)
    assert "Measure Conservation-mindedness next" in result.stdout
