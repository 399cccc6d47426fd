"""The built wheel carries the front end, and the builder's module loads from it."""

import subprocess
import sys
import zipfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_wheel_ships_the_builder_front_end_and_it_bundles(tmp_path):
    out = tmp_path / "dist"
    subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "-q", "--no-deps", "--no-build-isolation"]
        + ["-w", str(out), str(ROOT)],
        check=True,
        capture_output=True,
    )
    (wheel,) = out.glob("compwidgets-*.whl")
    with zipfile.ZipFile(wheel) as archive:
        names = set(archive.namelist())
        archive.extractall(tmp_path / "site")
    for module in ("widget.js", "tree.js", "layout.js", "history.js"):
        assert f"compwidgets/static/js/{module}" in names
    # import the unpacked wheel (not the checkout) in a fresh interpreter and bundle from it
    code = (
        "import compwidgets, compwidgets.views._esm as e;"
        "print(compwidgets.__file__); print(e.js_dir()); print(len(e.bundle()))"
    )
    result = subprocess.run(
        [sys.executable, "-c", code],
        cwd=tmp_path,
        env={"PYTHONPATH": str(tmp_path / "site"), "PATH": ""},
        capture_output=True,
        text=True,
        check=True,
    )
    package_file, js_dir, size = result.stdout.split()
    assert package_file.startswith(str(tmp_path / "site"))
    assert js_dir == str(tmp_path / "site" / "compwidgets" / "static" / "js")
    assert int(size) > 10_000
