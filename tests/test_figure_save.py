"""The "Save figure" control (views/_figure_save.py), kernel side.

PNG sizes are checked against Pillow, which writes and reads PNG files independently of
this code; bqplot's own upload messages are replayed as its front end sends them.
"""

from __future__ import annotations

import io
from pathlib import Path

import bqplot
import pytest
from PIL import Image

from compwidgets.views._figure_save import (
    BqplotFigureSource,
    FigureSaveControl,
    FigureSaveError,
    figure_path,
    png_size,
)

pytestmark = pytest.mark.usefixtures("recording_comms")


def png_bytes(width: int, height: int) -> bytes:
    """A PNG written by Pillow (the outside judge of the size read back)."""
    buffer = io.BytesIO()
    Image.new("RGB", (width, height), (200, 30, 30)).save(buffer, format="PNG")
    return buffer.getvalue()


class FakeSource:
    """A figure source that answers when told to (as the page does, later)."""

    def __init__(self, data: bytes | None = None, error: str = "", answer_now: bool = True):
        self.data, self.error, self.answer_now = data, error, answer_now
        self.requests: list[tuple[str, int]] = []
        self.waiting: list = []

    def request_figure(self, fmt, scale, reply):
        self.requests.append((fmt, scale))
        if self.answer_now:
            reply(self.data, self.error)
        else:
            self.waiting.append(reply)


# ----------------------------------------------------------------------------- file names
def test_a_name_without_extension_gets_the_formats(tmp_path):
    assert figure_path("dendro", "png", tmp_path) == tmp_path / "dendro.png"
    assert figure_path("  dendro  ", "svg", tmp_path) == tmp_path / "dendro.svg"
    assert figure_path("run.v2", "png", tmp_path) == tmp_path / "run.v2.png"
    assert figure_path("Fig.PNG", "png", tmp_path) == tmp_path / "Fig.PNG"
    (tmp_path / "sub").mkdir()
    assert figure_path("sub/a.svg", "svg", tmp_path) == tmp_path / "sub" / "a.svg"
    absolute = tmp_path / "abs.png"
    assert figure_path(str(absolute), "png", "/nonexistent-folder") == absolute


@pytest.mark.parametrize(
    ("name", "fmt", "words"),
    [
        ("", "png", "no file name"),
        ("   ", "svg", "no file name"),
        ("ilr.csv", "png", r"ends in \.csv"),
        ("figure.pdf", "svg", r"ends in \.pdf"),
        ("figure.svg", "png", "the format is PNG"),
        ("missing/figure.png", "png", "does not exist"),
        ("x", "gif", "unknown figure format"),
    ],
)
def test_names_that_cannot_hold_the_figure_are_refused(tmp_path, name, fmt, words):
    with pytest.raises(FigureSaveError, match=words):
        figure_path(name, fmt, tmp_path)
    assert issubclass(FigureSaveError, ValueError)


def test_a_folder_name_is_refused(tmp_path):
    (tmp_path / "plots.png").mkdir()
    with pytest.raises(FigureSaveError, match="is a folder"):
        figure_path("plots.png", "png", tmp_path)


def test_png_size_is_read_from_the_header():
    assert png_size(png_bytes(37, 19)) == (37, 19)  # Pillow wrote it
    assert png_size(b"<svg/>") is None
    assert png_size(b"\x89PNG\r\n\x1a\n" + b"\0" * 4) is None


# ------------------------------------------------------------------------------ control
def test_saving_writes_the_bytes_and_says_what_and_where(tmp_path):
    data = png_bytes(120, 80)
    source = FakeSource(data)
    control = FigureSaveControl(source, default_name="dendro", folder=tmp_path)
    assert control.file_name.value == "dendro.png"
    assert control.format.value == "png" and control.scale.value == 2
    control.scale.value = 4
    path = control.save()
    assert path == tmp_path / "dendro.png"
    assert source.requests == [("png", 4)]
    assert path.read_bytes() == data
    assert control.last_path == path
    text = control.message.value
    assert text.startswith("Saved dendro.png (PNG, 120 \u00d7 80 px at 4\u00d7")
    assert str(tmp_path) in text
    assert control.message.tooltip == text
    # the same name again: the file is replaced, and the message says so
    control.save()
    assert "replaced the earlier file" in control.message.value


