"""Fixtures of the real-browser tests: one JupyterLab server and one headless Chromium per session.

The server runs ``sys.executable -m jupyter lab`` on 127.0.0.1 (a free port, no token) in a
temporary root holding copies of the notebooks under test; its config, runtime and workspace
folders are temporary too, so nothing of the developer's own JupyterLab is read or written.
It is stopped by its PID at the end of the session, then any of its kernels still running.

Chromium is Debian's (``$COMPWIDGETS_CHROMIUM``, else ``chromium`` on the PATH, else
/usr/bin/chromium); Playwright never downloads a browser here. When Chromium or Playwright is
missing the tests skip with a message, except with ``CI=true``, where they fail: in CI the
browser tests must run.

Fixtures
--------
lab : LabServer
    The running server (``url``, ``root``, ``notebook_url(path, workspace)``, ``stop()``).
browser : playwright BrowserContext
    A persistent context on a fresh temporary profile.
open_notebook : callable
    ``open_notebook(path) -> LabNotebook``: opens a notebook of the server root in a new page.

``LabNotebook`` runs all cells (``notebook:run-all-cells``), runs code in the notebook's kernel
and reads the result back (``execute``, ``kernel_json``), waits for page conditions
(``wait_js``) and screenshots elements (``screenshot``). The quick-start fixture, which runs the
notebook once and waits for the views, is in test_workbench.py.

Screenshots go to ``test-artifacts/`` at the repository root (git-ignored).
"""

from __future__ import annotations

import json
import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from dataclasses import dataclass
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
ARTIFACTS = REPO / "test-artifacts"
QUICK_START = REPO / "example_notebooks" / "01_quick_start.ipynb"
GROUPS_NOTEBOOK = REPO / "example_notebooks" / "04_telling_groups_apart.ipynb"
XSS_NOTEBOOK = "xss_labels.ipynb"
#: A copy of the quick start for the layout test (it resizes its page).
LAYOUT_NOTEBOOK = "layout_quick_start.ipynb"

#: Chromium flags checked on these machines (see the team's browser-testing notes).
CHROMIUM_FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]

#: Seconds to wait for the server's /api/status (about 5 s on an idle machine; CPUs are shared).
SERVER_START_TIMEOUT = 120
#: Milliseconds to wait for a notebook to open with its kernel idle.
OPEN_TIMEOUT_MS = 120_000
#: Milliseconds to wait for "run all cells" to finish.
RUN_ALL_TIMEOUT_MS = 240_000

# The page is big enough for the workbench (sidebar, two ternaries and the biplot side by side).
VIEWPORT = {"width": 1900, "height": 1300}

_ANSI = re.compile(r"\x1b\[[0-9;]*[A-Za-z]")


# --------------------------------------------------------------------------- availability
def unavailable(message: str):
    """Skip with ``message`` outside CI; fail with it when ``CI=true`` (never skip in CI)."""
    if os.environ.get("CI") == "true":
        pytest.fail(f"{message} (CI=true: the browser tests must run there, not skip)", False)
    pytest.skip(message)


def chromium_path() -> str | None:
    """Chromium to drive: $COMPWIDGETS_CHROMIUM, `chromium` on the PATH or /usr/bin/chromium."""
    candidates = [os.environ.get("COMPWIDGETS_CHROMIUM"), shutil.which("chromium")]
    candidates.append("/usr/bin/chromium")
    for candidate in candidates:
        if candidate and os.path.isfile(candidate) and os.access(candidate, os.X_OK):
            return candidate
    return None


@pytest.fixture(scope="session")
def chromium_executable() -> str:
    """Path of Chromium; skips (fails in CI) when it or Playwright is missing."""
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError as err:
        unavailable(f"Playwright for Python is not installed ({err}); pip install playwright")
    path = chromium_path()
    if path is None:
        unavailable(
            "Chromium not found ($COMPWIDGETS_CHROMIUM, `chromium` on the PATH, "
            "/usr/bin/chromium); install it with `apt-get install chromium`"
        )
    return path


