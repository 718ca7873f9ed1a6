"""Harness for end-to-end tests in a real JupyterLab, driven by headless Chromium.

Fixtures
--------
``lab_server`` (session)
    One JupyterLab server on 127.0.0.1, a free port and a random token, serving a
    temporary folder, with Jupyter's config, data, runtime, settings and workspace
    folders isolated and the news / update checks off. Stopped by its PID at the end.
``chromium`` (session)
    Playwright's Chromium driver on the system browser (``/usr/bin/chromium`` unless
    ``SPECBENCH_CHROMIUM`` names another); never a downloaded one.
``lab`` (function)
    A :class:`LabPage`: a fresh browser context (clipboard allowed) and helpers to open a
    notebook, wait for the kernel, run all cells, wait for selectors and take
    screenshots. Each test's notebooks are copied into a folder of its own, so each test
    gets its own kernel; the kernels are shut down when the test ends.

Tests in this folder are marked ``browser``. Where Chromium, Playwright or JupyterLab is
missing they are skipped with the reason, except when the ``CI`` environment variable is
set: there a missing piece fails the run, so the end-to-end checks cannot silently vanish.

Per-phase timings of every test are printed in the terminal summary.
"""

from __future__ import annotations

import json
import os
import re
import secrets
import shutil
import signal
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from dataclasses import dataclass, field
from pathlib import Path

import pytest

HERE = Path(__file__).resolve().parent
SCREENSHOTS = HERE / "screenshots"
CHROMIUM = Path(os.environ.get("SPECBENCH_CHROMIUM", "/usr/bin/chromium"))
CHROMIUM_FLAGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]
#: Prebuilt lab extensions the widgets need; the server must load them.
REQUIRED_EXTENSIONS = ("@jupyter-widgets/jupyterlab-manager", "bqplot")

SERVER_START_TIMEOUT = 90.0  # s; about 2 s here, generous for a cold CI machine
KERNEL_TIMEOUT = 90_000  # ms; first kernel start and imports on a cold machine
DEFAULT_TIMEOUT = 30_000  # ms; any other wait
VIEWPORT = {"width": 1400, "height": 900}

_TIMINGS: list[tuple[str, dict[str, float]]] = []


def in_ci() -> bool:
    return os.environ.get("CI", "").strip().lower() not in ("", "0", "false", "no")


def unavailable(reason: str):
    """Skip the test for `reason`; under CI fail instead, so a broken setup is seen."""
    if in_ci():
        pytest.fail(f"{reason}. CI is set, so the browser tests must run.", pytrace=False)
    pytest.skip(reason)


def pytest_collection_modifyitems(config, items):
    for item in items:
        if HERE in Path(str(item.path)).parents:
            item.add_marker(pytest.mark.browser)


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item, call):
    outcome = yield
    report = outcome.get_result()
    if report.when == "call":
        item.stash[_CALL_FAILED] = report.failed


_CALL_FAILED = pytest.StashKey[bool]()


def pytest_terminal_summary(terminalreporter):
    if not _TIMINGS:
        return
    terminalreporter.section("browser test timings (s)")
    for name, phases in _TIMINGS:
        total = phases.pop("total", sum(phases.values()))
        detail = ", ".join(f"{phase} {seconds:.2f}" for phase, seconds in phases.items())
        terminalreporter.write_line(f"{total:6.2f}  {name}: {detail}")


# ----------------------------------------------------------------------- server


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def _extension_search_dirs() -> list[str]:
    """The share/jupyter folders holding the required lab extensions, as installed.

    They are looked up before the data folder is isolated: an extension installed in the
    user's data folder (``pip install --user``) would otherwise disappear.
    """
    from jupyter_core.paths import jupyter_path

    found = []
    for name in REQUIRED_EXTENSIONS:
        for folder in jupyter_path("labextensions"):
            if (Path(folder) / name / "package.json").is_file():
                parent = str(Path(folder).parent)
                if parent not in found:
                    found.append(parent)
                break
        else:
            unavailable(
                f"lab extension {name} is not installed (searched "
                f"{jupyter_path('labextensions')}); install the lab extra: "
                f'pip install -e ".[lab]"'
            )
    return found


