"""The HTML report as a reader gets it: opened in headless Chromium from a file, offline.

One report is written from a small CSV whose outcome column and group labels are markup
(`<script>alert(1)</script>`, `A & B "quoted"`, `<b>bold</b>`), copied alone into an empty folder
and opened twice: once to print the DOM Chromium built, once to take a screenshot. Every request
the browser makes goes to a listener of ours and is refused (see headless.py).

Without Chromium these tests are skipped on a developer machine (`make test` installs Debian's
package when it runs as root with apt-get); under CI (environment variable CI set) a missing
browser fails them.
"""

from __future__ import annotations

import base64
import binascii
import csv
import io
import re
import shutil
from dataclasses import dataclass
from pathlib import Path
from urllib.parse import unquote_to_bytes

import pytest

from auditor.cli import main
from .headless import (
    Document,
    NetworkWatch,
    browser_required,
    find_chromium,
    parse_dom,
    run_chromium,
)

CHROMIUM = find_chromium()

pytestmark = pytest.mark.skipif(
    CHROMIUM is None and not browser_required(),
    reason="no Chromium here (/usr/bin/chromium or chromium on PATH): run `make test` as root"
           " with apt-get (after `rm .venv/.browser` if it was removed since), or"
           " `apt-get install -y --no-install-recommends chromium`",
)

SECTIONS = ("decision", "descriptives", "diagnostics", "effects", "influence", "reviewer-note",
            "methods", "caution", "data-accounting")
FIGURES = ("distributions", "qq", "ecdf", "influence", "intervals")

OUTCOME = "<script>alert(1)</script>"
GROUP_COLUMN = "arm"
GROUP_A = 'A & B "quoted"'
GROUP_B = "<b>bold</b>"
DATA_FILE = "trial <i>x & co.csv"  # a file name cannot hold the "/" of a closing tag
LABELS = (OUTCOME, GROUP_A, GROUP_B)

# Twenty values per group, fixed so the report is the same on every run.
VALUES_A = (12.1, 13.4, 11.8, 14.2, 12.9, 15.1, 13.3, 12.4, 16.0, 13.8,
            12.2, 14.7, 13.1, 11.9, 14.0, 13.6, 12.7, 15.4, 13.0, 14.4)
VALUES_B = (14.9, 15.8, 16.4, 15.2, 17.9, 16.1, 15.5, 18.3, 16.8, 15.0,
            17.2, 16.6, 15.9, 19.4, 16.3, 17.0, 15.7, 16.9, 22.5, 15.3)

PAGE_SIZE = (1240, 1754)  # width, height of the screenshot window: A4 at 150 dpi

# A URL that leaves the page: any scheme but data: (http:, https:, file:, javascript: ...), or a
# scheme-relative `//host/...`.
LEAVES_PAGE = re.compile(r"^\s*(?:(?!data:)[a-z][a-z0-9+.-]*:|[/\\]{2})", re.I)
CSS_REFERENCE = re.compile(r"""url\(\s*(['"]?)(.*?)\1\s*\)|@import\s+(['"])(.*?)\3""", re.I | re.S)
URL_ATTRIBUTES = ("src", "href", "srcset", "poster", "data", "action", "formaction", "xlink:href",
                  "background", "cite", "longdesc", "manifest", "ping")
LOADED_ATTRIBUTES = ("src", "srcset", "poster", "data", "background")  # fetched on load


@dataclass(frozen=True)
class Browsed:
    """One report, and what Chromium made of it."""

    source: str              # report.html as written
    dom: Document             # the DOM Chromium printed, parsed
    screenshot: Path
    requests: list[str]       # every request that reached the listener
    page_requests: list[str]  # those not from Chromium's own start-up traffic


def write_data(path: Path) -> None:
    """The test data as a valid CSV: fields with quotes or markup are quoted as needed."""
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, quoting=csv.QUOTE_MINIMAL, lineterminator="\n")
        writer.writerow([GROUP_COLUMN, OUTCOME])
        writer.writerows([GROUP_A, f"{v:.1f}"] for v in VALUES_A)
        writer.writerows([GROUP_B, f"{v:.1f}"] for v in VALUES_B)


@pytest.fixture(scope="module")
def chromium() -> str:
    if CHROMIUM is None:
        pytest.fail("CI needs Chromium for the browser tests and it is missing: `make test`"
                    " installs Debian's chromium as root; check its output")
    return CHROMIUM