# ------------------------------------------------------------------------------ the server
def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _descendants(pid: int) -> list[int]:
    """PIDs of every process below ``pid`` (read from /proc; empty where there is none)."""
    children: dict[int, list[int]] = {}
    for entry in Path("/proc").glob("[0-9]*"):
        try:
            stat = (entry / "stat").read_text()
        except OSError:
            continue
        # the command name is in parentheses and may hold spaces: parse after the last ")"
        fields = stat[stat.rfind(")") + 2 :].split()
        children.setdefault(int(fields[1]), []).append(int(entry.name))
    out, todo = [], [pid]
    while todo:
        for child in children.get(todo.pop(), []):
            out.append(child)
            todo.append(child)
    return out


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    stat = Path(f"/proc/{pid}/stat")
    try:  # a zombie is dead for our purpose
        return stat.read_text().rsplit(")", 1)[1].split()[0] != "Z"
    except (OSError, IndexError):
        return True


def _stop_pids(pids: list[int], grace: float = 10.0) -> None:
    """SIGTERM each PID, then SIGKILL those still alive after ``grace`` seconds."""
    for pid in pids:
        try:
            os.kill(pid, signal.SIGTERM)
        except ProcessLookupError:
            pass
    deadline = time.monotonic() + grace
    while time.monotonic() < deadline and any(_alive(p) for p in pids):
        time.sleep(0.2)
    for pid in pids:
        if _alive(pid):
            try:
                os.kill(pid, signal.SIGKILL)
            except ProcessLookupError:
                pass


def write_user_settings(config_dir: Path) -> None:
    """JupyterLab user settings: no news / update pop-up; every cell rendered (no windowing)."""
    base = config_dir / "lab" / "user-settings" / "@jupyterlab"
    settings = {
        "apputils-extension/notification.jupyterlab-settings": {
            "fetchNews": "false",
            "checkForUpdates": False,
        },
        "notebook-extension/tracker.jupyterlab-settings": {"windowingMode": "none"},
    }
    for name, value in settings.items():
        path = base / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(json.dumps(value, indent=2))


@dataclass
class LabServer:
    """A JupyterLab server started for the test session."""

    process: subprocess.Popen
    port: int
    root: Path
    log_path: Path

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def classic_url(self, path: str) -> str:
        """URL of ``path`` in Jupyter Notebook 7 (a server started with ``app="notebook"``)."""
        return f"{self.url}/notebooks/{path}"

    def notebook_url(self, path: str, workspace: str) -> str:
        """URL opening ``path`` in its own fresh workspace (nothing restored from another page)."""
        return f"{self.url}/lab/workspaces/{workspace}/tree/{path}?reset"

    def log(self) -> str:
        try:
            return self.log_path.read_text(errors="replace")
        except OSError:
            return ""

    def stop(self) -> None:
        """Stop the server by its PID (it shuts its kernels down), then any leftover child."""
        pids = _descendants(self.process.pid) if self.process.poll() is None else []
        if self.process.poll() is None:
            self.process.send_signal(signal.SIGTERM)
            try:
                self.process.wait(timeout=20)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait(timeout=10)
        leftovers = [p for p in pids if _alive(p)]
        if leftovers:
            _stop_pids(leftovers)


