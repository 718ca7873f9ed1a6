"""The ``specbench`` command line, without a browser.

The copy behaviour is tested on notebooks of the test's own (the shipped examples are
checked separately, when they exist); JupyterLab is replaced by a recorder except in the
one test that starts the real server.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import socket
import subprocess
import sys
import time
import urllib.request
import zipfile
from pathlib import Path

import pytest

from specbench import cli

REPO = Path(__file__).resolve().parents[1]
SOURCE_EXAMPLES = REPO / "specbench" / "examples"


def _write_notebook(path: Path, text: str) -> Path:
    notebook = {
        "cells": [{"cell_type": "markdown", "metadata": {}, "source": [text]}],
        "metadata": {},
        "nbformat": 4,
        "nbformat_minor": 5,
    }
    path.write_text(json.dumps(notebook), encoding="utf-8")
    return path


@pytest.fixture
def shipped(tmp_path, monkeypatch):
    """Two 'installed' notebooks in a read-only folder, served as the package's examples."""
    folder = tmp_path / "installed"
    folder.mkdir()
    notebooks = [
        _write_notebook(folder / "quickstart.ipynb", "quick start"),
        _write_notebook(folder / "multichannel.ipynb", "many channels"),
    ]
    for path in notebooks:
        path.chmod(0o444)
    monkeypatch.setattr(cli, "example_notebooks", lambda: sorted(notebooks))
    yield {path.name: path for path in notebooks}
    for path in notebooks:
        path.chmod(0o644)


@pytest.fixture
def launches(monkeypatch):
    """Replace the JupyterLab launcher by a recorder; JupyterLab counts as installed."""
    calls = []

    def record(command, cwd, env=None):
        calls.append((list(command), Path(cwd)))
        calls_env.append(env)
        return 0

    calls_env: list = []
    monkeypatch.setattr(cli, "_last_env", calls_env, raising=False)

    monkeypatch.setattr(cli, "launch_lab", record)
    monkeypatch.setattr(cli, "missing_lab_modules", lambda: [])
    return calls


class TestCopyExamples:
    def test_copies_into_new_folder_and_leaves_originals(self, shipped, tmp_path):
        before = {name: path.read_bytes() for name, path in shipped.items()}
        target = tmp_path / "work" / "demo"

        copied, kept, unchanged = cli.copy_examples(target)

        assert sorted(copied) == ["multichannel.ipynb", "quickstart.ipynb"]
        assert kept == [] and unchanged == []
        for name, data in before.items():
            assert (target / name).read_bytes() == data
            assert shipped[name].read_bytes() == data
            # the copy of a read-only original is writable
            assert os.access(target / name, os.W_OK)

    def test_second_run_keeps_changed_copies(self, shipped, tmp_path):
        target = tmp_path / "demo"
        cli.copy_examples(target)
        edited = target / "quickstart.ipynb"
        edited.write_text("my edits", encoding="utf-8")
        (target / "multichannel.ipynb").unlink()
        (target / "notes.txt").write_text("mine", encoding="utf-8")

        copied, kept, unchanged = cli.copy_examples(target)

        assert copied == ["multichannel.ipynb"]
        assert kept == ["quickstart.ipynb"]
        assert unchanged == []
        assert edited.read_text(encoding="utf-8") == "my edits"
        assert (target / "notes.txt").read_text(encoding="utf-8") == "mine"

    def test_identical_copies_are_reported_unchanged(self, shipped, tmp_path):
        target = tmp_path / "demo"
        cli.copy_examples(target)
        assert cli.copy_examples(target) == ([], [], ["multichannel.ipynb", "quickstart.ipynb"])

    def test_missing_quickstart_is_an_error_naming_the_fix(self, monkeypatch, tmp_path):
        monkeypatch.setattr(cli, "example_notebooks", lambda: [])
        with pytest.raises(cli.CommandError, match=r"no quickstart\.ipynb.*Reinstall"):
            cli.copy_examples(tmp_path / "demo")
        assert not (tmp_path / "demo").exists()

    def test_target_that_is_a_file_is_an_error(self, shipped, tmp_path):
        target = tmp_path / "demo"
        target.write_text("not a folder", encoding="utf-8")
        with pytest.raises(cli.CommandError, match="is not a folder.*--dir"):
            cli.copy_examples(target)


