"""A tiny bundler: the front ends' ES modules in ``js/`` -> one ES module string.

anywidget loads a widget's ``_esm`` as a single module, so relative imports
between files do not resolve in the browser. The node tests import the files
directly (they stay real ES modules); for the widget this module joins them.

Conventions the sources must follow (checked; a violation raises
:class:`BundleError` naming the file and line):

- imports are single-line and relative: ``import { a, b } from "./x.js";``
  (no aliases, no default or namespace imports, no bare specifiers);
- exports are ``export function name``, ``export const name`` (also
  ``async function`` / ``class`` / ``let``), never ``export default`` or
  ``export { ... }``;
- top-level names are unique across all bundled files (they share one scope
  once joined), and every imported name is exported by its file.

The files are emitted in dependency order (depth-first from the entry
module), with the import lines removed and the ``export`` keywords stripped,
and the bundle ends with ``export default { render };`` (or the entry's other anywidget
hooks, e.g. ``initialize``).

Where the files are: in a source checkout (editable install) in ``js/`` at the
repository root next to the package; in a built wheel in
``compwidgets/static/js`` (``pyproject.toml`` force-includes ``js/`` there).
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

__all__ = ["BundleError", "bundle", "js_dir", "read_asset"]

#: Entry module of the balance builder (it exports ``render``).
ENTRY = "widget.js"

_PACKAGE = Path(__file__).resolve().parents[1]

_IMPORT = re.compile(r'^import\s*\{([^}]*)\}\s*from\s*"(\./[A-Za-z0-9_\-]+\.js)"\s*;?\s*$')
_ANY_IMPORT = re.compile(r"^\s*import\b|^\s*export\s+\*|\bimport\s*\(")
_EXPORT = re.compile(r"^export\s+(?=(?:async\s+function|function|const|let|class)\b)")
_BAD_EXPORT = re.compile(r"^\s*export\s+(default\b|\{|\*)")
_TOP_NAME = re.compile(
    r"^(?:export\s+)?(?:async\s+function\s*\*?|function\s*\*?|const|let|var|class)\s+"
    r"([A-Za-z_$][\w$]*)"
)
_IDENT = re.compile(r"^[A-Za-z_$][\w$]*$")


class BundleError(ValueError):
    """The js sources do not follow the conventions this bundler supports."""


def js_dir(package: Path | None = None) -> Path:
    """Folder holding the builder's js files.

    Parameters
    ----------
    package : Path, optional
        The ``compwidgets`` package folder (default: this installed package).

    A source checkout (``pyproject.toml`` and ``js/`` next to the package)
    wins, so edits to ``js/`` show without a rebuild; otherwise the copy
    inside the installed package (``compwidgets/static/js``) is used.

    Raises
    ------
    FileNotFoundError
        When neither folder holds the entry module.
    """
    package = _PACKAGE if package is None else Path(package)
    repo = package.parent
    candidates = []
    if (repo / "pyproject.toml").is_file():
        candidates.append(repo / "js")
    candidates.append(package / "static" / "js")
    for folder in candidates:
        if (folder / ENTRY).is_file():
            return folder
    raise FileNotFoundError(
        f"the builder's js files ({ENTRY}) are in none of: {', '.join(map(str, candidates))}"
    )


def read_asset(name: str, folder: Path | None = None) -> str:
    """Text of a file of the js folder (e.g. the builder's CSS)."""
    return ((folder or js_dir()) / name).read_text(encoding="utf-8")


@dataclass(frozen=True)
class _Module:
    """One parsed source file."""

    imports: list[tuple[list[str], str]]  # [(names, file name)]
    body: list[str]  # lines without imports, ``export`` keywords stripped
    names: list[str]  # top-level declarations
    public: frozenset[str]  # exported names


def _parse(folder: Path, name: str) -> _Module:
    path = folder / name
    if not path.is_file():
        raise BundleError(f"{name}: imported but not found in {folder}")
    imports: list[tuple[list[str], str]] = []
    body: list[str] = []
    names: list[str] = []
    public: set[str] = set()
    for lineno, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
        where = f"{name}:{lineno}"
        m = _IMPORT.match(line)
        if m:
            items = [s.strip() for s in m.group(1).split(",") if s.strip()]
            bad = [s for s in items if not _IDENT.match(s)]
            if bad:
                raise BundleError(f"{where}: import {bad[0]!r}: aliases are not supported")
            imports.append((items, m.group(2)[2:]))
            continue
        is_comment = line.lstrip().startswith(("//", "*", "/*"))
        if not is_comment and _ANY_IMPORT.search(line):
            raise BundleError(
                f"{where}: only single-line relative imports 'import {{ a }} from \"./x.js\";' "
                f"are supported, got: {line.strip()}"
            )
        if _BAD_EXPORT.match(line):
            raise BundleError(
                f"{where}: only 'export function' / 'export const' are supported, "
                f"got: {line.strip()}"
            )
        top = _TOP_NAME.match(line)
        if top:
            names.append(top.group(1))
            if line.startswith("export "):
                public.add(top.group(1))
        body.append(_EXPORT.sub("", line))
    return _Module(imports, body, names, frozenset(public))


@lru_cache(maxsize=8)
def _bundle_cached(folder: str, entry: str, hooks: tuple[str, ...], stamp: tuple) -> str:
    root = Path(folder)
    order: list[str] = []
    parsed: dict[str, _Module] = {}
    visiting: set[str] = set()

    def visit(name: str, chain: tuple[str, ...]) -> None:
        if name in parsed:
            return
        if name in visiting:
            raise BundleError(f"import cycle: {' -> '.join((*chain, name))}")
        visiting.add(name)
        module = _parse(root, name)
        for _, dep in module.imports:
            visit(dep, (*chain, name))
        visiting.discard(name)
        parsed[name] = module
        order.append(name)

    visit(entry, ())
    owner: dict[str, str] = {}
    for name in order:
        for top in parsed[name].names:
            if top in owner:
                raise BundleError(
                    f"top-level name {top!r} is defined in both {owner[top]} and {name}; "
                    "names must be unique across the bundled files"
                )
            owner[top] = name
        for items, dep in parsed[name].imports:
            missing = [i for i in items if i not in parsed[dep].public]
            if missing:
                raise BundleError(
                    f"{name}: imports {missing} from {dep}, which does not export it"
                )
    for hook in hooks:
        if hook not in parsed[entry].public:
            raise BundleError(f"{entry} must export a function named {hook}")
    chunks = [
        "// compwidgets front end: one ES module joined by compwidgets.views._esm from "
        + ", ".join(order)
        + " (sources in js/).\n"
    ]
    for name in order:
        chunks.append(f"\n// ---- {name} ----\n")
        chunks.append("\n".join(parsed[name].body).rstrip() + "\n")
    chunks.append(f"\nexport default {{ {', '.join(hooks)} }};\n")
    return "".join(chunks)


def bundle(
    entry: str = ENTRY, folder: Path | None = None, hooks: tuple[str, ...] = ("render",)
) -> str:
    """One ES module made of ``entry`` and every module it imports.

    Parameters
    ----------
    entry : str, default "widget.js"
        File name of the entry module (in ``folder``); it must export every hook.
    folder : Path, optional
        Folder of the modules; default :func:`js_dir`.
    hooks : tuple of str, default ("render",)
        The entry's functions anywidget calls (``render``, ``initialize``): the names of
        the default export.

    Returns
    -------
    str
        The module text, ending in ``export default { <hooks> };``. Cached
        until a source file changes (by modification time and size).

    Raises
    ------
    BundleError
        When a file breaks the conventions listed in the module docstring.
    """
    root = (folder or js_dir()).resolve()
    stamp = tuple(
        (p.name, p.stat().st_mtime_ns, p.stat().st_size) for p in sorted(root.glob("*.js"))
    )
    return _bundle_cached(str(root), entry, tuple(hooks), stamp)
