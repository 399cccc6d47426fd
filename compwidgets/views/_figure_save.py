"""The "Save figure" control: a view's figure written to a file next to the notebook.

A figure is drawn by the page, so saving is a round trip. :class:`FigureSaveControl`
holds the choices (format PNG or SVG, scale 1x / 2x / 4x for a PNG, its own file-name
field) and a message line; its button (or :meth:`FigureSaveControl.save`) checks the
file name, asks its *source* for the figure's bytes and writes them when they arrive,
then says what it wrote (file, format, size in px, folder).

Reuse for another view
----------------------
A source is any object with ``request_figure(fmt, scale, reply)``
(:class:`FigureSource`): it asks the page for the figure in ``fmt`` (``"png"`` or
``"svg"``) at ``scale`` and later calls ``reply(data, "")`` with the file's bytes, or
``reply(None, reason)``. :class:`BqplotFigureSource` adapts a bqplot ``Figure``
(its ``get_png_data`` / ``get_svg_data`` round trips); the balance builder is a source
itself (:meth:`compwidgets.views.builder.BalanceBuilder.request_figure`). Place the
control under the view::

    import bqplot
    from compwidgets.views._figure_save import BqplotFigureSource, FigureSaveControl

    figure = bqplot.Figure()
    control = FigureSaveControl(BqplotFigureSource(figure), default_name="scatter")

The file name is relative to the kernel's working folder (the notebook's folder in
Jupyter). A name without an extension gets the format's; typing ``.png`` or ``.svg`` at
the end chooses that format; any other figure or table extension is refused with a
message. A file of the same name is replaced, and the message says so.
"""

from __future__ import annotations

import struct
from collections.abc import Callable
from pathlib import Path
from typing import Protocol

import ipywidgets as widgets

__all__ = [
    "FORMATS",
    "SCALES",
    "BqplotFigureSource",
    "FigureSaveControl",
    "FigureSaveError",
    "FigureSource",
    "figure_path",
    "png_size",
]

#: Formats a figure is saved in: value -> what the control shows.
FORMATS: dict[str, str] = {"png": "PNG", "svg": "SVG"}

#: Scales offered for a PNG (its size in px = the figure's size on screen x scale).
SCALES: tuple[int, ...] = (1, 2, 4)

#: Extensions that are clearly not a figure of ours: refused instead of extended.
_WRONG_EXTENSIONS = frozenset(
    {".csv", ".json", ".txt", ".xlsx", ".xls", ".pdf", ".jpg", ".jpeg", ".gif", ".tif"}
    | {".tiff", ".eps", ".ps", ".bmp", ".webp", ".html", ".ipynb", ".py"}
)

Reply = Callable[[bytes | None, str], None]


class FigureSource(Protocol):
    """What :class:`FigureSaveControl` saves: something that can ask the page for a figure."""

    def request_figure(self, fmt: str, scale: int, reply: Reply) -> None:
        """Ask for the figure in ``fmt`` at ``scale``; call ``reply(data, "")`` or
        ``reply(None, reason)`` when the answer comes (possibly later)."""


class FigureSaveError(ValueError):
    """A figure cannot be saved under this name (the message says why)."""


