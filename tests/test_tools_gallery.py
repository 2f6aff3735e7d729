"""Galleries: pictures decode, regenerate pixel for pixel, pages link only to files that exist."""

from __future__ import annotations

import re
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
from PIL import Image

import taskgen
from taskgen.tools import gallery as gallery_module
from taskgen.tools.gallery import MAX_WIDTH, gallery

GALLERY = Path(__file__).resolve().parents[1] / "gallery"


class _Links(HTMLParser):
    """Collects file links (href, src), in-page links (#...) and element ids (Python's html.parser)."""

    def __init__(self) -> None:
        super().__init__()
        self.targets: list[str] = []
        self.anchors: list[str] = []
        self.ids: list[str] = []

    def handle_starttag(self, tag, attrs):
        for key, value in attrs:
            if key in ("href", "src") and value and not value.startswith("#"):
                self.targets.append(value)
            elif key == "href" and value:
                self.anchors.append(value[1:])
            elif key == "id" and value:
                self.ids.append(value)


def _frames(path: Path) -> list[np.ndarray]:
    with Image.open(path) as image:
        out = []
        for i in range(getattr(image, "n_frames", 1)):
            image.seek(i)
            out.append(np.asarray(image.convert("RGB")))
        return out


def test_every_example_has_a_committed_gallery():
    """gallery/ holds a page for every spec in specs/ (regenerate with the README command)."""
    assert sorted(p.parent.name for p in GALLERY.glob("*/index.html")) == sorted(taskgen.bundled_specs())