@pytest.fixture(scope="module")
def report(tmp_path_factory) -> Path:
    """report.html written by `auditor check ... --out DIR`, copied alone into an empty folder."""
    folder = tmp_path_factory.mktemp("audit")
    data = folder / DATA_FILE
    write_data(data)
    out = folder / "out"
    code = main(["check", str(data), "--outcome", OUTCOME, "--group", GROUP_COLUMN,
                 "--boot", "200", "--out", str(out), "--quiet"])
    assert code == 0, "auditor check --out did not finish with exit code 0"
    written = out / "report.html"
    found = sorted(p.name for p in out.iterdir()) if out.is_dir() else []
    assert written.is_file(), f"auditor check --out wrote no report.html; it wrote {found}"
    # Alone in its folder, a report that leans on a file beside it (a figure, a stylesheet)
    # would show the gap.
    alone = tmp_path_factory.mktemp("alone") / "report.html"
    shutil.copyfile(written, alone)
    return alone


@pytest.fixture(scope="module")
def browsed(chromium, report, tmp_path_factory) -> Browsed:
    work = tmp_path_factory.mktemp("chromium")
    shot = work / "report.png"
    url = report.as_uri()
    with NetworkWatch() as watch:
        dumped = run_chromium(chromium, url, "--dump-dom", workdir=work, proxy_port=watch.port)
        pictured = run_chromium(chromium, url, f"--screenshot={shot}",
                                f"--window-size={PAGE_SIZE[0]},{PAGE_SIZE[1]}",
                                "--hide-scrollbars", "--force-device-scale-factor=1",
                                workdir=work, proxy_port=watch.port)
    assert dumped.returncode == 0 and "<html" in dumped.stdout.lower(), dumped.explain()
    assert pictured.returncode == 0 and shot.is_file(), pictured.explain()
    return Browsed(report.read_text(encoding="utf-8"), parse_dom(dumped.stdout), shot,
                   list(watch.requests), watch.page_requests())


def test_ci_has_a_browser():
    """Under CI the browser must be there; on a developer machine this is skipped without one."""
    assert CHROMIUM is not None, ("Chromium is missing: `make test` installs Debian's chromium"
                                  " when run as root with apt-get")


# ---------------------------------------------------------------------------------------------
# The network


def test_opening_the_report_makes_no_network_request(browsed):
    assert browsed.page_requests == [], (
        "the report made the browser reach for the network:\n  "
        + "\n  ".join(browsed.page_requests) + f"\n(all requests heard: {browsed.requests})")


def test_the_listener_catches_a_page_that_does_fetch(chromium, tmp_path):
    """Control: the same set-up notices a page with an image and a stylesheet from elsewhere."""
    page = tmp_path / "leaky.html"
    page.write_text('<!DOCTYPE html><html><head><link rel="stylesheet"'
                    ' href="https://style.leak.invalid/a.css"></head><body>'
                    '<img src="http://image.leak.invalid/x.png" alt="x"></body></html>',
                    encoding="utf-8")
    with NetworkWatch() as watch:
        run = run_chromium(chromium, page.as_uri(), "--dump-dom", workdir=tmp_path / "work",
                           proxy_port=watch.port)
    assert run.returncode == 0, run.explain()
    seen = " ".join(watch.page_requests())
    assert "image.leak.invalid" in seen and "style.leak.invalid" in seen, watch.requests


# ---------------------------------------------------------------------------------------------
# Structure


def test_sections_are_all_there_in_order(browsed):
    ids = [s.attrs.get("id", "") for s in browsed.dom.iter("section")]
    found = [i for i in ids if i in SECTIONS]
    assert found == list(SECTIONS), f"section ids in the page: {ids}"


def _data_uri_payload(src: str) -> tuple[str, bytes]:
    match = re.match(r"data:([\w.+-]+/[\w.+-]+)((?:;[^,;]*)*?),(.*)\Z", src.strip(), re.S)
    assert match, f"not a data: URI: {src[:60]!r}"
    media, params, payload = match.groups()
    if params.endswith(";base64"):
        try:
            return media, base64.b64decode(re.sub(r"\s+", "", payload), validate=True)
        except binascii.Error as exc:
            raise AssertionError(f"{media} data: URI with bad base64 ({exc})") from None
    return media, unquote_to_bytes(payload)