def figure_path(name: str, fmt: str, folder: Path | str | None = None) -> Path:
    """The file a figure in ``fmt`` is written to.

    Parameters
    ----------
    name : str
        The file name typed by the user (absolute, or relative to ``folder``).
    fmt : {"png", "svg"}
        The figure's format: a name without that extension gets it.
    folder : path, optional
        Folder of relative names (default: the current working folder).

    Raises
    ------
    FigureSaveError
        For an empty name, a name ending in the other format's extension or in a
        non-figure extension (``.csv``, ``.pdf`` ...), a missing folder, or a folder's
        name.
    """
    if fmt not in FORMATS:
        raise FigureSaveError(f"unknown figure format {fmt!r}; use one of {sorted(FORMATS)}")
    text = str(name).strip()
    if not text:
        raise FigureSaveError("no file name: type one in the file field")
    path = Path(text).expanduser()
    suffix = path.suffix.lower()
    if suffix[1:] in FORMATS:
        if suffix[1:] != fmt:
            raise FigureSaveError(
                f"{text!r} ends in {suffix} but the format is {FORMATS[fmt]}; change one of them"
            )
    elif suffix in _WRONG_EXTENSIONS:
        raise FigureSaveError(
            f"{text!r} ends in {suffix}: a figure is saved as .png or .svg (choose the "
            "format, the name follows)"
        )
    else:
        path = path.with_name(f"{path.name}.{fmt}")
    if not path.is_absolute():
        path = Path(folder if folder is not None else Path.cwd()) / path
    if path.is_dir():
        raise FigureSaveError(f"{path} is a folder; give a file name")
    if not path.parent.is_dir():
        raise FigureSaveError(f"the folder {path.parent} does not exist; create it first")
    return path


def png_size(data: bytes) -> tuple[int, int] | None:
    """(width, height) in px of PNG bytes, read from the IHDR chunk; None if not a PNG.

    The PNG signature is the 8 bytes ``89 50 4E 47 0D 0A 1A 0A`` and the first chunk is
    IHDR with the width and height as big-endian 32-bit integers (PNG specification,
    W3C / ISO 15948, section 11.2.2; from memory).
    """
    if len(data) < 24 or data[:8] != b"\x89PNG\r\n\x1a\n" or data[12:16] != b"IHDR":
        return None
    width, height = struct.unpack(">II", data[16:24])
    return int(width), int(height)


class BqplotFigureSource:
    """A bqplot ``Figure`` as a :class:`FigureSource` (bqplot draws the PNG or SVG).

    Parameters
    ----------
    figure : bqplot.Figure
        A figure shown in the page; bqplot answers only from a displayed figure.
    """

    def __init__(self, figure) -> None:
        self.figure = figure

    def request_figure(self, fmt: str, scale: int, reply: Reply) -> None:
        """Ask bqplot for the figure (``get_png_data`` at ``scale`` or ``get_svg_data``)."""

        def done(data) -> None:
            reply(bytes(data), "")

        try:
            if fmt == "png":
                self.figure.get_png_data(done, scale=scale)
            elif fmt == "svg":
                self.figure.get_svg_data(done)
            else:
                reply(None, f"unknown figure format {fmt!r}")
        except Exception as err:  # bqplot raises a plain Exception while one is under way
            reply(None, str(err))


def _dropdown(options, value, description: str, tooltip: str) -> widgets.Dropdown:
    return widgets.Dropdown(
        options=options,
        value=value,
        description=description,
        tooltip=tooltip,
        style={"description_width": "initial"},
        layout=widgets.Layout(width="auto"),
    )