class TestDemoCommand:
    def test_defaults(self, shipped, launches, tmp_path, monkeypatch, capsys):
        monkeypatch.chdir(tmp_path)
        assert cli.main(["demo"]) == 0

        (command, cwd), = launches
        target = (tmp_path / "specbench-demo").resolve()
        assert cwd == target
        assert command[:3] == [sys.executable, "-m", "jupyterlab"]
        assert "--ip=127.0.0.1" in command
        assert f"--ServerApp.root_dir={target}" in command
        assert "--LabApp.default_url=/lab/tree/quickstart.ipynb" in command
        # the port is chosen before the start (8888 or the next free one), so the printed URL is right
        ports = [int(arg.split("=")[1]) for arg in command if arg.startswith("--port=")]
        assert len(ports) == 1 and ports[0] >= 8888
        out = capsys.readouterr().out
        assert f"http://127.0.0.1:{ports[0]}/lab/tree/quickstart.ipynb?token=" in out
        assert "--no-browser" not in command
        assert (target / "quickstart.ipynb").is_file()
        assert "copied   quickstart.ipynb" in out
        assert f"Starting JupyterLab in {target}" in out

    def test_port_dir_and_no_browser_are_passed_through(self, shipped, launches, tmp_path):
        target = tmp_path / "elsewhere"
        assert cli.main(["demo", "--dir", str(target), "--port", "9123", "--no-browser"]) == 0
        (command, cwd), = launches
        assert cwd == target.resolve()
        assert "--port=9123" in command
        assert "--no-browser" in command

    @pytest.mark.parametrize("root", [True, False])
    def test_allow_root_only_as_root(self, shipped, launches, tmp_path, monkeypatch, root):
        monkeypatch.setattr(cli, "_is_root", lambda: root)
        cli.main(["demo", "--dir", str(tmp_path / "d")])
        (command, _), = launches
        assert ("--allow-root" in command) is root

    def test_launcher_exit_code_is_returned(self, shipped, tmp_path, monkeypatch):
        monkeypatch.setattr(cli, "missing_lab_modules", lambda: [])
        monkeypatch.setattr(cli, "launch_lab", lambda command, cwd, env=None: 3)
        assert cli.main(["demo", "--dir", str(tmp_path / "d")]) == 3

    def test_kept_copy_is_announced(self, shipped, launches, tmp_path, capsys):
        target = tmp_path / "d"
        cli.main(["demo", "--dir", str(target)])
        (target / "quickstart.ipynb").write_text("changed", encoding="utf-8")
        capsys.readouterr()
        cli.main(["demo", "--dir", str(target)])
        out = capsys.readouterr().out
        assert "kept     quickstart.ipynb: your copy differs" in out
        assert (target / "quickstart.ipynb").read_text(encoding="utf-8") == "changed"

    def test_missing_jupyterlab_names_the_install(self, shipped, tmp_path, monkeypatch, capsys):
        real_find_spec = cli.importlib.util.find_spec

        def find_spec(name, *args):
            return None if name == "jupyterlab" else real_find_spec(name, *args)

        monkeypatch.setattr(cli.importlib.util, "find_spec", find_spec)
        monkeypatch.setattr(cli, "launch_lab", pytest.fail)
        target = tmp_path / "d"

        assert cli.main(["demo", "--dir", str(target)]) == 2

        err = capsys.readouterr().err
        assert "not installed: jupyterlab." in err
        assert 'pip install "specbench[lab]"' in err
        assert not target.exists()

    def test_missing_examples_exit_code_1(self, monkeypatch, launches, tmp_path, capsys):
        monkeypatch.setattr(cli, "example_notebooks", lambda: [])
        assert cli.main(["demo", "--dir", str(tmp_path / "d")]) == 1
        assert "specbench demo: the installed specbench has no quickstart.ipynb" in (
            capsys.readouterr().err
        )
        assert launches == []

    @pytest.mark.parametrize("port", ["0", "65536", "eighty"])
    def test_bad_port_is_a_usage_error(self, port, capsys):
        with pytest.raises(SystemExit) as exit_info:
            cli.main(["demo", "--port", port])
        assert exit_info.value.code == 2
        assert "port must be" in capsys.readouterr().err


