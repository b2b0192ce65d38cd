"""The example report reads well without seeing it whole: headings in order, alt text on every
image, nothing fetched from elsewhere, the loop and field pictures present with words for
their marks; and ``check --figures DIR`` writes the same pictures as files, only into
folders it may use."""

import re
from html.parser import HTMLParser

import pytest

from support import run_cli


class Outline(HTMLParser):
    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.headings: list[int] = []
        self.images: list[dict] = []
        self.figures: list[str] = []
        self.feed(text)

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if re.fullmatch(r"h[1-6]", tag):
            self.headings.append(int(tag[1]))
        elif tag == "img":
            self.images.append(a)
        elif tag == "figure":
            self.figures.append(a.get("class") or "")


@pytest.fixture(scope="module")
def outline(example_report):
    return Outline((example_report / "report.html").read_text(encoding="utf-8"))


def test_headings_run_in_order_without_skips(outline):
    # WCAG 2.x, technique G141 (common practice): one h1, then no level skipped going down
    h = outline.headings
    assert h[0] == 1 and h.count(1) == 1
    assert all(b <= a + 1 for a, b in zip(h, h[1:])), h
    assert {2, 3, 4} <= set(h)


def test_every_image_has_alt_text_that_says_what_it_shows(outline):
    assert outline.images
    for img in outline.images:
        assert len(img.get("alt") or "") >= 12, img.get("alt")
        assert img["src"].startswith("data:image/png;base64,")
    alts = [i["alt"] for i in outline.images]
    assert any(a.startswith("Bode plot of cart-tilt-loop") and "gain margin 10.5 dB" in a
               for a in alts)
    assert any(a.startswith("Nyquist plot of cart-tilt-loop") and "disk margin" in a
               for a in alts)
    assert any("vector field of irrigation-boom[inverted]" in a and "saddle at (3.14, 0)" in a
               for a in alts)


def test_loop_and_field_pictures_are_in_the_report(outline):
    assert outline.figures.count("eg-bode") == outline.figures.count("eg-nyquist") == 1
    assert outline.figures.count("eg-field") == 2  # both operating points of the boom


def test_figures_option_writes_the_pictures(example_report):
    figs = sorted(p.name for p in (example_report / "repo" / "figs").iterdir())
    assert figs == [
        "models-boom-irrigation_boom.yaml--irrigation-boom-hanging--field.svg",
        "models-boom-irrigation_boom.yaml--irrigation-boom-inverted--field.svg",
        "models-cart-balance.yaml--cart-tilt-loop--bode.svg",
        "models-cart-balance.yaml--cart-tilt-loop--nyquist.svg"]
    svg = (example_report / "repo" / "figs" / figs[2]).read_text(encoding="utf-8")
    assert svg.startswith("<?xml") and 'id="eg-gain-margin"' in svg


def test_figures_folder_outside_the_repository_is_not_created(example_report, tmp_path):
    repo = example_report / "repo"
    outside = tmp_path / "elsewhere" / "figs"
    out = run_cli("check", "models/cart", "--no-cache", "-q", "--figures", str(outside),
                  cwd=repo)
    assert out.returncode == 2 and "only inside the repository" in out.stderr
    assert not outside.exists()
    out = run_cli("check", "models/cart", "--figure-format", "gif", cwd=repo)
    assert out.returncode == 2 and "figure-format" in out.stderr


def test_figures_never_follow_a_link_in_their_place(example_report, tmp_path):
    repo = example_report / "repo"
    (repo / "linked").mkdir()
    target = tmp_path / "victim.png"
    target.write_bytes(b"keep")
    (repo / "linked" / "models-cart-balance.yaml--cart-tilt-loop--bode.png").symlink_to(target)
    out = run_cli("check", "models/cart", "--no-cache", "-q", "--figures", "linked", cwd=repo)
    assert out.returncode == 2 and "is a link" in out.stderr
    assert target.read_bytes() == b"keep"