class FigureSaveControl(widgets.VBox):
    """Save a view's figure: format, scale, file name, a button and a message line.

    Parameters
    ----------
    source : FigureSource
        What is saved (see the module docstring).
    default_name : str, default "figure"
        File name shown at first (without extension; the format's is added).
    folder : path, optional
        Folder of relative file names (default: the working folder at save time).

    Attributes
    ----------
    format, scale : ipywidgets.Dropdown
        ``"png"`` / ``"svg"``; 1, 2 or 4 (disabled for SVG, which has no pixel size).
    file_name : ipywidgets.Text
        Where the figure goes; its extension follows the format and the other way round.
    button : ipywidgets.Button
        "Save figure": runs :meth:`save`.
    message : ipywidgets.Label
        What happened (text only; the full text is also its tooltip).
    last_path : Path or None
        The last file written.
    """

    def __init__(
        self, source: FigureSource, default_name: str = "figure", folder=None, **kwargs
    ) -> None:
        self.source = source
        self.folder = folder
        self.last_path: Path | None = None
        self._pending: object | None = None
        self.format = _dropdown(
            [(label, value) for value, label in FORMATS.items()],
            "png",
            "Save figure as",
            "PNG: a picture in pixels; SVG: lines and text, any size",
        )
        self.scale = _dropdown(
            [(f"{k}\u00d7", k) for k in SCALES],
            2,
            "scale",
            "PNG size: the figure's size on screen times this",
        )
        self.file_name = widgets.Text(
            value=f"{default_name}.png",
            description="file",
            placeholder=f"{default_name}.png",
            tooltip="file name, next to the notebook unless a folder is given",
            style={"description_width": "initial"},
            layout=widgets.Layout(flex="1 1 12em", min_width="10em"),
        )
        self.button = widgets.Button(
            description="Save figure",
            tooltip="write the figure to the file named here",
            layout=widgets.Layout(width="auto"),
        )
        self.message = widgets.Label(value="", layout=widgets.Layout(width="auto"))
        widgets.dlink((self.format, "value"), (self.scale, "disabled"), lambda f: f == "svg")
        widgets.dlink((self.message, "value"), (self.message, "tooltip"))
        self.format.observe(self._on_format, names=["value"])
        self.file_name.observe(self._on_name, names=["value"])
        self.button.on_click(lambda _button: self.save())
        row = widgets.HBox(
            [self.format, self.scale, self.file_name, self.button],
            layout=widgets.Layout(flex_flow="row wrap", align_items="center"),
        )
        super().__init__([row, self.message], **kwargs)
        self.add_class("cw-figure-save-control")

    # ------------------------------------------------------------------ fields
    def _on_format(self, change) -> None:
        path = Path(self.file_name.value.strip())
        if path.suffix.lower()[1:] in FORMATS and path.suffix.lower()[1:] != change["new"]:
            self.file_name.value = str(path.with_suffix(f".{change['new']}"))

    def _on_name(self, change) -> None:
        suffix = Path(str(change["new"]).strip()).suffix.lower()[1:]
        if suffix in FORMATS and suffix != self.format.value:
            self.format.value = suffix

    def _say(self, text: str) -> None:
        self.message.value = text

    # -------------------------------------------------------------------- save
    def save(self) -> Path | None:
        """Ask the source for the figure; write it to the named file when it arrives.

        Returns
        -------
        Path or None
            The file the figure goes to (written when the page answers, which may be
            after this returns); None when the name is refused (``message`` says why).
        """
        fmt = self.format.value
        scale = int(self.scale.value) if fmt == "png" else 1
        try:
            path = figure_path(self.file_name.value, fmt, self.folder)
        except FigureSaveError as err:
            self._say(f"No figure saved: {err}.")
            return None
        token = object()
        self._pending = token
        what = f"{FORMATS[fmt]} at {scale}\u00d7" if fmt == "png" else FORMATS[fmt]
        self._say(f"Asking the page for the figure ({what})\u2026")

        def reply(data: bytes | None, error: str) -> None:
            if self._pending is not token:
                return  # a newer request took over
            self._pending = None
            if error or not data:
                self._say(f"No figure saved: {error or 'the page sent nothing'}.")
                return
            self._write(path, bytes(data), fmt, scale)

        self.source.request_figure(fmt, scale, reply)
        return path

    def _write(self, path: Path, data: bytes, fmt: str, scale: int) -> None:
        existed = path.exists()
        try:
            path.write_bytes(data)
        except OSError as err:
            self._say(f"No figure saved: {path} could not be written ({err.strerror or err}).")
            return
        self.last_path = path
        size = png_size(data) if fmt == "png" else None
        dims = f", {size[0]} \u00d7 {size[1]} px at {scale}\u00d7" if size else ""
        again = "; it replaced the earlier file of that name" if existed else ""
        self._say(
            f"Saved {path.name} ({FORMATS[fmt]}{dims}, {len(data) / 1024:.0f} kB) "
            f"in {path.parent}{again}."
        )
