"""A JupyterLab server and a headless Chromium page for the browser tests.

Recipe measured in /work/shared/BROWSER_TESTING.md: Debian's chromium driven by
Playwright through ``executable_path`` (never ``playwright install``), a fresh
JupyterLab per test session on 127.0.0.1 with a fixed token and every bit of
Jupyter state in a temporary folder, readiness read from the status bar.

Skipping: without /usr/bin/chromium the tests skip locally, but when the
environment variable CI is "true" a missing browser fails the run.
"""
from __future__ import annotations

import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

CHROMIUM = os.environ.get("SUMMARIZE_WIDGETS_CHROMIUM", "/usr/bin/chromium")
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]
TOKEN = "summarize-widgets-browser-test"
REPO = Path(__file__).resolve().parents[2]
# Where screenshots are also copied for a person to look at (gitignored).
ARTIFACTS = REPO / "test-artifacts"
# Generous: the first run of a notebook imports plotly, scikit-learn and pygam.
EXPECT_TIMEOUT_MS = 90_000


def pytest_collection_modifyitems(config, items):
    here = Path(__file__).parent
    for item in items:
        if here in Path(str(item.fspath)).parents:
            item.add_marker(pytest.mark.browser)


def _require_browser():
    """Skip (locally) or fail (CI=true) when the browser or Playwright is missing."""
    in_ci = os.environ.get("CI", "").lower() == "true"
    problems = []
    if not (os.path.isfile(CHROMIUM) and os.access(CHROMIUM, os.X_OK)):
        problems.append(f"no chromium at {CHROMIUM} (apt-get install -y chromium)")
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        problems.append("the Python package playwright is not installed (pip install -e '.[test]')")
    if problems:
        msg = "browser tests cannot run: " + "; ".join(problems)
        if in_ci:
            pytest.fail(msg + " -- CI=true, so this is a failure, not a skip.", pytrace=False)
        pytest.skip(msg)


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _write_settings(settings_dir: Path) -> None:
    settings = {
        # The news pop-up covers the page; --LabApp.news_url=None does not stop it.
        "@jupyterlab/apputils-extension/notification.jupyterlab-settings": {"fetchNews": "false"},
        "@jupyterlab/docmanager-extension/plugin.jupyterlab-settings": {"autosave": False},
        # Every cell stays in the DOM, so outputs far down the notebook can be queried.
        "@jupyterlab/notebook-extension/tracker.jupyterlab-settings": {"windowingMode": "none"},
    }
    for rel, value in settings.items():
        path = settings_dir / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(json.dumps(value))


class LabServer:
    """A running JupyterLab: ``root`` is its notebook folder, ``url(name)`` opens a notebook."""

    def __init__(self, base: Path):
        self.base = base
        self.root = base / "root"
        self.root.mkdir(parents=True)
        self.port = _free_port()
        self.log_path = base / "jupyterlab.log"
        self.proc: subprocess.Popen | None = None

    def env(self) -> dict:
        env = dict(os.environ)
        dirs = {
            "JUPYTER_CONFIG_DIR": "config",
            "JUPYTER_DATA_DIR": "data",
            "JUPYTER_RUNTIME_DIR": "runtime",
            "IPYTHONDIR": "ipython",
            "JUPYTERLAB_SETTINGS_DIR": "settings",
            "JUPYTERLAB_WORKSPACES_DIR": "workspaces",
        }
        for var, sub in dirs.items():
            path = self.base / sub
            path.mkdir(exist_ok=True)
            env[var] = str(path)
        _write_settings(self.base / "settings")
        # The kernel must import this checkout, whatever the server's working folder.
        env["PYTHONPATH"] = os.pathsep.join(filter(None, [str(REPO), env.get("PYTHONPATH", "")]))
        return env

    def start(self, timeout: float = 90.0) -> None:
        cmd = [
            sys.executable, "-m", "jupyterlab",
            "--no-browser", "--allow-root",
            "--ip=127.0.0.1", f"--port={self.port}", "--port-retries=0",
            f"--IdentityProvider.token={TOKEN}",
            f"--ServerApp.root_dir={self.root}",
            "--LabApp.news_url=None",
        ]
        self._log = open(self.log_path, "wb")
        self.proc = subprocess.Popen(cmd, env=self.env(), stdout=self._log, stderr=subprocess.STDOUT, cwd=self.root)
        deadline = time.monotonic() + timeout
        status = f"http://127.0.0.1:{self.port}/api/status?token={TOKEN}"
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"JupyterLab exited with code {self.proc.returncode}:\n{self.log_tail()}")
            try:
                with urllib.request.urlopen(status, timeout=2) as resp:
                    if resp.status == 200:
                        return
            except OSError:
                time.sleep(0.5)
        raise RuntimeError(f"JupyterLab did not answer on port {self.port} within {timeout:.0f} s:\n{self.log_tail()}")

    def url(self, notebook: str) -> str:
        return f"http://127.0.0.1:{self.port}/lab/tree/{notebook}?reset&token={TOKEN}"

    def log_tail(self, n: int = 40) -> str:
        try:
            return "\n".join(self.log_path.read_text(errors="replace").splitlines()[-n:])
        except OSError:
            return "(no log)"

    def stop(self) -> None:
        # By PID only: SIGTERM lets the server shut its kernels down.
        if self.proc is not None and self.proc.poll() is None:
            self.proc.send_signal(signal.SIGTERM)
            try:
                self.proc.wait(timeout=30)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait(timeout=10)
        if getattr(self, "_log", None):
            self._log.close()