def start_lab(base: Path, notebooks: dict[str, Path | str], app: str = "lab") -> LabServer:
    """Start JupyterLab in ``base/root`` with ``notebooks`` (name -> source path or JSON text).

    ``app="notebook"`` starts Jupyter Notebook 7 instead (same server options; its page
    exposes ``window.jupyterapp`` too).
    """
    root, config, runtime, workspaces = (base / d for d in ("root", "config", "runtime", "ws"))
    for d in (root, config, runtime, workspaces):
        d.mkdir(parents=True, exist_ok=True)
    for name, source in notebooks.items():
        if isinstance(source, Path):
            shutil.copyfile(source, root / name)
        else:
            (root / name).write_text(source)
    write_user_settings(config)
    env = dict(os.environ)
    env.update(
        JUPYTER_CONFIG_DIR=str(config),
        JUPYTER_RUNTIME_DIR=str(runtime),
        JUPYTERLAB_WORKSPACES_DIR=str(workspaces),
        PYTHONUNBUFFERED="1",
    )
    log_path = base / "jupyterlab.log"
    last_error = ""
    for _attempt in range(3):  # the free port may be taken between the probe and the bind
        port = free_port()
        cmd = [
            sys.executable, "-m", "jupyter", "lab", "--no-browser",  # cmd[3]: the app
            "--ServerApp.ip=127.0.0.1", f"--ServerApp.port={port}", "--ServerApp.port_retries=0",
            "--IdentityProvider.token=", "--ServerApp.password=",
            f"--ServerApp.root_dir={root}", "--ServerApp.allow_root=True",
        ]  # fmt: skip
        if app == "lab":
            cmd += [
                "--LabApp.news_url=None",
                "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate",
                "--LabApp.expose_app_in_browser=True",
            ]
        else:
            cmd[3] = "notebook"
            cmd += ["--JupyterNotebookApp.expose_app_in_browser=True"]
        with open(log_path, "ab") as log:
            process = subprocess.Popen(
                cmd, cwd=root, env=env, stdout=log, stderr=subprocess.STDOUT,
                stdin=subprocess.DEVNULL, start_new_session=True,
            )  # fmt: skip
        server = LabServer(process, port, root, log_path)
        started = time.monotonic()
        while time.monotonic() - started < SERVER_START_TIMEOUT:
            if process.poll() is not None:
                break
            try:
                with urllib.request.urlopen(f"{server.url}/api/status", timeout=2) as reply:
                    if reply.status == 200:
                        print(
                            f"\njupyter {app} up on port {port} in "
                            f"{time.monotonic() - started:.1f} s"
                        )
                        return server
            except (urllib.error.URLError, ConnectionError, TimeoutError, OSError):
                pass
            time.sleep(0.25)
        last_error = server.log()[-3000:]
        server.stop()
    raise RuntimeError(f"JupyterLab did not start; the end of its log:\n{last_error}")


#: A small invented table whose part names and group values carry markup (an XSS probe).
XSS_SOURCE = """\
import numpy as np
import pandas as pd

import compwidgets as cw

ALERT_PART = "<img src=x onerror=alert(1)>"
FLAG_PART = '<img src=x onerror="window.__xss=1">'
GROUP_VALUE = '<b onmouseover="window.__xss=2">bold</b><script>window.__xss=3</script>'
PARTS = [ALERT_PART, FLAG_PART, "SiO2", "CaO"]

rng = np.random.default_rng(11)  # invented numbers: a lognormal cloud, 60 rows
values = rng.lognormal(mean=[1.0, 0.5, 3.5, 1.5], sigma=0.4, size=(60, 4))
table = pd.DataFrame(values.round(3), columns=PARTS)
table.insert(0, "site", np.where(np.arange(60) % 3 == 0, GROUP_VALUE, "plain"))
table.insert(0, "sample", [f"X-{k:03d}" for k in range(60)])

bench = cw.explore(
    table,
    parts=PARTS,
    units=dict.fromkeys(PARTS, "wt%"),
    check_total=False,
    group="site",
    ternary_parts=[[ALERT_PART, FLAG_PART, "SiO2"], [FLAG_PART, "SiO2", "CaO"]],
)
bench
"""


#: A long invented table (the demo model, majors only): the views draw density images.
LARGE_NOTEBOOK = "large_density.ipynb"
LARGE_ROWS = 200_000
LARGE_SOURCE = f"""\
import compwidgets as cw

table = cw.demo.stream_sediments_clean({LARGE_ROWS}, seed=7)  # invented survey, all numeric
majors = [c for c in table.columns if str(c).endswith("(wt%)")]
bench = cw.explore(table, parts=majors, check_total=False)
bench
"""