@dataclass
class LabServer:
    url: str
    token: str
    root: Path
    process: subprocess.Popen
    log: Path

    def api(self, method: str, path: str):
        request = urllib.request.Request(
            f"{self.url}{path}",
            method=method,
            headers={"Authorization": f"token {self.token}"},
        )
        with urllib.request.urlopen(request, timeout=10) as response:
            body = response.read()
        return json.loads(body) if body else None

    def log_tail(self, lines: int = 60) -> str:
        text = self.log.read_text(encoding="utf-8", errors="replace")
        return "\n".join(text.splitlines()[-lines:])

    def shutdown_sessions(self, folder: str) -> None:
        """Shut down the kernels of notebooks under `folder` (relative to the root)."""
        for session in self.api("GET", "/api/sessions"):
            if session["path"].startswith(folder + "/"):
                self.api("DELETE", f"/api/sessions/{session['id']}")

    def stop(self) -> None:
        if self.process.poll() is None:
            try:
                for kernel in self.api("GET", "/api/kernels"):
                    self.api("DELETE", f"/api/kernels/{kernel['id']}")
            except OSError:
                pass
            os.kill(self.process.pid, signal.SIGTERM)
            try:
                self.process.wait(timeout=20)
            except subprocess.TimeoutExpired:
                os.kill(self.process.pid, signal.SIGKILL)
                self.process.wait(timeout=10)


def _isolated_env(base: Path) -> dict[str, str]:
    env = dict(os.environ)
    folders = {
        "JUPYTER_CONFIG_DIR": base / "config",
        "JUPYTER_DATA_DIR": base / "data",
        "JUPYTER_RUNTIME_DIR": base / "runtime",
        "JUPYTERLAB_SETTINGS_DIR": base / "settings",
        "JUPYTERLAB_WORKSPACES_DIR": base / "workspaces",
        "IPYTHONDIR": base / "ipython",
    }
    for name, folder in folders.items():
        folder.mkdir(parents=True)
        env[name] = str(folder)
    env["JUPYTER_PATH"] = os.pathsep.join(_extension_search_dirs())
    env.pop("JUPYTER_TOKEN", None)
    env["PYTHONUNBUFFERED"] = "1"
    # No news, no update check: no pop-up over the notebook, no request leaving the machine.
    notification = folders["JUPYTERLAB_SETTINGS_DIR"] / "@jupyterlab" / "apputils-extension"
    notification.mkdir(parents=True)
    (notification / "notification.jupyterlab-settings").write_text(
        json.dumps({"fetchNews": "false", "checkForUpdates": False}), encoding="utf-8"
    )
    return env


def _start_server(base: Path, root: Path, env: dict[str, str]) -> LabServer:
    token = secrets.token_hex(24)
    port = _free_port()
    command = [
        sys.executable,
        "-m",
        "jupyterlab",
        "--no-browser",
        "--ip=127.0.0.1",
        f"--port={port}",
        "--port-retries=0",
        f"--IdentityProvider.token={token}",
        f"--ServerApp.root_dir={root}",
        "--ServerApp.terminals_enabled=False",
        "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate",
    ]
    if hasattr(os, "geteuid") and os.geteuid() == 0:
        command.append("--allow-root")
    log = base / f"server-{port}.log"
    with log.open("wb") as out:
        process = subprocess.Popen(command, env=env, stdout=out, stderr=subprocess.STDOUT)
    server = LabServer(f"http://127.0.0.1:{port}", token, root, process, log)
    deadline = time.monotonic() + SERVER_START_TIMEOUT
    while True:
        if process.poll() is not None:
            raise RuntimeError(f"JupyterLab exited with {process.returncode}:\n{server.log_tail()}")
        try:
            server.api("GET", "/api/status")
            return server
        except (urllib.error.URLError, ConnectionError, TimeoutError):
            if time.monotonic() > deadline:
                server.stop()
                raise RuntimeError(
                    f"JupyterLab did not answer on {server.url} within "
                    f"{SERVER_START_TIMEOUT:.0f} s:\n{server.log_tail()}"
                ) from None
            time.sleep(0.1)