@pytest.fixture(scope="session")
def lab_server(tmp_path_factory):
    """A fresh JupyterLab for this test session (kernels outlive pages, so never reuse one)."""
    _require_browser()
    server = LabServer(tmp_path_factory.mktemp("jupyterlab"))
    server.start()
    yield server
    server.stop()


@pytest.fixture(scope="session")
def browser():
    _require_browser()
    from playwright.sync_api import expect, sync_playwright

    expect.set_options(timeout=EXPECT_TIMEOUT_MS)
    pw = sync_playwright().start()
    chromium = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS, headless=True)
    yield chromium
    chromium.close()
    pw.stop()


@pytest.fixture(scope="session")
def artifact_dir(tmp_path_factory) -> Path:
    """Screenshots go to the pytest basetemp (kept with --basetemp) and are copied to test-artifacts/."""
    return tmp_path_factory.getbasetemp() / "artifacts"


def _save_screenshot(target, artifact_dir: Path, name: str) -> Path:
    """Screenshot of a page (full page) or of one element (a Playwright locator) into ``artifact_dir``,
    copied into the repository's test-artifacts/."""
    artifact_dir.mkdir(parents=True, exist_ok=True)
    path = artifact_dir / name
    if hasattr(target, "goto"):
        target.screenshot(path=str(path), full_page=True)
    else:
        target.screenshot(path=str(path))
    ARTIFACTS.mkdir(exist_ok=True)
    shutil.copy2(path, ARTIFACTS / name)
    return path


def _open_and_run_all(page, server: LabServer, notebook: str) -> None:
    """Open ``notebook`` in JupyterLab, wait for a live kernel, then Run > Run All Cells."""
    from playwright.sync_api import expect

    page.goto(server.url(notebook))
    # The toolbar says "idle" before a kernel exists; the status bar names the kernel only once it runs.
    expect(page.locator("#jp-main-statusbar")).to_contain_text("Python 3 (ipykernel) | Idle")
    expect(page.locator(".jp-Notebook .jp-Cell").first).to_be_visible()
    page.locator(".lm-MenuBar-itemLabel", has_text="Run").first.click()
    page.locator('.lm-Menu-item[data-command="runmenu:run-all"]').click()


@pytest.fixture(scope="session")
def screenshot(artifact_dir):
    """``screenshot(page_or_locator, name)`` saves a PNG and returns its path."""
    return lambda target, name: _save_screenshot(target, artifact_dir, name)


#: Every generated notebook names its kernel: without a kernelspec JupyterLab asks which kernel to
#: start (a dialog the tests never answer) and the status bar stays at "No Kernel | Initializing".
KERNELSPEC = {"name": "python3", "display_name": "Python 3 (ipykernel)", "language": "python"}


def _write_notebook(server: LabServer, name: str, cells) -> Path:
    import nbformat

    nb = nbformat.v4.new_notebook()
    nb.cells = [nbformat.v4.new_code_cell(c) for c in cells]
    nb.metadata["kernelspec"] = dict(KERNELSPEC)
    path = server.root / name
    nbformat.write(nb, path)
    return path


@pytest.fixture(scope="session")
def write_notebook():
    """``write_notebook(server, name, cells)`` writes a notebook with a kernelspec into the server's root."""
    return _write_notebook


@pytest.fixture(scope="session")
def run_all():
    """``run_all(page, server, notebook)`` opens a notebook and runs every cell."""
    return _open_and_run_all


def _run_for_expected(browser, server: LabServer, notebook: str, viewport: dict):
    """Open ``notebook`` in a new page, run every cell and read the JSON its cells print after "EXPECTED "."""
    import json

    from playwright.sync_api import expect

    page = browser.new_page(viewport=viewport)
    _open_and_run_all(page, server, notebook)
    out = page.locator(".jp-OutputArea-output", has_text="EXPECTED ")
    expect(out).to_be_visible(timeout=240_000)
    text = out.inner_text()
    return page, json.loads(text[text.index("EXPECTED ") + len("EXPECTED "):].strip().splitlines()[0])


@pytest.fixture(scope="session")
def run_for_expected():
    """``run_for_expected(browser, server, notebook, viewport)`` -> (page, the notebook's EXPECTED values)."""
    return _run_for_expected


@pytest.fixture(scope="session")
def open_explorer(lab_server, browser, write_notebook):
    """``open_explorer(notebook, cells)`` -> (page, explorer locator, EXPECTED values): writes the
    notebook, runs it in JupyterLab and waits for the explorer to show (close the page when done)."""
    def open_(notebook, cells, viewport=None):
        from playwright.sync_api import expect

        write_notebook(lab_server, notebook, cells)
        page, expected = _run_for_expected(browser, lab_server, notebook, viewport or {"width": 1400, "height": 2200})
        explorer = page.locator(".swx-explorer")
        expect(explorer).to_be_visible()
        return page, explorer, expected
    return open_