class TestCommandTable:
    def test_no_command_prints_help(self, capsys):
        assert cli.main([]) == 2
        assert "demo" in capsys.readouterr().err

    def test_an_entry_in_the_table_is_a_subcommand(self, monkeypatch, capsys):
        seen = []

        def add_arguments(parser):
            parser.add_argument("path")
            parser.add_argument("--segment-length", type=int, default=256)

        def run(args):
            """Estimate a file in batch (test double)."""
            seen.append((args.path, args.segment_length))
            return 0

        monkeypatch.setitem(cli.COMMANDS, "estimate", (add_arguments, run))

        assert cli.main(["estimate", "run.csv", "--segment-length", "1024"]) == 0
        assert seen == [("run.csv", 1024)]
        with pytest.raises(SystemExit):
            cli.main(["--help"])
        assert "Estimate a file in batch (test double)." in capsys.readouterr().out

    def test_command_errors_become_exit_codes(self, monkeypatch, capsys):
        def fail(args):
            """Fails."""
            raise cli.CommandError("the file run.csv does not exist; check the path")

        monkeypatch.setitem(cli.COMMANDS, "broken", (lambda parser: None, fail))
        assert cli.main(["broken"]) == 1
        assert "specbench broken: the file run.csv does not exist" in capsys.readouterr().err


# ----------------------------------------------------------------- shipped examples

needs_examples = pytest.mark.skipif(
    not (SOURCE_EXAMPLES / "quickstart.ipynb").is_file(),
    reason="specbench/examples/quickstart.ipynb is not written yet",
)


@needs_examples
def test_installed_package_ships_the_source_examples():
    found = {path.name for path in cli.example_notebooks()}
    assert found == {path.name for path in SOURCE_EXAMPLES.glob("*.ipynb")}


@needs_examples
def test_wheel_contains_the_examples(tmp_path):
    # Build from a copy: an in-tree build would leave build/ and *.egg-info in the checkout.
    source = tmp_path / "source"
    shutil.copytree(
        REPO / "specbench", source / "specbench",
        ignore=shutil.ignore_patterns("__pycache__", "*.egg-info"),
    )
    for name in ("pyproject.toml", "README.md"):
        if (REPO / name).exists():
            shutil.copy(REPO / name, source / name)
    subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "--no-deps", "--quiet",
         "--wheel-dir", str(tmp_path / "dist"), str(source)],
        check=True,
    )
    (wheel,) = (tmp_path / "dist").glob("specbench-*.whl")
    names = set(zipfile.ZipFile(wheel).namelist())
    for path in SOURCE_EXAMPLES.glob("*.ipynb"):
        assert f"specbench/examples/{path.name}" in names


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