def _check_extensions(server: LabServer) -> None:
    """Fail early, with the reason, if the widget extensions would not load in the page."""
    request = urllib.request.Request(
        f"{server.url}/lab", headers={"Authorization": f"token {server.token}"}
    )
    with urllib.request.urlopen(request, timeout=10) as response:
        html = response.read().decode("utf-8")
    match = re.search(r'<script id="jupyter-config-data" type="application/json">(.*?)</script>',
                      html, re.DOTALL)
    assert match, "JupyterLab page has no jupyter-config-data block"
    config = json.loads(match.group(1))
    loaded = {extension["name"] for extension in config.get("federated_extensions", [])}
    missing = [name for name in REQUIRED_EXTENSIONS if name not in loaded]
    assert not missing, (
        f"JupyterLab does not load the lab extensions {missing} (loaded: {sorted(loaded)}); "
        f"check JUPYTER_PATH / the data folders of this environment."
    )


@pytest.fixture(scope="session")
def lab_server(tmp_path_factory):
    try:
        import jupyterlab  # noqa: F401
    except ImportError:
        unavailable('JupyterLab is not installed (pip install -e ".[lab]")')
    base = tmp_path_factory.mktemp("jupyterlab")
    root = base / "root"
    root.mkdir()
    env = _isolated_env(base)
    start = time.perf_counter()
    for attempt in range(3):  # the free port can be taken between probe and bind
        try:
            server = _start_server(base, root, env)
            break
        except RuntimeError as error:
            if "address already in use" not in str(error).lower() or attempt == 2:
                raise
    _TIMINGS.append(("(session) JupyterLab server start", {"total": time.perf_counter() - start}))
    try:
        _check_extensions(server)
        yield server
    finally:
        server.stop()


# ---------------------------------------------------------------------- browser


@pytest.fixture(scope="session")
def chromium():
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        unavailable('Playwright is not installed (pip install -e ".[test]")')
    if not CHROMIUM.is_file():
        unavailable(f"Chromium not found at {CHROMIUM} (apt-get install chromium)")
    start = time.perf_counter()
    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(
            executable_path=str(CHROMIUM), headless=True, args=CHROMIUM_FLAGS
        )
        _TIMINGS.append(("(session) Chromium launch", {"total": time.perf_counter() - start}))
        try:
            yield browser
        finally:
            browser.close()