def test_every_figure_is_embedded_with_alt_text_and_a_caption(browsed):
    from matplotlib.image import imread

    figures = [f for f in browsed.dom.iter("figure") if "figure" in f.classes()]
    names = [f.attrs.get("id", "").removeprefix("figure-") for f in figures]
    assert set(FIGURES) <= set(names), f"figures in the page: {names}"
    for figure, name in zip(figures, names):
        assert figure.attrs.get("id") == f"figure-{name}"
        images = list(figure.iter("img"))
        assert images, f"figure-{name} has no <img>"
        for img in images:
            assert img.attrs.get("alt", "").strip(), f"figure-{name}: an <img> without alt text"
            media, payload = _data_uri_payload(img.attrs.get("src", ""))
            if media == "image/png":
                assert payload.startswith(b"\x89PNG\r\n\x1a\n"), f"figure-{name}: not a PNG"
                pixels = imread(io.BytesIO(payload), format="png")
                assert pixels.shape[0] > 50 and pixels.shape[1] > 50, f"figure-{name}: tiny"
                assert pixels[..., :3].std() > 0.02, f"figure-{name}: a blank picture"
            else:
                assert media == "image/svg+xml", f"figure-{name}: unexpected type {media}"
                assert b"<svg" in payload, f"figure-{name}: no <svg> in the SVG data"
        captions = list(figure.iter("figcaption"))
        assert captions and captions[0].text.strip(), f"figure-{name} has no caption"


def test_nothing_points_outside_the_file(browsed):
    """In the file as written and in the DOM: no URL that leaves the page; loaded ones are data:."""
    for where, doc in (("report.html", parse_dom(browsed.source)), ("the DOM", browsed.dom)):
        for element in doc.iter():
            for attribute in URL_ATTRIBUTES:
                value = element.attrs.get(attribute)
                if value is None:
                    continue
                assert not LEAVES_PAGE.match(value), (
                    f"{where}: <{element.tag} {attribute}={value[:80]!r}>")
                if attribute in LOADED_ATTRIBUTES and element.tag != "a":
                    assert value.strip().lower().startswith("data:"), (
                        f"{where}: <{element.tag} {attribute}> loads {value[:80]!r}")
            if element.tag == "link":
                assert element.attrs.get("href", "").strip().lower().startswith(("data:", "#")), (
                    f"{where}: <link> to {element.attrs.get('href')!r}")
            if element.tag == "script":
                assert "src" not in element.attrs, f"{where}: <script src=...>"
            css = element.text if element.tag == "style" else element.attrs.get("style", "")
            for match in CSS_REFERENCE.finditer(css):
                target = (match.group(2) or match.group(4) or "").strip()
                assert target.lower().startswith(("data:", "#")), (
                    f"{where}: CSS refers to {target[:80]!r}")


# ---------------------------------------------------------------------------------------------
# User text


def test_user_text_is_escaped_in_the_file(browsed):
    source = browsed.source
    for raw in (OUTCOME, GROUP_B, "<i>x", "<script>alert"):
        assert raw not in source, f"{raw!r} is written into report.html unescaped"
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in source
    assert "&lt;b&gt;bold&lt;/b&gt;" in source
    assert "A & B" not in source, "the & of a group label is not escaped"


def test_labels_read_as_text_and_never_become_markup(browsed):
    doc = browsed.dom
    for label in LABELS:
        assert label in doc.visible_text, f"{label!r} is not shown as text"
    for script in doc.iter("script"):
        assert "alert" not in script.text, "a <script> from the data is in the page"
    assert not any(b.text.strip() == "bold" for b in doc.iter("b")), "a group label became <b>"
    assert not any(i.text.startswith("x & co") for i in doc.iter("i")), "the file name became <i>"
    for element in doc.iter():
        for name, value in element.attrs.items():
            assert not (name.startswith("on") and "alert" in value), (
                f"<{element.tag} {name}={value!r}>: an event handler from the data")


def test_title_or_heading_names_the_outcome_literally(browsed):
    doc = browsed.dom
    headings = [e.text for e in doc.iter() if e.tag in {"title", "h1", "h2"}]
    assert any(OUTCOME in text for text in headings), (
        f"no title or h1/h2 shows {OUTCOME!r}; they read: {headings}")


# ---------------------------------------------------------------------------------------------
# The picture


def test_screenshot_shows_a_rendered_page(browsed):
    from matplotlib.image import imread

    data = browsed.screenshot.read_bytes()
    assert data.startswith(b"\x89PNG\r\n\x1a\n"), "the screenshot is not a PNG"
    pixels = imread(io.BytesIO(data), format="png")[..., :3]
    assert pixels.shape[:2] == (PAGE_SIZE[1], PAGE_SIZE[0])
    assert pixels.std() > 0.05, f"a flat screenshot (pixel SD {pixels.std():.4f})"
    not_white = (pixels < 0.95).any(axis=-1).mean()
    assert not_white > 0.01, f"only {not_white:.2%} of the screenshot is not white"

