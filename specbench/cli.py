"""Command line: ``specbench demo`` and the other subcommands.

Every subcommand is one entry of :data:`COMMANDS`, ``name -> (add_arguments, run)``:

- ``add_arguments(parser)`` declares the subcommand's options on an
  :class:`argparse.ArgumentParser`; the parser's description is the docstring of ``run``.
- ``run(args) -> int`` does the work and returns the process exit code.

A subcommand that lives in another module registers with one import and one entry,
for example batch estimation in ``specbench/freeze/_batch.py``::

    from specbench.freeze import _batch
    COMMANDS["estimate"] = (_batch.add_arguments, _batch.run)   # written in the table below

Exit codes: 0 success, 1 the command failed (message on stderr), 2 usage error or a
missing optional dependency (message names the ``pip install`` that fixes it).
"""

from __future__ import annotations

import argparse
import filecmp
import importlib.util
import os
import shutil
import subprocess
import sys
from collections.abc import Callable, Sequence
from importlib import resources
from pathlib import Path

from .freeze import _batch

__all__ = ["COMMANDS", "main"]

AddArguments = Callable[[argparse.ArgumentParser], None]
Run = Callable[[argparse.Namespace], int]

#: Modules the demo needs beside specbench itself, with the extra that installs them.
LAB_MODULES = ("jupyterlab", "ipywidgets", "bqplot", "anywidget")
LAB_INSTALL_HINT = 'pip install "specbench[lab]"'

#: The notebook the demo opens first.
DEMO_NOTEBOOK = "quickstart.ipynb"
DEFAULT_DEMO_DIR = "specbench-demo"


class CommandError(Exception):
    """A subcommand cannot proceed; the message says why and what to do (exit code 1)."""


class MissingDependency(CommandError):
    """An optional dependency is not installed (exit code 2)."""


# --------------------------------------------------------------------------- demo


def _add_demo_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--dir",
        type=Path,
        default=Path(DEFAULT_DEMO_DIR),
        metavar="DIR",
        help=f"working folder for the example notebooks (default: ./{DEFAULT_DEMO_DIR})",
    )
    parser.add_argument(
        "--port",
        type=_port,
        default=None,
        metavar="N",
        help="port for JupyterLab (default: 8888 or the next free one, chosen before the start so that "
             "the printed URL is right)",
    )
    parser.add_argument(
        "--no-browser",
        action="store_true",
        help="start the server without opening a web browser (open the printed URL yourself)",
    )


def _port(text: str) -> int:
    try:
        port = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"port must be an integer, got {text!r}") from None
    if not 1 <= port <= 65535:
        raise argparse.ArgumentTypeError(f"port must be in 1..65535, got {port}")
    return port


def _run_demo(args: argparse.Namespace) -> int:
    """Open the example notebooks in JupyterLab, on built-in demo data.

    The shipped notebooks are copied into a working folder (default ./specbench-demo) and
    JupyterLab starts there on quickstart.ipynb. Files already in the folder are kept as
    they are, so your edits survive a second run; delete a file to get the shipped
    version back.
    """
    missing = missing_lab_modules()
    if missing:
        raise MissingDependency(
            f"specbench demo needs JupyterLab and the widget libraries; not installed: "
            f"{', '.join(missing)}. Install them with: {LAB_INSTALL_HINT}"
        )
    target = args.dir.expanduser().resolve()
    copied, kept, unchanged = copy_examples(target)
    for name in copied:
        print(f"copied   {name}")
    for name in unchanged:
        print(f"same     {name} (already up to date)")
    for name in kept:
        print(
            f"kept     {name}: your copy differs from the shipped one and was left as it is "
            f"(delete it and rerun to get the shipped version)"
        )
    port = args.port if args.port is not None else free_port()
    token, note = demo_token(os.environ.get("JUPYTER_TOKEN"))
    if note:
        print(note)
    if _is_root():
        print("Running as root: JupyterLab is started with --allow-root (it refuses root otherwise). "
              "It still listens on 127.0.0.1 only and asks for the token; prefer an ordinary user account.")
    print(f"Starting JupyterLab in {target} on {DEMO_NOTEBOOK} (press Ctrl-C twice to stop).")
    print(f"Open (the token is the password of this server; keep it private):\n"
          f"    http://127.0.0.1:{port}/lab/tree/{DEMO_NOTEBOOK}?token={token}")
    env = dict(os.environ, JUPYTER_TOKEN=token)  # in the environment: not visible to `ps` like an argument
    return launch_lab(lab_command(target, port=port, open_browser=not args.no_browser), target, env=env)


def demo_token(given: str | None) -> tuple[str, str]:
    """The server's token: ``JUPYTER_TOKEN`` when set to a usable value, else a new random one
    (``secrets.token_urlsafe``, 192 bits).  An empty token would start the server without
    authentication, so it is never used; the second item says why a given one was replaced."""
    import secrets

    if given is not None and given.strip() == given and len(given) >= 8:
        return given, ""
    token = secrets.token_urlsafe(24)
    if given is None:
        return token, ""
    why = "is empty" if not given.strip() else "is shorter than 8 characters or has spaces"
    return token, (f"JUPYTER_TOKEN {why}; it would leave the server (nearly) without authentication, so a "
                   "random token is used instead.")


