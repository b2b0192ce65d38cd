"""The HTML report: index and sections for every model, images that decode, failing models
first and open, margins and equilibria when present, identical bytes for identical input,
and a report that stays linear in the number of models."""

import base64
import struct
from html.parser import HTMLParser
from types import SimpleNamespace

import pytest

from eigengate.reports.html import CAUTION, render_html

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


class Doc(HTMLParser):
    """What the tests read from a report: sections, index rows, links, images, text."""

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.sections: dict[str, dict] = {}  # id → attributes of the <details>
        self.rows: list[list[str]] = []
        self.links: list[str] = []
        self.images: list[dict] = []
        self.ids: list[str] = []
        self.tags: set[str] = set()
        self.text: list[str] = []
        self._in_index = False
        self._row: list[str] | None = None
        self._cell: list[str] | None = None
        self.feed(text)
        self.close()

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.add(tag)
        if "id" in a:
            self.ids.append(a["id"])
        if tag == "details" and "eg-model" in a.get("class", "").split():
            self.sections[a["id"]] = a
        elif tag == "table" and a.get("class") == "eg-index":
            self._in_index = True
        elif tag == "tr" and self._in_index:
            self._row = []
        elif tag == "td" and self._row is not None:
            self._cell = []
        elif tag == "a" and "href" in a:
            self.links.append(a["href"])
        elif tag == "img":
            self.images.append(a)

    def handle_endtag(self, tag):
        if tag == "table":
            self._in_index = False
        elif tag == "td" and self._cell is not None:
            self._row.append("".join(self._cell).strip())
            self._cell = None
        elif tag == "tr" and self._row is not None:
            if self._row:
                self.rows.append(self._row)
            self._row = None

    def handle_data(self, data):
        self.text.append(data)
        if self._cell is not None:
            self._cell.append(data)

    @property
    def all_text(self) -> str:
        return " ".join(self.text)


def decode_png(src: str) -> tuple[int, int]:
    head, data = src.split(",", 1)
    assert head == "data:image/png;base64"
    raw = base64.b64decode(data, validate=True)
    assert raw[:8] == PNG_SIGNATURE and raw[12:16] == b"IHDR"
    return struct.unpack(">II", raw[16:24])


@pytest.fixture(scope="module")
def html(shared_results):
    pytest.importorskip("matplotlib")
    return render_html(shared_results, tool_version="9.9.9")


def test_every_model_has_an_index_row_and_a_section(html, shared_results):
    doc = Doc(html)
    titles = [r.model.title for fr in shared_results for r in fr.results]
    assert len(doc.rows) == len(titles) + 1  # + the file that did not load
    assert sorted(row[2] for row in doc.rows) == sorted(titles + ["(not loaded)"])
    assert len(doc.sections) == len(doc.rows)
    index_links = [h for h in doc.links if h != "#eg-index"]
    assert sorted(h[1:] for h in index_links) == sorted(doc.sections)
    assert len(doc.ids) == len(set(doc.ids))  # anchors are unique
    for fr in shared_results:
        assert fr.source in html


def test_failing_first_and_open_passing_collapsed(html):
    doc = Doc(html)
    verdicts = [row[3] for row in doc.rows]
    assert verdicts == sorted(verdicts, key=["INVALID", "FAIL", "WARN", "PASS"].index)
    assert verdicts.count("INVALID") == 1 and verdicts.count("PASS") == 2
    for sid, attrs in doc.sections.items():
        failing = attrs["class"].split()[-1] in ("fail", "invalid")
        assert ("open" in attrs) is failing, sid


def test_index_figures(html):
    rows = {row[2]: row for row in Doc(html).rows}
    assert rows["osc"][4] == "σ = -0.2 1/s" and rows["osc"][5] == "0.1"
    assert rows["osc"][6] == "1"
    assert rows["sampled"][4].startswith("ρ = 0.89")
    assert rows["fine"][5] == "—"  # no oscillatory mode
    assert rows["(not loaded)"][1] == "models/broken.yaml"


def test_summary_caution_and_no_network_or_script(html):
    doc = Doc(html)
    text = doc.all_text
    assert "6 files, 5 models checked: 3 failing models, 1 invalid file (4 error findings), 0 warnings" in text
    assert CAUTION in text
    assert CAUTION.startswith("eigengate is an engineering aid for model regression checks.")
    assert "script" not in doc.tags and "link" not in doc.tags
    assert "http://" not in html and "https://" not in html
    assert "eigengate 9.9.9" in text


def test_images_decode_with_sensible_sizes(html):
    doc = Doc(html)
    # A pole map per model, and a phase portrait for each of the three two-state ones.
    assert len(doc.images) == 5 + 3
    for img in doc.images:
        w, h = decode_png(img["src"])
        assert (int(img["width"]), int(img["height"])) == (w, h)
        assert 300 <= w <= 500 and 240 <= h <= 400
        assert img["alt"].startswith(("Pole map of ", "Phase portrait of "))
    assert len(html) < 400_000


def test_sections_carry_findings_modes_and_states(html):
    text = Doc(html).all_text
    assert "EG103 damping-ratio" in text and "min_damping: 0.3" in text
    assert "-0.2±1.98997j" in text
    assert "angle 0.50, rate 0.50" in text
    assert "-1 ×2 (defective)" in text
    assert "plant.A must be square, got 1×2" in text
    assert "Shaded: the allowed region, Re s ≤ 0, ζ ≥ 0.3." in text
    assert "(mapped by z = e^{sT})" in text