@dataclass
class LabPage:
    """One browser page on the lab server, scoped to one test's folder."""

    server: LabServer
    page: object  # playwright.sync_api.Page
    folder: str  # relative to the server root
    name: str
    timings: dict[str, float] = field(default_factory=dict)
    console: list[str] = field(default_factory=list)

    # -- timing
    def timed(self, phase: str):
        return _Phase(self.timings, phase)

    # -- notebooks
    def add_notebook(self, notebook, name: str | None = None) -> str:
        """Copy `notebook` (a path or an nbformat node) into this test's folder."""
        target_dir = self.server.root / self.folder
        target_dir.mkdir(parents=True, exist_ok=True)
        if isinstance(notebook, (str, Path)):
            source = Path(notebook)
            name = name or source.name
            shutil.copyfile(source, target_dir / name)
        else:
            import nbformat

            name = name or "notebook.ipynb"
            # Without a kernelspec JupyterLab asks for a kernel in a dialog.
            notebook.metadata.setdefault(
                "kernelspec",
                {"name": "python3", "display_name": "Python 3", "language": "python"},
            )
            nbformat.write(notebook, target_dir / name)
        return f"{self.folder}/{name}"

    def open(self, notebook, name: str | None = None) -> None:
        """Copy the notebook into this test's folder, open it and wait for its kernel."""
        path = self.add_notebook(notebook, name)
        with self.timed("open"):
            self.page.goto(f"{self.server.url}/lab/tree/{path}?reset&token={self.server.token}")
            self.page.locator(".jp-Notebook").first.wait_for()
            self.wait_idle()

    def wait_idle(self, timeout: float = KERNEL_TIMEOUT) -> None:
        """Wait until the status bar reports the kernel idle ("| Idle").

        The toolbar indicator says idle while the status bar still reads "Initializing";
        a Run All issued then is dropped, so this is the reliable signal. A dialog (for
        example "Select Kernel" for a notebook without kernelspec) fails at once.
        """
        self.page.wait_for_function(
            """() => document.querySelector('.jp-Dialog') ||
                (document.querySelector('#jp-main-statusbar')?.textContent || '')
                    .includes('| Idle')""",
            timeout=timeout,
        )
        dialog = self.page.locator(".jp-Dialog")
        if dialog.count():
            raise AssertionError(f"JupyterLab shows a dialog: {dialog.first.inner_text()!r}")

    def run_all(self, timeout: float = KERNEL_TIMEOUT) -> int:
        """Run all cells from the Run menu; wait until the code cells that were there have run.

        Only the code cells present when Run All is issued are waited for: a cell inserted
        while the notebook runs (``bench.freeze()`` puts its code in a new cell below, not
        executed) is not. A cell is done when its prompt shows an execution count other
        than the one it showed before, so a second Run All waits for the new run. When a
        cell raises, JupyterLab stops running the others; that fails at once with the
        traceback rather than at the timeout. Returns the number of cells run.
        """
        with self.timed("run all"):
            count = self.page.evaluate(
                """() => {
                    const cells = [...document.querySelectorAll('.jp-Notebook .jp-CodeCell')];
                    for (const cell of cells) {
                        const prompt = cell.querySelector('.jp-InputArea-prompt');
                        cell.dataset.sbRunAll = prompt ? prompt.textContent : '';
                    }
                    return cells.length;
                }"""
            )
            if not count:
                raise AssertionError("the notebook has no code cell to run")
            self.page.locator(".lm-MenuBar-item", has_text=re.compile(r"^Run$")).click()
            self.page.locator('li[data-command="runmenu:run-all"]').click()
            outcome = self.page.wait_for_function(
                """() => {
                    const cells = [...document.querySelectorAll(
                        '.jp-Notebook .jp-CodeCell[data-sb-run-all]')];
                    let done = true;
                    for (const cell of cells) {
                        const prompt = cell.querySelector('.jp-InputArea-prompt');
                        const text = prompt ? prompt.textContent : '';
                        const ran = /\\[\\d+\\]/.test(text) && text !== cell.dataset.sbRunAll;
                        if (ran) {
                            const error = [...cell.querySelectorAll(
                                '.jp-OutputArea-output[data-mime-type="application/vnd.jupyter.stderr"]')]
                                .map(o => o.innerText).find(t => t.includes('Traceback'));
                            if (error) return {error: error};
                        }
                        done = done && ran;
                    }
                    return done ? {error: null} : false;
                }""",
                timeout=timeout,
            ).json_value()
            self.page.evaluate(
                """() => document.querySelectorAll('.jp-CodeCell[data-sb-run-all]')
                    .forEach(cell => delete cell.dataset.sbRunAll)"""
            )
            if outcome["error"]:
                raise AssertionError(f"a cell raised during Run All:\n{outcome['error']}")
            self.wait_idle(timeout)
        return count

    def stderr_outputs(self) -> list[str]:
        """Texts of every stderr output in the notebook: warnings and tracebacks.

        JupyterLab renders error outputs with the stderr MIME type too.
        """
        return self.page.locator(
            '.jp-OutputArea-output[data-mime-type="application/vnd.jupyter.stderr"]'
        ).all_inner_texts()

    def tracebacks(self) -> list[str]:
        """Texts of the error outputs (Python tracebacks) in the notebook."""
        return [text for text in self.stderr_outputs() if "Traceback" in text]

    def wait_for(self, selector: str, timeout: float = DEFAULT_TIMEOUT, state: str = "visible"):
        """Wait for an element matching `selector` to reach `state`; return its locator.

        For "visible", any matching element that becomes visible will do (the first match
        in the DOM may be an empty path of a mark that draws no area), and the first match
        is brought into view first, as a person scrolls to what they want to see: JupyterLab
        skips rendering off-screen cells (``content-visibility``) and Run All leaves the
        notebook scrolled to its last cell. On a timeout the error lists what the matching
        elements looked like.
        """
        if state != "visible":
            locator = self.page.locator(selector).first
            locator.wait_for(state=state, timeout=timeout)
            return locator
        every = self.page.locator(selector)
        every.first.wait_for(state="attached", timeout=timeout)
        every.first.evaluate("el => el.scrollIntoView({block: 'center', inline: 'nearest'})")
        locator = every.filter(visible=True).first
        try:
            locator.wait_for(state="visible", timeout=timeout)
        except Exception as exc:
            shapes = every.evaluate_all(
                """els => els.slice(0, 20).map(el => {
                    const r = el.getBoundingClientRect();
                    return `${el.tagName} ${Math.round(r.left)},${Math.round(r.top)} `
                        + `${Math.round(r.width)}x${Math.round(r.height)} `
                        + `d=${(el.getAttribute('d') || '').slice(0, 30)}`;
                })"""
            )
            raise AssertionError(f"no element matching {selector!r} became visible in {timeout / 1000:g} s; "
                                 f"{len(shapes)} matched: {shapes}") from exc
        return locator

    def screenshot(self, label: str = "", *, show: str | None = None) -> Path:
        """Save a PNG of the page under tests/browser/screenshots/ and return its path.

        JupyterLab scrolls inside the notebook panel, so a full-page capture does not reach
        below the fold: pass `show` (a selector) to scroll that element into view first.
        Cells scrolled into view are painted on a later frame (JupyterLab skips rendering
        off-screen cells), so the capture waits for two animation frames after scrolling.
        """
        if show is not None:
            self.page.locator(show).first.scroll_into_view_if_needed()
            self.page.evaluate(
                "() => new Promise(done => requestAnimationFrame(() => requestAnimationFrame(done)))"
            )
        SCREENSHOTS.mkdir(exist_ok=True)
        stem = re.sub(r"[^A-Za-z0-9_.-]+", "_", self.name + (f"-{label}" if label else ""))
        path = SCREENSHOTS / f"{stem}.png"
        self.page.screenshot(path=str(path))
        return path