@pytest.mark.parametrize("name", sorted(taskgen.bundled_specs()))
def test_pictures_decode_with_the_expected_frames(name):
    """Each GIF decodes (Pillow) with one frame per step plus the last, each at least 160 px high; each
    filmstrip is those frames in rows as wide as fit in MAX_WIDTH, below a two-line header and above a
    legend, and its first cell is the GIF's first frame (up to the GIF palette's rounding)."""
    from taskgen.tools.playback import GAP, TEXT

    for gif in sorted((GALLERY / name).glob("variant-*-episode-*.gif")):
        frames = _frames(gif)
        strip = np.asarray(Image.open(gif.with_suffix(".png")).convert("RGB"))
        w, h = frames[0].shape[1], frames[0].shape[0]
        per_row = max(1, min(len(frames), MAX_WIDTH // w))
        rows = -(-len(frames) // per_row)
        top = GAP + 2 * (TEXT + 9)                      # the header's two lines (gallery.filmstrip)
        legend = strip.shape[0] - top - h * rows
        assert strip.shape[1] == w * per_row and 0 < legend < 200 and h >= 160 and len(frames) >= 2
        cell = strip[top:top + h, :w].astype(int)
        assert np.mean(np.abs(cell - frames[0].astype(int)) > 48) < 0.01


@pytest.mark.parametrize("name", ["lantern-hall", "marsh-stones"])
def test_regenerating_a_gallery_is_pixel_identical(tmp_path, name):
    """Regenerating a committed gallery (a cue task, a field; its first variant) gives the same pixels in
    every picture."""
    gallery([str(taskgen.bundled_specs()[name])], str(tmp_path), variants=1)
    for committed in sorted((GALLERY / name).glob("variant-0-episode-*")):
        fresh = tmp_path / name / committed.name
        a, b = _frames(committed), _frames(fresh)
        assert len(a) == len(b) and all(np.array_equal(x, y) for x, y in zip(a, b)), committed.name


@pytest.mark.parametrize("page", sorted(GALLERY.glob("**/index.html")), ids=lambda p: str(p.relative_to(GALLERY)))
def test_html_links_exist_and_markdown_names_the_same_files(page):
    """Every link and image in an HTML page points at an existing file (html.parser), and the
    Markdown page beside it references the same files."""
    parser = _Links()
    parser.feed(page.read_text())
    assert parser.targets
    for target in parser.targets:
        assert (page.parent / target).is_file(), target
    assert set(parser.anchors) <= set(parser.ids)   # in-page links land
    markdown = (page.parent / "index.md").read_text()
    md_targets = [t for t in re.findall(r"\]\(([^)]+)\)", markdown) if not t.startswith("#")]
    html_files = {t.replace("index.html", "index.md") for t in parser.targets}
    assert set(md_targets) == html_files


def test_an_interrupted_run_leaves_no_page(tmp_path, monkeypatch):
    """If an episode fails half-way (the second variant's), no index page is written and no temporary
    file remains."""
    real = gallery_module.record

    def failing(spec, variant_seed, policy, episode, seed, scale=None):
        if variant_seed == 1:
            raise KeyboardInterrupt
        return real(spec, variant_seed, policy, episode, seed, scale)

    monkeypatch.setattr(gallery_module, "record", failing)
    with pytest.raises(KeyboardInterrupt):
        gallery([str(taskgen.bundled_specs()["lantern-hall"])], str(tmp_path))
    folder = tmp_path / "lantern-hall"
    assert not (folder / "index.html").exists() and not (folder / "index.md").exists()
    assert not list(tmp_path.glob("**/.*.tmp"))


@pytest.mark.parametrize("policy", ["random", "chance"])
def test_other_policies_record_episodes(policy, tmp_path):
    """The random and the chance policy play whole episodes too."""
    spec = taskgen.load_spec(taskgen.bundled_specs()["seed-cache"])
    episode = gallery_module.record(spec, 0, policy, 0, 0)
    assert len(episode.frames) == len(episode.labels) >= 2


@pytest.mark.parametrize("observation", [None, {"vector": None, "pixels": {"height": 48, "width": 40}}],
                         ids=["drawn view", "pixels"])
def test_agent_views_of_a_hidden_path_episode_show_no_path(observation):
    """In every frame of a field episode, what the agent saw (left: its vector or pixels drawn) holds no pixel
    of the path's colours while the ground truth (right) does; marks appear in the agent's view after a misstep."""
    from taskgen.render.palette import MARK, PATH, PATH_END
    from conftest import field_spec_text
    spec = taskgen.load_spec_text(field_spec_text(width=5, height=6, turns=2, start="random", mark={"steps": 4},
                                                  observation=observation, rewards={"misstep": -0.1}))
    episode = gallery_module.record(spec, 0, "explorer", 0, 3)
    from taskgen.tools.playback import GAP, TITLE
    height, agent_width, truth_width = episode.panels
    marked = 0
    for frame in episode.frames:
        pixels = np.asarray(frame)[GAP:GAP + height]
        agent = pixels[:, GAP:GAP + agent_width]
        truth = pixels[TITLE:, 2 * GAP + agent_width:2 * GAP + agent_width + truth_width]
        for colour in (PATH, PATH_END):
            assert not (agent == colour).all(axis=2).any()
        assert (truth == PATH).all(axis=2).any()
        marked += bool((agent == MARK).all(axis=2).any())
    assert marked > 0 and episode.success


def test_gallery_keeps_what_it_did_not_write(tmp_path):
    """A gallery run replaces no existing page or picture unless forced; the root index lists only the
    galleries taskgen wrote, with their names escaped in links (html.parser reads them back), and a root
    index someone else wrote is left alone unless forced."""
    from taskgen.tools.output import OutputError

    spec = str(taskgen.bundled_specs()["lantern-hall"])
    (tmp_path / "notes").mkdir()
    (tmp_path / "notes" / "index.html").write_text("<p>my own page</p>")
    (tmp_path / "index.html").write_text("<p>my own index</p>")
    with pytest.raises(OutputError, match="index.html already exists: taskgen gallery would replace it"):
        gallery([spec], str(tmp_path), episodes=1, variants=1)
    assert (tmp_path / "index.html").read_text() == "<p>my own index</p>"
    (tmp_path / "index.html").unlink()
    gallery([spec], str(tmp_path), episodes=1, variants=1)
    with pytest.raises(OutputError, match="already exist: taskgen gallery would replace them; give --force"):
        gallery([spec], str(tmp_path), episodes=1, variants=1)
    gallery([spec], str(tmp_path), episodes=1, variants=1, force=True)
    parser = _Links()
    parser.feed((tmp_path / "index.html").read_text())
    assert parser.targets == ["lantern-hall/index.html"]
    assert (tmp_path / "notes" / "index.html").read_text() == "<p>my own page</p>"
    odd = tmp_path / 'x"><script>y'
    odd.mkdir()
    (odd / "index.html").write_text(gallery_module.GENERATOR)
    gallery([spec], str(tmp_path), episodes=1, variants=1, force=True)
    page = (tmp_path / "index.html").read_text()
    assert "<script>" not in page and "x%22%3E%3Cscript%3Ey/index.html" in page


def test_a_page_has_a_section_per_variant_and_a_contents_list():
    """Each committed page (html.parser) has a viewport line, styles, a contents list linking to one
    section per variant (three or more) and to the spec, and every section names its variant."""
    for page in sorted(GALLERY.glob("*/index.html")):
        text = page.read_text()
        assert '<meta name="viewport"' in text and "<style>" in text
        sections = re.findall(r'<section id="variant-(\d+)">', text)
        assert len(sections) >= 3, page
        for v in sections:
            assert f'href="#variant-{v}"' in text
        assert 'href="#spec"' in text and '<section id="spec">' in text


def _chromium():
    import shutil
    found = (shutil.which(name) for name in ("chromium", "chromium-browser", "google-chrome", "google-chrome-stable"))
    return next((path for path in found if path), None)


@pytest.mark.skipif(_chromium() is None, reason="no Chromium or Chrome on this machine")
@pytest.mark.parametrize("width", [420, 1280])
def test_pages_load_every_image_and_fit_the_viewport_in_a_real_browser(tmp_path, width):
    """Headless Chromium renders a committed page at a phone's and a laptop's width: every image loads
    and nothing is wider than the viewport (a script in a copy of the page writes what it measured into
    the DOM, which --dump-dom prints)."""
    import shutil
    import subprocess

    folder = tmp_path / "page"
    shutil.copytree(GALLERY / "orchard-hives", folder)
    probe = ("<script>window.addEventListener('load', () => { const images = [...document.images];"
             "document.body.dataset.images = images.every(i => i.complete && i.naturalWidth > 0) ? 'ok' : 'broken';"
             "document.body.dataset.fits = document.documentElement.scrollWidth <= window.innerWidth ? 'ok' : 'wide'; });"
             "</script></body>")
    page = folder / "index.html"
    page.write_text(page.read_text().replace("</body>", probe))
    out = subprocess.run([_chromium(), "--headless", "--disable-gpu", "--no-sandbox", f"--window-size={width},900",
                          "--virtual-time-budget=10000", "--dump-dom", page.as_uri()],
                         capture_output=True, text=True, timeout=120)
    assert 'data-images="ok"' in out.stdout and 'data-fits="ok"' in out.stdout, out.stdout[-500:]