def test_same_input_same_bytes(mpl, repo_results, html):
    assert render_html(repo_results, tool_version="9.9.9") == html


def test_baseline_poles_are_drawn_and_explained(mpl, repo_results, html):
    base = {("models/osc.yaml", "osc"): [complex(-0.4, 1.6), complex(-0.4, -1.6)]}
    with_base = render_html(repo_results, tool_version="9.9.9", baseline_poles=base)
    assert "Hollow circles: baseline poles" in with_base
    assert "Hollow circles" not in html
    imgs = [i["src"] for i in Doc(with_base).images]
    assert imgs != [i["src"] for i in Doc(html).images]


def test_max_images_and_progress(mpl, repo_results):
    seen = []
    text = render_html(repo_results, tool_version="0", max_images=1,
                       progress=lambda done, total: seen.append((done, total)))
    doc = Doc(text)
    assert seen == [(k, 6) for k in range(1, 7)]
    first = next(iter(doc.sections))  # the invalid file: no figures to draw
    assert first == "m-models-broken-yaml"
    assert len(doc.images) == 2  # osc, the first failing model: pole map + phase portrait
    assert doc.all_text.count("Figures left out") == 4


def test_missing_matplotlib(monkeypatch, repo_results):
    import sys

    from eigengate.reports.plots import ReportDependencyError

    monkeypatch.setitem(sys.modules, "matplotlib", None)
    with pytest.raises(ReportDependencyError, match=r'pip install "eigengate\[report\]"'):
        render_html(repo_results, tool_version="0")


LOOP = """\
    model_format: 1
    name: shade-motor
    plant:
      num: [1.0]
      den: [1.0, 3.0, 2.0, 0.0]
      inputs: [motor_voltage]
      outputs: [shade_position]
    feedback:
      output_gain: [[1.0]]
    requirements:
      stable: true
      min_gain_margin_db: 6
      min_phase_margin_deg: 60
    """


OSC = """\
    model_format: 1
    name: osc
    plant:
      A: [[0, 1], [-4, -0.4]]
    """


def test_margin_columns_from_margin_verdicts(mpl, make_repo):
    from eigengate.scan.engine import check_paths

    root = make_repo({"shade.yaml": LOOP, "osc.yaml": OSC})
    doc = Doc(render_html(check_paths([root / "models"], root=root), tool_version="0"))
    head = doc.all_text
    assert "gain-margin [dB]" in head and "phase-margin [deg]" in head
    rows = {row[2]: row for row in doc.rows}
    gain, phase = rows["shade-motor"][7:9]
    assert gain.startswith("15.56") and not gain.endswith("✗")
    assert phase.startswith("53.41") and phase.endswith("✗")
    assert rows["osc"][7:9] == ["—", "—"]  # no loop: no margin
    assert "Loop margins" in head and "rad/s" in head


def test_equilibria_are_listed_when_the_result_has_them(mpl, repo_results):
    r = next(r for fr in repo_results for r in fr.results if r.model.name == "saddle")
    found = SimpleNamespace(
        equilibria=[SimpleNamespace(x=(0.0, 0.0), residual=0.0,
                                    equilibrium=SimpleNamespace(type="saddle")),
                    SimpleNamespace(x=(1.5, -0.25), residual=3e-12,
                                    equilibrium=SimpleNamespace(type="stable-node"))],
        describe=lambda: "64 starts, 64 converged in the box, 0 left it, 0 did not converge")
    object.__setattr__(r, "equilibria", found)  # the nonlinear feature's field, when it lands
    text = Doc(render_html(repo_results, tool_version="0")).all_text
    assert "Equilibria" in text and "64 starts" in text
    assert "tilt = 1.5, drift = -0.25" in text and "stable-node" in text


def _results(n: int):
    """n small models through the real engine (no files: the loader is not what is timed)."""
    from eigengate.scan.engine import analyse_model, file_result
    from eigengate.model.core import from_arrays
    from eigengate.rules.requirements import MinDamping, Stability

    out = []
    for k in range(n):
        w = 1.0 + k % 7
        z = 0.05 + 0.1 * (k % 5)
        A = [[0.0, 1.0, 0.0], [-w * w, -2 * z * w, 1.0], [0.0, 0.0, -3.0 - k % 3]]
        m = from_arrays(A, name=f"axis-{k:03d}", source=f"models/group{k // 50}/axis{k:03d}.yaml",
                        states=("pos", "vel", "drive"),
                        requirements=(Stability(), MinDamping(0.2)))
        out.append(file_result(m.source, [analyse_model(m)], None))
    return out


def test_large_repository_stays_linear(mpl):
    small, large = _results(50), _results(500)

    # No clock here (timed figures belong to benchmarks/): the report's size is the measure.
    text_s = render_html(small, tool_version="0", max_images=0)
    text_l = render_html(large, tool_version="0", max_images=0)
    doc = Doc(text_l)
    assert len(doc.rows) == 500 and len(doc.sections) == 500
    assert {row[2] for row in doc.rows} == {f"axis-{k:03d}" for k in range(500)}
    # Ten times the models: about ten times the size (slack for the fixed head), not a square.
    assert 9 * len(text_s) < len(text_l) < 12 * len(text_s)
    assert len(text_l) / 500 < 8_000  # bytes per model without figures