def test_format_and_extension_follow_each_other_and_svg_has_no_scale(tmp_path):
    control = FigureSaveControl(FakeSource(b"<svg/>"), default_name="d", folder=tmp_path)
    assert control.scale.disabled is False
    control.format.value = "svg"
    assert control.file_name.value == "d.svg"
    assert control.scale.disabled is True
    control.file_name.value = "other.png"
    assert control.format.value == "png"
    assert control.scale.disabled is False
    control.file_name.value = "no-extension"
    assert control.format.value == "png"
    control.format.value = "svg"
    assert control.file_name.value == "no-extension"  # no extension to swap
    source = FakeSource(b"<svg/>")
    control.source = source
    assert control.save() == tmp_path / "no-extension.svg"
    assert source.requests == [("svg", 1)]
    assert control.message.value.startswith("Saved no-extension.svg (SVG, 0 kB)")


def test_the_button_saves(tmp_path):
    source = FakeSource(b"<svg/>")
    control = FigureSaveControl(source, default_name="b", folder=tmp_path)
    control.format.value = "svg"
    control.button.click()
    assert (tmp_path / "b.svg").read_bytes() == b"<svg/>"


def test_a_refused_name_asks_nothing_and_says_why(tmp_path):
    source = FakeSource(b"x")
    control = FigureSaveControl(source, folder=tmp_path)
    control.file_name.value = "table.csv"
    assert control.save() is None
    assert source.requests == []
    assert control.message.value.startswith("No figure saved: 'table.csv' ends in .csv")


def test_the_page_answers_later_or_not_at_all(tmp_path):
    source = FakeSource(answer_now=False)
    control = FigureSaveControl(source, default_name="late", folder=tmp_path)
    path = control.save()
    assert not path.exists()
    assert control.message.value == "Asking the page for the figure (PNG at 2\u00d7)\u2026"
    # a second request takes over: the first answer is ignored when it comes
    control.file_name.value = "later.png"
    control.save()
    first, second = source.waiting
    first(png_bytes(3, 3), "")
    assert not path.exists() and not (tmp_path / "later.png").exists()
    second(png_bytes(5, 4), "")
    assert png_size((tmp_path / "later.png").read_bytes()) == (5, 4)
    # a refusal from the page is said
    control.save()
    source.waiting[-1](None, "the dendrogram is not drawn")
    assert control.message.value == "No figure saved: the dendrogram is not drawn."


def test_an_unwritable_file_is_said(tmp_path, monkeypatch):
    def refuse(self, data):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(Path, "write_bytes", refuse)
    control = FigureSaveControl(FakeSource(png_bytes(2, 2)), default_name="f", folder=tmp_path)
    control.save()
    assert control.message.value == (
        f"No figure saved: {tmp_path / 'f.png'} could not be written (Permission denied)."
    )
    assert control.last_path is None


# ------------------------------------------------------------------------------- bqplot
def test_bqplot_figures_are_a_source():
    figure = bqplot.Figure()
    source = BqplotFigureSource(figure)
    got: list = []
    refused: list = []
    source.request_figure("png", 4, lambda data, error: got.append((data, error)))
    asked = [m["content"] for m in figure.comm.sent if m.get("method") == "custom"]
    assert asked == [{"type": "upload_png", "scale": 4}]  # bqplot's own request
    # bqplot refuses a second request while one is under way: the reason is passed on
    source.request_figure("png", 1, lambda data, error: refused.append((data, error)))
    assert refused[0][0] is None and "in progress" in refused[0][1]
    data = png_bytes(8, 6)
    figure._handle_custom_msgs(None, {"event": "upload_png"}, [memoryview(data)])
    assert got == [(data, "")]
    source.request_figure("svg", 1, lambda d, e: got.append((d, e)))
    asked = [m["content"] for m in figure.comm.sent if m.get("method") == "custom"]
    assert asked[-1] == {"type": "upload_svg"}
    figure._handle_custom_msgs(None, {"event": "upload_svg"}, [memoryview(b"<svg/>")])
    assert got[-1] == (b"<svg/>", "")