class _Phase:
    def __init__(self, timings: dict[str, float], phase: str):
        self.timings, self.phase = timings, phase

    def __enter__(self):
        self.start = time.perf_counter()

    def __exit__(self, *exc_info):
        self.timings[self.phase] = (
            self.timings.get(self.phase, 0.0) + time.perf_counter() - self.start
        )


@pytest.fixture
def lab(request, chromium, lab_server):
    start = time.perf_counter()
    context = chromium.new_context(
        permissions=["clipboard-read", "clipboard-write"], viewport=VIEWPORT
    )
    context.set_default_timeout(DEFAULT_TIMEOUT)
    page = context.new_page()
    name = re.sub(r"[^A-Za-z0-9_.-]+", "_", request.node.name)
    helper = LabPage(lab_server, page, folder=f"tests/{name}", name=name)
    page.on("console", lambda message: helper.console.append(f"{message.type}: {message.text}"))
    helper.timings["setup"] = time.perf_counter() - start
    try:
        yield helper
    finally:
        if request.node.stash.get(_CALL_FAILED, False):
            try:
                helper.screenshot("failure")
            except Exception as error:  # the page may be gone; keep the real failure
                print(f"no failure screenshot: {error}")
            print("browser console:\n" + "\n".join(helper.console[-40:]))
            try:  # what each output area holds (a widget that never rendered leaves it blank)
                outputs = page.evaluate("""() => [...document.querySelectorAll('.jp-OutputArea-output')]
                    .map(o => o.getAttribute('data-mime-type') + ' ' + o.innerHTML.length + ' chars: '
                              + o.innerHTML.slice(0, 300))""")
                print("output areas:\n" + "\n".join(outputs))
            except Exception as error:
                print(f"no output areas: {error}")
            print("server log:\n" + lab_server.log_tail())
        if os.environ.get("SB_CONSOLE_LOG"):  # every console message of every test, for diagnosis
            with open(os.environ["SB_CONSOLE_LOG"], "a") as log:
                log.writelines(f"{request.node.nodeid}\t{m}\n" for m in helper.console)
        context.close()
        lab_server.shutdown_sessions(helper.folder)
        helper.timings["total"] = time.perf_counter() - start
        _TIMINGS.append((request.node.nodeid, helper.timings))
    # a mark handed NaN coordinates: the browser refuses the path and keeps the old one, so
    # what is on screen is not what was sent (e.g. a band's lower bound of 0 on a log axis)
    nan_paths = [m for m in helper.console if "Expected number" in m and "NaN" in m]
    if nan_paths and not request.node.stash.get(_CALL_FAILED, False):
        pytest.fail(f"{len(nan_paths)} path(s) with NaN coordinates were drawn: {nan_paths[:3]}")