def free_port(first: int = 8888, tries: int = 100) -> int:
    """8888 or the next port free on 127.0.0.1 (as JupyterLab would choose), so the printed URL is right."""
    import socket

    for port in range(first, first + tries):
        with socket.socket() as sock:
            try:
                sock.bind(("127.0.0.1", port))
            except OSError:
                continue
            return port
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def example_notebooks() -> list[Path]:
    """The example notebooks shipped with the installed package, sorted by name."""
    folder = resources.files("specbench") / "examples"
    if not folder.is_dir():
        return []
    # The package is installed as files (wheel or editable), so the traversable is a path.
    return sorted(Path(str(item)) for item in folder.iterdir() if item.name.endswith(".ipynb"))


def copy_examples(target: Path) -> tuple[list[str], list[str], list[str]]:
    """Copy the shipped notebooks into `target` without touching existing files.

    Returns the names ``(copied, kept, unchanged)``: newly copied; already present and
    different from the shipped version (left alone); already present and identical.
    The installed originals are only read.
    """
    sources = example_notebooks()
    if not any(path.name == DEMO_NOTEBOOK for path in sources):
        where = resources.files("specbench") / "examples"
        raise CommandError(
            f"the installed specbench has no {DEMO_NOTEBOOK} in {where}; the package data "
            f"is missing. Reinstall specbench (pip install --force-reinstall specbench, or "
            f'pip install -e ".[lab]" from a source checkout).'
        )
    if target.exists() and not target.is_dir():
        raise CommandError(f"{target} exists and is not a folder; choose another with --dir.")
    target.mkdir(parents=True, exist_ok=True)
    copied, kept, unchanged = [], [], []
    for source in sources:
        destination = target / source.name
        if not destination.exists():
            # copyfile, not copy2: a read-only installed original must give a writable copy.
            shutil.copyfile(source, destination)
            copied.append(source.name)
        elif filecmp.cmp(source, destination, shallow=False):
            unchanged.append(source.name)
        else:
            kept.append(source.name)
    return copied, kept, unchanged


def missing_lab_modules() -> list[str]:
    """Names of the demo's optional modules that cannot be imported."""
    return [name for name in LAB_MODULES if importlib.util.find_spec(name) is None]


def lab_command(root: Path, *, port: int | None, open_browser: bool) -> list[str]:
    """The JupyterLab command line that serves `root` and opens the quick-start notebook."""
    command = [
        sys.executable,
        "-m",
        "jupyterlab",
        "--ip=127.0.0.1",
        f"--ServerApp.root_dir={root}",
        # the token comes from JUPYTER_TOKEN (set by _run_demo to a random one): never without one
    ]
    if port is not None:
        command.append(f"--port={port}")
    if not open_browser:
        command.append("--no-browser")
    if _is_root():
        command.append("--allow-root")
    # The start URL, both for the browser JupyterLab opens and for the URL it prints.
    command.append(f"--LabApp.default_url=/lab/tree/{DEMO_NOTEBOOK}")
    return command


def _is_root() -> bool:
    return hasattr(os, "geteuid") and os.geteuid() == 0


def launch_lab(command: Sequence[str], cwd: Path, env: dict | None = None) -> int:
    """Run JupyterLab in the foreground until it exits; return its exit code.

    On POSIX the specbench process becomes JupyterLab (``exec``), so Ctrl-C, SIGTERM and
    the exit code reach the server directly and no parent is left behind.
    """
    command = list(command)
    if os.name == "posix":
        sys.stdout.flush()
        sys.stderr.flush()
        os.chdir(cwd)
        os.execve(command[0], command, env if env is not None else dict(os.environ))  # does not return
    process = subprocess.Popen(command, cwd=cwd, env=env)
    while True:
        try:
            return process.wait()
        except KeyboardInterrupt:
            # JupyterLab receives the same Ctrl-C and handles its own shutdown; wait for it.
            continue


# --------------------------------------------------------------------------- table

#: Subcommand table, ``name -> (add_arguments, run)``; see the module docstring.
COMMANDS: dict[str, tuple[AddArguments, Run]] = {
    "demo": (_add_demo_arguments, _run_demo),
    "estimate": (_batch.add_arguments, _batch.run),
}


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="specbench",
        description="Interactive spectral estimation: PSD and autocorrelation with "
        "confidence bands, frozen into reproducible code.",
    )
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, (add_arguments, run) in COMMANDS.items():
        doc = (run.__doc__ or "").strip()
        summary = doc.splitlines()[0] if doc else ""
        sub = subparsers.add_parser(
            name,
            help=summary,
            description=doc,
            formatter_class=argparse.RawDescriptionHelpFormatter,
        )
        add_arguments(sub)
        sub.set_defaults(_run=run)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``specbench`` command; returns the exit code."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help(sys.stderr)
        return 2
    try:
        return args._run(args)
    except MissingDependency as error:
        print(f"specbench {args.command}: {error}", file=sys.stderr)
        return 2
    except CommandError as error:
        print(f"specbench {args.command}: {error}", file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())
