"""Style and front-end checks that run with the test suite.

ruff (lint and format check, configured in pyproject.toml) and the JavaScript
unit tests (Node's built-in runner, ``node --test js/``, on jsdom from the repository's
package.json: ``npm ci`` installs it; ``.ci/run`` does) are part of every run.
"""

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _ruff(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "ruff", *args], cwd=ROOT, capture_output=True, text=True
    )


def test_ruff_lint_is_clean():
    result = _ruff("check", ".")
    assert result.returncode == 0, result.stdout + result.stderr


def test_ruff_format_is_clean():
    result = _ruff("format", "--check", ".")
    assert result.returncode == 0, result.stdout + result.stderr


def test_javascript_unit_tests_pass():
    node = shutil.which("node")
    if node is None:
        if os.environ.get("CI") == "true":
            pytest.fail("node is required in CI to run the JavaScript tests (node --test js/)")
        pytest.skip("node is not installed; the JavaScript tests need Node.js >= 18")
    if not (ROOT / "node_modules" / "jsdom" / "package.json").is_file():
        message = "the JavaScript tests need jsdom: run `npm ci` at the repository root"
        if os.environ.get("CI") == "true":
            pytest.fail(message)
        pytest.skip(message)
    tests = sorted(str(p.relative_to(ROOT)) for p in (ROOT / "js").glob("*.test.js"))
    assert tests, "no JavaScript test files found in js/"
    result = subprocess.run([node, "--test", *tests], cwd=ROOT, capture_output=True, text=True)
    print(result.stdout[-4000:])
    assert result.returncode == 0, result.stdout[-4000:] + result.stderr[-2000:]
    assert "# fail 0" in result.stdout
