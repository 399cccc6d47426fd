"""The builder's front end as anywidget loads it: one ES module joined from js/.

Node (``node --check``, and an import of the module) is the outside judge that
the bundle is a valid ES module exporting ``render``.
"""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

import pytest

from compwidgets.views import _esm

JS = Path(__file__).resolve().parents[1] / "js"


def _node() -> str:
    node = shutil.which("node")
    if node is None:
        if os.environ.get("CI"):
            pytest.fail("node is needed to check the builder's bundle (it is installed in CI)")
        pytest.skip("node is not installed")
    return node


def _write(folder: Path, files: dict[str, str]) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    for name, text in files.items():
        (folder / name).write_text(text, encoding="utf-8")
    return folder


def test_bundle_is_a_module_node_accepts(tmp_path):
    node = _node()
    path = tmp_path / "builder.mjs"
    path.write_text(_esm.bundle(folder=JS), encoding="utf-8")
    check = subprocess.run([node, "--check", str(path)], capture_output=True, text=True)
    assert check.returncode == 0, check.stderr


def _default_export(text: str, hook: str, folder: Path) -> str:
    """What node sees of a bundle's default export: "<type of hook> <its keys>"."""
    node = _node()
    path = folder / "bundle.mjs"
    path.write_text(text, encoding="utf-8")
    script = (
        f"import({str(path.as_uri())!r}).then(m => "
        f"console.log(typeof m.default.{hook} + ' ' + Object.keys(m.default).join(',')))"
    )
    run = subprocess.run([node, "-e", script], capture_output=True, text=True)
    assert run.returncode == 0, run.stderr
    return run.stdout.strip()


def test_bundle_loads_and_exports_render(tmp_path):
    assert _default_export(_esm.bundle(folder=JS), "render", tmp_path) == "function render"


def test_figure_speedups_bundle_exports_initialize_only(tmp_path):
    text = _esm.bundle("figure_speedups.js", folder=JS, hooks=("initialize",))
    assert _default_export(text, "initialize", tmp_path) == "function initialize"


def test_bundler_names_a_hook_the_entry_does_not_export(tmp_path):
    folder = _write(tmp_path / "js", {"a.js": "export function render() {}\n"})
    with pytest.raises(_esm.BundleError, match="a.js must export a function named initialize"):
        _esm.bundle("a.js", folder=folder, hooks=("initialize",))


def test_bundle_has_every_module_once_without_imports():
    text = _esm.bundle(folder=JS)
    for name in ("tree.js", "history.js", "layout.js", "labels.js", "dom.js", "widget.js"):
        assert text.count(f"// ---- {name} ----") == 1
    lines = text.splitlines()
    assert not [ln for ln in lines if ln.startswith("import ")]
    assert [ln for ln in lines if ln.startswith("export ")] == ["export default { render };"]
    assert "fakedom" not in text  # test helpers are not bundled
    # dependencies come before the modules that use them
    assert text.index("// ---- tree.js ----") < text.index("// ---- widget.js ----")
    assert text.index("// ---- dom.js ----") < text.index("// ---- dendrogram.js ----")


def test_bundle_joins_modules_in_dependency_order(tmp_path):
    folder = _write(
        tmp_path / "js",
        {
            "widget.js": 'import { twice } from "./b.js";\n'
            "export function render() { return twice(2); }\n",
            "b.js": 'import { one } from "./a.js";\nexport const twice = (x) => x * 2 * one;\n',
            "a.js": "export const one = 1;\n",
        },
    )
    text = _esm.bundle(folder=folder)
    assert text.index("const one") < text.index("const twice") < text.index("function render")
    assert text.rstrip().endswith("export default { render };")


@pytest.mark.parametrize(
    ("files", "words"),
    [
        (
            {"widget.js": 'import {\n  a } from "./a.js";\nexport function render() {}\n'},
            "single-line",
        ),
        (
            {"widget.js": 'import { a as b } from "./a.js";\nexport function render() {}\n'},
            "aliases",
        ),
        ({"widget.js": 'import x from "./a.js";\nexport function render() {}\n'}, "single-line"),
        ({"widget.js": 'import { a } from "lodash";\nexport function render() {}\n'}, "relative"),
        ({"widget.js": "export default function render() {}\n"}, "export function"),
        ({"widget.js": "function render() {}\nexport { render };\n"}, "export function"),
        (
            {
                "widget.js": 'import { a } from "./a.js";\nfunction helper() {}\n'
                "export function render() {}\n",
                "a.js": "function helper() {}\nexport const a = 1;\n",
            },
            "defined in both",
        ),
        (
            {
                "widget.js": 'import { nope } from "./a.js";\nexport function render() {}\n',
                "a.js": "export const a = 1;\n",
            },
            "does not export",
        ),
        (
            {"widget.js": 'import { a } from "./gone.js";\nexport function render() {}\n'},
            "not found",
        ),
        (
            {
                "widget.js": 'import { a } from "./a.js";\nexport function render() {}\n',
                "a.js": 'import { render } from "./widget.js";\nexport const a = 1;\n',
            },
            "cycle",
        ),
        ({"widget.js": "export function draw() {}\n"}, "render"),
    ],
)
def test_bundler_refuses_what_it_does_not_support(tmp_path, files, words):
    folder = _write(tmp_path / "js", files)
    with pytest.raises(_esm.BundleError, match=words):
        _esm.bundle(folder=folder)


def test_bundle_follows_source_edits(tmp_path):
    folder = _write(tmp_path / "js", {"widget.js": "export function render() { return 1; }\n"})
    first = _esm.bundle(folder=folder)
    (folder / "widget.js").write_text("export function render() { return 22; }\n")
    assert _esm.bundle(folder=folder) != first


def test_js_folder_of_a_checkout_and_of_a_wheel(tmp_path):
    entry = {"widget.js": "export function render() {}\n"}
    # built wheel: site-packages/compwidgets/static/js (pyproject force-includes js/ there)
    wheel_pkg = tmp_path / "site-packages" / "compwidgets"
    _write(wheel_pkg / "static" / "js", entry)
    assert _esm.js_dir(wheel_pkg) == wheel_pkg / "static" / "js"
    # source checkout: repo/pyproject.toml, repo/js next to repo/compwidgets
    repo = tmp_path / "repo"
    _write(repo, {"pyproject.toml": "[project]\nname = 'compwidgets'\n"})
    _write(repo / "js", entry)
    (repo / "compwidgets").mkdir()
    assert _esm.js_dir(repo / "compwidgets") == repo / "js"
    with pytest.raises(FileNotFoundError, match="widget.js"):
        _esm.js_dir(tmp_path / "empty" / "compwidgets")
    # this checkout
    assert _esm.js_dir() == JS


def test_pyproject_ships_js_in_the_wheel():
    text = (JS.parent / "pyproject.toml").read_text(encoding="utf-8")
    assert '"js" = "compwidgets/static/js"' in text
