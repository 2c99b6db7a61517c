"""``layerloom picture``: the canvas at fit written to PNG or SVG without a window."""
from __future__ import annotations

from pathlib import Path

from PySide6.QtGui import QColor, QImage

from layerloom.cli import main
from layerloom.gui import theme

SAMPLES = Path(__file__).resolve().parents[1] / "samples"


def colour_count(image: QImage, colour: QColor, step: int = 2) -> int:
    """Pixels (every ``step``-th in each direction) within a small distance of ``colour``."""
    n = 0
    for y in range(0, image.height(), step):
        for x in range(0, image.width(), step):
            c = image.pixelColor(x, y)
            if abs(c.red() - colour.red()) + abs(c.green() - colour.green()) + abs(c.blue() - colour.blue()) < 40:
                n += 1
    return n


def test_a_png_of_a_design_with_a_clash_shows_its_badge_at_the_size_asked(tmp_path, capsys):
    out = tmp_path / "clash.png"
    assert main(["picture", str(SAMPLES / "shelf_gap_counter_clash.loom"), "-o", str(out), "--size", "900x600"]) == 0
    image = QImage(str(out))
    assert (image.width(), image.height()) == (900, 600)
    assert colour_count(image, theme.ERROR) > 20  # the red outline and badge of the 64 ≠ 128 clash
    assert colour_count(image, theme.CARD) > 2000  # cards drawn
    assert "wrote" in capsys.readouterr().out
    clean = tmp_path / "clean.png"
    assert main(["picture", str(SAMPLES / "fastener_sorter.loom"), "-o", str(clean), "--tidy"]) == 0
    assert colour_count(QImage(str(clean)), theme.ERROR) == 0


def test_an_svg_unfolded_and_tidied_leaves_the_file_as_it_was(tmp_path):
    src = tmp_path / "leaf.loom"
    src.write_bytes((SAMPLES / "leaf_blight_grader.loom").read_bytes())
    before = src.read_bytes()
    out = tmp_path / "leaf.svg"
    assert main(["picture", str(src), "-o", str(out), "--tidy", "--unfold", "--size", "1920x1080"]) == 0
    text = out.read_text()
    assert text.lstrip().startswith("<?xml") and "<svg" in text and 'viewBox="0 0 1920 1080"' in text
    assert "leaf_photo" in text  # every card is drawn as text, not as a bitmap
    assert src.read_bytes() == before


def test_bad_options_are_one_line_messages(tmp_path, capsys):
    cases = [(["picture", str(SAMPLES / "fastener_sorter.loom"), "-o", str(tmp_path / "a.jpg")], ".png or .svg"),
             (["picture", str(SAMPLES / "fastener_sorter.loom"), "-o", str(tmp_path / "a.png"), "--size", "big"],
              "WIDTHxHEIGHT"),
             (["picture", str(SAMPLES / "fastener_sorter.loom"), "-o", str(tmp_path / "a.png"), "--size", "50x50"],
              "200 to 8000"),
             (["picture", str(tmp_path / "none.loom"), "-o", str(tmp_path / "a.png")], "none.loom")]
    for argv, words in cases:
        assert main(argv) == 2
        err = capsys.readouterr().err.strip()
        assert words in err and "\n" not in err and "Traceback" not in err
