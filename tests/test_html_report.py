"""``extract --html`` / ``demod --html`` ([6/6] item 3): one self-contained page per run.

The page is read back with the standard library's HTML parser (:mod:`html.parser`); what counts as a
remote reference follows the URL Standard (WHATWG, "URL parsing"): a reference with a scheme
(``http:``, ``https:``, ...) or starting with ``//`` (scheme-relative) leaves the folder.
"""

from __future__ import annotations

import json
from html.parser import HTMLParser
from pathlib import Path
from urllib.parse import unquote, urlsplit

import jsonschema
import pytest

from iqsift.errors import OutputExistsError
from iqsift.jobs import extract_file
from iqsift.schemas import load_schema

SAMPLES = Path(__file__).resolve().parents[1] / "sample_captures"
CAPTURE = SAMPLES / "vhf_airband.sigmf-meta"
PLAN = """\
[defaults]
emission = "6K00A3E"

[[channel]]
name = "north ground"
freq = "124.025M"

[[channel]]
name = "yard-link"
freq = "124.175M"
"""


class PageReader(HTMLParser):
    """Every tag with its attributes, in document order."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data):
        self.text.append(data)

    def refs(self) -> list[str]:
        return [a[k] for _, a in self.tags for k in ("href", "src", "poster", "data") if a.get(k)]


def read_page(path: Path) -> PageReader:
    reader = PageReader()
    reader.feed(path.read_text(encoding="utf-8"))
    reader.close()
    return reader


def check_references(page: Path) -> PageReader:
    """No remote reference; every local one names a file that exists inside the page's folder."""
    reader = read_page(page)
    refs = reader.refs()
    assert refs
    for ref in refs:
        if ref.startswith("#"):
            ids = {a.get("id") for _, a in reader.tags}
            assert ref[1:] in ids, ref
            continue
        parts = urlsplit(ref)
        # URL Standard: a scheme or a leading "//" makes the reference leave the local folder
        assert not parts.scheme and not ref.startswith("//") and not parts.netloc, ref
        target = (page.parent / unquote(parts.path)).resolve()
        assert target.is_file(), ref
        assert page.parent.resolve() in target.parents, ref
    # no scripts, no external style sheets, no remote url(...) in the inline style
    assert not [t for t, a in reader.tags if t == "script" or (t == "link" and a.get("rel") == "stylesheet")]
    style = "".join(reader.text)
    assert "http:" not in style and "https:" not in style and "url(" not in style and "@import" not in style
    return reader


@pytest.fixture(scope="module")
def extracted(tmp_path_factory):
    folder = tmp_path_factory.mktemp("html")
    plan = folder / "plan.toml"
    plan.write_text(PLAN)
    result = extract_file(CAPTURE, plan, folder / "out", html=True, duration="3s")
    return result, folder / "out"


def test_extract_page_references_only_local_files_that_exist(extracted):
    result, out = extracted
    page = out / "report.html"
    assert result.to_dict()["outputs"]["html"] == str(page)
    jsonschema.validate(result.to_dict(), load_schema("extract-v1"))  # the schema knows outputs.html
    reader = check_references(page)
    tags = reader.tags
    html_attrs = [a for t, a in tags if t == "html"]
    assert html_attrs and html_attrs[0].get("lang") == "en"
    audio = [a["src"] for t, a in tags if t == "audio"]
    assert audio == ["north_ground.wav", "yard-link.wav"]  # one player per channel, plan order (names sanitised)
    assert all("controls" in a for t, a in tags if t == "audio")
    images = [a for t, a in tags if t == "img"]
    assert len(images) == 1 + 2  # the timeline and one overview per channel
    assert all(len((a.get("alt") or "").strip()) > 20 for a in images)
    assert sum(1 for t, a in tags if t == "th" and a.get("scope") == "col") == 8
    assert sum(1 for t, a in tags if t == "th" and a.get("scope") == "row") == 2
    links = [a["href"] for t, a in tags if t == "a"]
    assert "report.json" in links and "report_files/yard-link.overview.json" in links