def one_cell_notebook(source: str, cell_id: str) -> str:
    """A notebook (JSON text) of one code cell, for the Python 3 kernel."""
    import nbformat
    from nbformat.v4 import new_code_cell, new_notebook

    nb = new_notebook(
        cells=[new_code_cell(source)],
        metadata={
            "kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"}
        },
    )
    nb.cells[0]["id"] = cell_id
    return nbformat.writes(nb)


def xss_notebook_json() -> str:
    return one_cell_notebook(XSS_SOURCE, "xss-probe")


@pytest.fixture(scope="session")
def lab(chromium_executable, tmp_path_factory):
    """The JupyterLab server of the session (example, XSS and large notebooks in its root)."""
    server = start_lab(
        tmp_path_factory.mktemp("jupyterlab"),
        {
            QUICK_START.name: QUICK_START,
            LAYOUT_NOTEBOOK: QUICK_START,
            XSS_NOTEBOOK: xss_notebook_json(),
            GROUPS_NOTEBOOK.name: GROUPS_NOTEBOOK,
            LARGE_NOTEBOOK: one_cell_notebook(LARGE_SOURCE, "large-table"),
        },
    )
    try:
        yield server
    finally:
        server.stop()


# ----------------------------------------------------------------------------- the browser
@pytest.fixture(scope="session")
def browser(chromium_executable, tmp_path_factory):
    """A Playwright persistent context of Debian's Chromium on a fresh profile."""
    from playwright.sync_api import sync_playwright

    profile = tmp_path_factory.mktemp("chromium-profile")
    with sync_playwright() as pw:
        context = pw.chromium.launch_persistent_context(
            str(profile),
            executable_path=chromium_executable,
            headless=True,
            chromium_sandbox=False,
            args=CHROMIUM_FLAGS,
            viewport=VIEWPORT,
        )
        try:
            yield context
        finally:
            context.close()


# JavaScript: the notebook panel of a path (the page's main-area widget whose context has it).
_PANEL_JS = """
const panelOf = (path) => {
  const app = window.jupyterapp;
  if (!app) return null;
  for (const w of app.shell.widgets("main")) {
    if (w.context && w.context.path === path && w.sessionContext) return w;
  }
  return null;
};
"""


@dataclass
class KernelReply:
    """What one execution in the kernel printed and returned."""

    stdout: str
    stderr: str
    result: str | None


class KernelError(AssertionError):
    """Code run in the notebook's kernel raised."""