@needs_examples
@pytest.mark.skipif(cli.missing_lab_modules() != [], reason="JupyterLab is not installed")
def test_demo_serves_the_quickstart(tmp_path):
    """`specbench demo` for real: the server answers and serves the copied notebook."""
    port, token = _free_port(), "specbench-test-token"
    env = dict(
        os.environ,
        JUPYTER_TOKEN=token,
        JUPYTER_CONFIG_DIR=str(tmp_path / "config"),
        JUPYTER_RUNTIME_DIR=str(tmp_path / "runtime"),
        JUPYTERLAB_SETTINGS_DIR=str(tmp_path / "settings"),
        JUPYTERLAB_WORKSPACES_DIR=str(tmp_path / "workspaces"),
    )
    log = (tmp_path / "lab.log").open("wb")
    process = subprocess.Popen(
        [sys.executable, "-m", "specbench.cli", "demo", "--dir", str(tmp_path / "demo"),
         "--port", str(port), "--no-browser"],
        env=env, stdout=log, stderr=subprocess.STDOUT,
    )
    url = f"http://127.0.0.1:{port}/api/contents/quickstart.ipynb?content=0&token={token}"
    try:
        deadline = time.monotonic() + 60
        while True:
            assert process.poll() is None, (tmp_path / "lab.log").read_text()
            try:
                with urllib.request.urlopen(url, timeout=5) as response:
                    model = json.load(response)
                break
            except OSError:
                if time.monotonic() > deadline:
                    raise
                time.sleep(0.2)
        assert model["type"] == "notebook"
    finally:
        process.terminate()
        process.wait(timeout=30)
        log.close()
    text = (tmp_path / "lab.log").read_text()
    assert "copied   quickstart.ipynb" in text
    # the URL JupyterLab prints (and opens) lands on the notebook; Jupyter Server 2 prints
    # "?token=..." in place of a token taken from the environment
    assert f"http://127.0.0.1:{port}/lab/tree/quickstart.ipynb?token=" in text


class TestDemoAuthentication:
    """`specbench demo` never serves without a token, and says when it runs as root."""

    def test_random_token_in_the_environment_and_the_printed_url(self, shipped, launches, tmp_path, capsys,
                                                                  monkeypatch):
        monkeypatch.delenv("JUPYTER_TOKEN", raising=False)
        assert cli.main(["demo", "--dir", str(tmp_path / "d"), "--port", "9124", "--no-browser"]) == 0
        (command, _), = launches
        env = cli._last_env[0]
        token = env["JUPYTER_TOKEN"]
        assert len(token) >= 32 and token.isascii()
        assert not any(token in part for part in command)  # not on the command line (visible to ps)
        out = capsys.readouterr().out
        assert f"http://127.0.0.1:9124/lab/tree/quickstart.ipynb?token={token}" in out
        assert "--ip=127.0.0.1" in command
        cli.main(["demo", "--dir", str(tmp_path / "d"), "--port", "9124"])
        assert cli._last_env[1]["JUPYTER_TOKEN"] != token  # a new one each run

    @pytest.mark.parametrize("given", ["", "   ", "abc"])
    def test_empty_or_weak_token_is_replaced(self, shipped, launches, tmp_path, capsys, monkeypatch, given):
        monkeypatch.setenv("JUPYTER_TOKEN", given)
        cli.main(["demo", "--dir", str(tmp_path / "d"), "--port", "9125"])
        token = cli._last_env[0]["JUPYTER_TOKEN"]
        assert token != given and len(token) >= 32
        assert re.search(r"JUPYTER_TOKEN (is empty|is shorter than 8 characters or has spaces); it would leave "
                         r"the server \(nearly\) without authentication, so a random token is used instead",
                         capsys.readouterr().out)

    def test_a_given_token_is_kept(self, shipped, launches, tmp_path, monkeypatch):
        monkeypatch.setenv("JUPYTER_TOKEN", "a-long-enough-token")
        cli.main(["demo", "--dir", str(tmp_path / "d"), "--port", "9126"])
        assert cli._last_env[0]["JUPYTER_TOKEN"] == "a-long-enough-token"

    @pytest.mark.parametrize("root", [True, False])
    def test_root_mode_is_announced(self, shipped, launches, tmp_path, capsys, monkeypatch, root):
        monkeypatch.setattr(cli, "_is_root", lambda: root)
        cli.main(["demo", "--dir", str(tmp_path / "d"), "--port", "9127"])
        out = capsys.readouterr().out
        assert ("Running as root: JupyterLab is started with --allow-root" in out) is root

    def test_free_port_is_free(self):
        port = cli.free_port()
        with socket.socket() as sock:
            sock.bind(("127.0.0.1", port))