def test_extract_page_table_agrees_with_report_json(extracted):
    _, out = extracted
    report = json.loads((out / "report.json").read_text())
    text = " ".join(read_page(out / "report.html").text)
    duration = report["selection"]["duration_s"]
    for ch in report["channels"]:
        level = ch["channel"]["level_dbfs"]
        assert f"{level:.1f} dBFS" in text
        active = sum(s["end_s"] - s["start_s"] for s in ch["activity"])
        assert f"{100 * active / duration:.0f} % of the time" in text
        for seg in ch["activity"]:
            assert f"{seg['start_s']:.2f}–{seg['end_s']:.2f} s" in text
    overview = json.loads((out / "report_files" / "yard-link.overview.json").read_text())
    assert [s["name"] for s in overview["stages"]][-1] == "audio"


def test_html_existing_page_refused_before_any_work(tmp_path):
    plan = tmp_path / "plan.toml"
    plan.write_text(PLAN)
    out = tmp_path / "out"
    (out / "report_files").mkdir(parents=True)
    (out / "report_files" / "activity.png").write_bytes(b"mine")
    with pytest.raises(OutputExistsError, match="activity.png"):
        extract_file(CAPTURE, plan, out, html=True, duration="0.2s")
    assert sorted(p.name for p in out.rglob("*")) == ["activity.png", "report_files"]


def test_html_failure_leaves_nothing(tmp_path, monkeypatch):
    # the page and its figures belong to the job's OutputSet: a failure while drawing leaves no file
    import iqsift.activity_plot as activity_plot

    def broken(*args, **kwargs):
        raise RuntimeError("drawing failed")

    monkeypatch.setattr(activity_plot, "plot_activity_timeline", broken)
    plan = tmp_path / "plan.toml"
    plan.write_text(PLAN)
    with pytest.raises(RuntimeError, match="drawing failed"):
        extract_file(CAPTURE, plan, tmp_path / "out", html=True, duration="0.2s")
    assert not (tmp_path / "out").exists()


def test_demod_html_cli(tmp_path, run_cli):
    status, out, err = run_cli(
        "demod", SAMPLES / "hf_segment.sigmf-meta", "--freq", "7.162M", "--emission", "2K70J3E",
        "--duration", "1.5s", "-o", tmp_path / "upper net.flac", "--report", tmp_path / "upper.json", "--html",
        "--plot-format", "svg", "--json", "--quiet")
    assert status == 0, err
    result = json.loads(out)
    jsonschema.validate(result, load_schema("demod-v1"))
    assert result["outputs"]["html"] == str(tmp_path / "report.html")
    reader = check_references(tmp_path / "report.html")
    # a space in a file name is percent-encoded in the reference (RFC 3986, section 2.1)
    assert [a["src"] for t, a in reader.tags if t == "audio"] == ["upper%20net.flac"]
    assert (tmp_path / "report_files" / "upper net.overview.svg").is_file()
    assert "upper.json" in [a["href"] for t, a in reader.tags if t == "a"]


def test_demod_html_with_report_elsewhere_names_it_without_a_link(tmp_path, run_cli):
    (tmp_path / "audio").mkdir()
    (tmp_path / "json").mkdir()
    status, out, err = run_cli(
        "demod", SAMPLES / "hf_segment.sigmf-meta", "--freq", "7.162M", "--emission", "2K70J3E", "--duration", "0.5s",
        "-o", tmp_path / "audio" / "u.wav", "--report", tmp_path / "json" / "u.json", "--html", "--quiet")
    assert status == 0, err
    reader = check_references(tmp_path / "audio" / "report.html")  # every link still inside the folder
    assert str(tmp_path / "json" / "u.json") in "".join(reader.text)


def test_timeline_svg_is_byte_reproducible(tmp_path):
    from iqsift.activity_plot import plot_activity_timeline

    rows = [("a", [(0.1, 0.9, -20.0), (1.5, 2.0, -35.0)]), ("b", []), ("c", [(0.0, 2.0, None)])]
    first = plot_activity_timeline(rows, tmp_path / "t1.svg", start_s=0, end_s=2, title="t", fmt="svg")
    second = plot_activity_timeline(rows, tmp_path / "t2.svg", start_s=0, end_s=2, title="t", fmt="svg")
    assert first.read_bytes() == second.read_bytes()


def test_page_refuses_references_outside_its_folder():
    from iqsift.html_report import PageChannel, render_report_page

    report = {"channel": {"name": "x", "frequency_hz": 1e6, "mode": "usb"}, "activity": []}
    with pytest.raises(ValueError, match="inside the report folder"):
        render_report_page(title="t", summary=[], channels=[PageChannel(report, "../x.wav", None, [])],
                           timeline=None, duration_s=1.0)