class LabNotebook:
    """A notebook open in a JupyterLab page, with helpers to run it and talk to its kernel."""

    def __init__(self, page, path: str):
        self.page = page
        self.path = path
        self.dialogs: list[str] = []
        page.on("dialog", self._on_dialog)

    def _on_dialog(self, dialog) -> None:
        self.dialogs.append(f"{dialog.type}: {dialog.message}")
        dialog.dismiss()

    # ---------------------------------------------------------------- JavaScript plumbing
    def js(self, body: str, arg=None):
        """Evaluate ``body`` (a JS function body with ``panel`` and ``arg`` in scope)."""
        script = (
            "async ([path, arg]) => {" + _PANEL_JS + "const panel = panelOf(path);\n" + body + "}"
        )
        return self.page.evaluate(script, [self.path, arg])

    def wait_js(self, body: str, arg=None, timeout: float = 60_000, what: str = "") -> None:
        """Wait until the JS function body (``panel``, ``arg`` in scope) returns true."""
        script = "([path, arg]) => {" + _PANEL_JS + "const panel = panelOf(path);\n" + body + "}"
        try:
            self.page.wait_for_function(script, arg=[self.path, arg], timeout=timeout, polling=100)
        except Exception as err:
            raise AssertionError(f"timed out waiting for {what or body!r}: {err}") from None

    # --------------------------------------------------------------------------- notebook
    def wait_kernel_idle(self, timeout: float = OPEN_TIMEOUT_MS) -> None:
        self.wait_js(
            """
            if (!panel) return false;
            const ctx = panel.sessionContext;
            const kernel = ctx && ctx.session && ctx.session.kernel;
            return Boolean(ctx.isReady && kernel && kernel.status === "idle"
              && kernel.connectionStatus === "connected");
            """,
            timeout=timeout,
            what=f"the kernel of {self.path} to be idle",
        )

    def run_all(self, timeout: float = RUN_ALL_TIMEOUT_MS) -> float:
        """Run every cell (``notebook:run-all-cells``); raise if a cell fails. Returns seconds."""
        self.wait_kernel_idle()
        started = time.monotonic()
        self.js(
            """
            window.__cwRunAll = {done: false, ok: null, error: ""};
            panel.content.activate();
            window.jupyterapp.shell.activateById(panel.id);
            window.jupyterapp.commands.execute("notebook:run-all-cells").then(
              (ok) => { window.__cwRunAll = {done: true, ok, error: ""}; },
              (err) => { window.__cwRunAll = {done: true, ok: false, error: String(err)}; });
            return true;
            """
        )
        # the command resolves once the run is over (after the last cell, or at the first error)
        self.wait_js(
            """
            if (!window.__cwRunAll || !window.__cwRunAll.done) return false;
            const kernel = panel.sessionContext.session.kernel;
            return kernel.status === "idle"
              && panel.content.widgets.every((c) => c.model.executionState !== "running");
            """,
            timeout=timeout,
            what=f"the cells of {self.path} to run",
        )
        state = self.js(
            """
            const errors = [], notRun = [];
            panel.content.widgets.forEach((c, i) => {
              if (c.model.type !== "code") return;
              if (c.model.sharedModel.getSource().trim() === "") return;
              if (c.model.executionCount === null) notRun.push(i);
              for (const o of c.model.outputs.toJSON()) {
                if (o.output_type === "error") {
                  const tb = (o.traceback || []).join("\\n");
                  errors.push(`cell ${i}: ${o.ename}: ${o.evalue}\\n${tb}`);
                }
              }
            });
            return {errors, notRun, run: window.__cwRunAll};
            """
        )
        if state["errors"] or state["notRun"] or state["run"]["ok"] is False:
            text = "\n\n".join(_ANSI.sub("", e) for e in state["errors"])
            raise AssertionError(
                f"running {self.path} failed ({state['run']}); cells not run: {state['notRun']}"
                f"\n{text}"
            )
        return time.monotonic() - started

    # ----------------------------------------------------------------------------- kernel
    def execute(self, code: str, timeout: float = 60.0) -> KernelReply:
        """Run ``code`` in the notebook's kernel (not in a cell); raise KernelError on error."""
        reply = self.js(
            """
            const kernel = panel.sessionContext.session.kernel;
            const out = {stdout: "", stderr: "", result: null, error: null};
            const future = kernel.requestExecute(
              {code: arg.code, silent: false, store_history: false, allow_stdin: false});
            future.onIOPub = (msg) => {
              const type = msg.header.msg_type, c = msg.content;
              if (type === "stream") {
                if (c.name === "stdout") out.stdout += c.text; else out.stderr += c.text;
              } else if (type === "execute_result") {
                out.result = c.data["text/plain"];
              } else if (type === "error") {
                out.error = `${c.ename}: ${c.evalue}\\n${(c.traceback || []).join("\\n")}`;
              }
            };
            let timer;
            const late = new Promise((resolve) => {
              timer = setTimeout(() => resolve("timeout"), arg.timeout);
            });
            const how = await Promise.race([future.done.then(() => "done"), late]);
            clearTimeout(timer);
            if (how === "timeout") out.error = `no reply from the kernel in ${arg.timeout} ms`;
            return out;
            """,
            {"code": code, "timeout": int(timeout * 1000)},
        )
        if reply["error"]:
            raise KernelError(f"kernel error for:\n{code}\n{_ANSI.sub('', reply['error'])}")
        return KernelReply(reply["stdout"], reply["stderr"], reply["result"])

    def kernel_json(self, expression: str, setup: str = "", timeout: float = 60.0):
        """Run ``setup``, then return ``expression`` evaluated in the kernel (through JSON)."""
        marker = "__cw_json__"
        code = (
            f"{setup}\nimport json as _cw_json\n"
            f"print({marker!r} + _cw_json.dumps({expression}, default=float))"
        )
        reply = self.execute(code, timeout)
        lines = [ln for ln in reply.stdout.splitlines() if ln.startswith(marker)]
        if not lines:
            raise KernelError(f"no value printed for {expression!r}; stdout: {reply.stdout!r}")
        return json.loads(lines[-1][len(marker) :])

    # ------------------------------------------------------------------------------ DOM
    def output_area(self):
        """Locator of the notebook's main area (the cells)."""
        return self.page.locator(f"#{self.js('return panel.id;')} .jp-Notebook")

    def screenshot(self, locator, name: str) -> Path:
        """Screenshot one element into test-artifacts/<name>.png.

        The picture covers the element's children and its bqplot figures, also where a figure
        overflows the element's box (a figure wider than its grid cell is shown whole), and not
        the empty space of a box stretched by its grid row.
        """
        ARTIFACTS.mkdir(parents=True, exist_ok=True)
        path = ARTIFACTS / f"{name}.png"
        locator.evaluate("(el) => el.scrollIntoView({block: 'start', inline: 'nearest'})")
        box = locator.evaluate(
            """
            (el) => {
              let [x0, y0, x1, y1] = [Infinity, Infinity, -Infinity, -Infinity];
              const parts = el.children.length ? [...el.children] : [el];
              for (const e of [...parts, ...el.querySelectorAll(".bqplot.figure")]) {
                const r = e.getBoundingClientRect();
                if (r.width === 0 || r.height === 0) continue;
                x0 = Math.min(x0, r.left); y0 = Math.min(y0, r.top);
                x1 = Math.max(x1, r.right); y1 = Math.max(y1, r.bottom);
              }
              const w = window.innerWidth, h = window.innerHeight;
              x0 = Math.max(0, x0); y0 = Math.max(0, y0);
              x1 = Math.min(w, x1); y1 = Math.min(h, y1);
              return {x: x0, y: y0, width: x1 - x0, height: y1 - y0};
            }
            """
        )
        if box["width"] >= 1 and box["height"] >= 1:
            self.page.screenshot(path=str(path), clip=box)
        else:
            locator.screenshot(path=str(path))
        return path


@pytest.fixture(scope="session")
def open_notebook(lab, browser):
    """``open_notebook(path) -> LabNotebook``: open a notebook of the server root in a new page."""
    pages = []

    def open_(path: str) -> LabNotebook:
        page = browser.new_page()
        pages.append(page)
        notebook = LabNotebook(page, path)
        started = time.monotonic()
        workspace = re.sub(r"[^A-Za-z0-9]+", "-", Path(path).stem).strip("-") or "ws"
        page.goto(lab.notebook_url(path, workspace), wait_until="domcontentloaded")
        notebook.wait_kernel_idle()
        # no dialog, pop-up or side panel over the notebook
        notebook.js(
            "window.jupyterapp.shell.collapseLeft(); window.jupyterapp.shell.collapseRight();"
        )
        print(f"\n{path}: open with an idle kernel after {time.monotonic() - started:.1f} s")
        return notebook

    yield open_
    for page in pages:
        try:
            page.close()
        except Exception:  # the context may be closed already
            pass
