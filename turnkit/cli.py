"""The ``turnkit`` command: start, size and document actuator designs.

Subcommands
-----------
``new NAME``
    Write ``NAME.toml`` (a commented example design) and ``NAME.ipynb`` (the
    notebook) from the package templates; never replaces a file.
``size FILE``
    Size a design file and print a plain-text summary, or write it with
    ``-o OUT`` as HTML, Markdown, JSON or text, chosen by OUT's extension.
``schema``
    Print the JSON Schema of the design-file format.
``lab [NOTEBOOK]``
    Start JupyterLab on a notebook.

Exit status: 0 when every requirement passes, 1 when any requirement or
motion scenario fails, 2 when no verdict was reached: a bad design file, bad
usage or an internal error (the error goes to stderr).
"""

from __future__ import annotations

import argparse
import contextlib
import gc
import importlib.util
import json
import os
import re
import sys
import warnings
from pathlib import Path
from typing import Sequence

# shlex, shutil, signal, subprocess and urllib.parse are imported by the subcommands that use
# them: ``turnkit size`` is run often and should not pay for starting JupyterLab.

from . import __version__
from .errors import DesignFileError, DesignValueError, TurnkitError, TurnkitWarning

__all__ = ["main", "build_parser", "lab_command", "demo_checkout", "copy_demo", "EXIT_PASS", "EXIT_FAIL",
           "EXIT_ERROR", "TEMPLATES", "DEMO_FOLDERS"]

#: Exit status when every requirement passes.
EXIT_PASS = 0
#: Exit status when a requirement or a motion scenario fails.
EXIT_FAIL = 1
#: Exit status for a bad file or bad usage.
EXIT_ERROR = 2

#: Folder of the design and notebook templates used by ``turnkit new``.
TEMPLATES = Path(__file__).parent / "templates"

_DESCRIPTION = """\
Size battery-backed multi-turn geared actuators: gear train, AMR angle sensor,
quarter-turn counter, sleep schedule and battery life."""

_EPILOG = """\
examples:
  turnkit new vent-opener              start a design file and a notebook
  turnkit size vent-opener.toml        print the sizing summary
  turnkit size vent-opener.toml -o review.html
                                       write it as a page for a design review
  turnkit schema > design-schema.json  the design-file format as JSON Schema
  turnkit lab vent-opener.ipynb        open the notebook in JupyterLab

exit status: 0 all requirements pass, 1 a requirement fails, 2 bad file or usage."""

_NEW_EPILOG = """\
examples:
  turnkit new vent-opener
      writes vent-opener.toml and vent-opener.ipynb in the current folder
  turnkit new shade-winder --dir designs/
      writes designs/shade-winder.toml and designs/shade-winder.ipynb

Existing files are never replaced. Edit the .toml file (every entry is
commented), then run `turnkit size NAME.toml` or open the notebook."""

_SIZE_EPILOG = """\
examples:
  turnkit size valve.toml                      print the summary
  turnkit size valve.toml -o valve.html        self-contained page, works offline
  turnkit size valve.toml -o valve.md          Markdown for a code review
  turnkit size valve.toml -o valve.json        machine-readable, documented keys
  turnkit size valve.toml -o valve.html --overwrite
  turnkit size valve.toml > /dev/null || echo "a requirement fails"
  turnkit size designs/*.toml -o summaries/ --format md
                                               one summary per design file, in a batch

exit status: 0 every requirement and motion scenario passes, 1 any fails,
2 the design file (or an option) is bad; errors go to stderr. With several
files: 2 if any file is bad, else 1 if any design fails, else 0."""

_SCHEMA_EPILOG = """\
examples:
  turnkit schema                       print the schema
  turnkit schema > design-schema.json  save it for an editor's TOML/JSON validation"""

_LAB_EPILOG = """\
examples:
  turnkit lab                          JupyterLab in the current folder
  turnkit lab vent-opener.ipynb        open one notebook
  turnkit lab vent-opener.ipynb --port 8890 --no-browser
                                       other options go to JupyterLab unchanged

Needs the notebook extras: pip install "turnkit[notebook]". Run as root,
--allow-root is added for you."""


class _Parser(argparse.ArgumentParser):
    """An ArgumentParser whose usage errors raise instead of exiting, so main() returns 2."""

    def error(self, message: str):
        raise _UsageError(self, message)


class _UsageError(Exception):
    def __init__(self, parser: argparse.ArgumentParser, message: str):
        super().__init__(message)
        self.parser = parser


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``turnkit`` command (for documentation and tests)."""
    fmt = argparse.RawDescriptionHelpFormatter
    parser = _Parser(prog="turnkit", description=_DESCRIPTION, epilog=_EPILOG, formatter_class=fmt)
    parser.add_argument("--version", action="version", version=f"turnkit {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    new = sub.add_parser("new", help="start a design file and a notebook for a new actuator",
                         description="Write NAME.toml (a commented example design) and NAME.ipynb "
                                     "(the sizing notebook) from turnkit's templates.",
                         epilog=_NEW_EPILOG, formatter_class=fmt)
    new.add_argument("name", metavar="NAME", help="name of the actuator and of the two files (no folder; "
                                                  "use --dir)")
    new.add_argument("--dir", metavar="DIR", default=".", type=Path,
                     help="folder to write into (default: the current folder; created if missing)")

    size = sub.add_parser("size", help="size a design file and print or write the summary",
                          description="Size the actuator in a design file. Prints a plain-text summary "
                                      "(requirements with PASS/FAIL and margins, simulated motions, derived "
                                      "values, warnings and cautions), or writes it to OUT.",
                          epilog=_SIZE_EPILOG, formatter_class=fmt)
    size.add_argument("file", metavar="FILE", type=Path, nargs="+",
                      help="the design file (.toml); several files are sized one after the other")
    size.add_argument("-o", "--output", metavar="OUT", type=Path,
                      help="write the summary here instead of printing it; the extension picks the format: "
                           ".html, .md, .json or .txt. With several FILEs, OUT is a folder and each summary "
                           "is named after its design file (format from --format)")
    size.add_argument("--format", choices=("html", "md", "json", "txt"), default="html",
                      help="summary format for several FILEs written to a folder (default: html)")
    size.add_argument("--overwrite", action="store_true", help="replace OUT if it exists")
    size.add_argument("--allow-outside-paths", action="store_true",
                      help="let the design file name trace and sweep files outside its own folder (off by "
                           "default, so a design file from elsewhere cannot make turnkit read other files)")

    sub.add_parser("schema", help="print the JSON Schema of the design-file format",
                   description="Print the JSON Schema (draft 2020-12) that describes design files, "
                               "with every key's unit, range and default.",
                   epilog=_SCHEMA_EPILOG, formatter_class=fmt)

    lab = sub.add_parser("lab", help="start JupyterLab on a notebook",
                         description="Start JupyterLab, opening NOTEBOOK if given. Options turnkit does not "
                                     "know are passed to JupyterLab.",
                         epilog=_LAB_EPILOG, formatter_class=fmt)
    lab.add_argument("notebook", metavar="NOTEBOOK", nargs="?", type=Path, help="the notebook to open")
    lab.add_argument("--demo-dir", metavar="DIR", type=Path, default=None,
                     help="where a demo notebook of a turnkit checkout is copied before it is opened "
                          "(default: ~/turnkit-demo); the checkout itself is never changed")
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the ``turnkit`` command with ``argv`` (default: ``sys.argv[1:]``); return the exit status."""
    parser = build_parser()
    args_list = list(sys.argv[1:] if argv is None else argv)
    try:
        args, extra = parser.parse_known_args(args_list)
        if extra and args.command != "lab":
            parser.error(f"unrecognized arguments: {' '.join(extra)}")
    except _UsageError as exc:
        exc.parser.print_usage(sys.stderr)
        print(f"{exc.parser.prog}: error: {exc}", file=sys.stderr)
        return EXIT_ERROR
    except SystemExit as exc:  # --help and --version
        return int(exc.code or 0) if not isinstance(exc.code, str) else EXIT_ERROR
    if args.command is None:
        parser.print_help(sys.stderr)
        return EXIT_ERROR
    try:
        if args.command == "new":
            return _new(args.name, args.dir)
        if args.command == "size":
            if len(args.file) == 1:
                return _size(args.file[0], args.output, args.overwrite, args.allow_outside_paths)
            return _size_batch(args.file, args.output, args.format, args.overwrite, args.allow_outside_paths)
        if args.command == "schema":
            return _schema()
        return _lab(args.notebook, extra, args.demo_dir)
    except (DesignFileError, DesignValueError, TurnkitError, FileExistsError, FileNotFoundError,
            IsADirectoryError, PermissionError) as exc:
        print(f"turnkit {args.command}: error: {_printable(str(exc))}", file=sys.stderr)
        return EXIT_ERROR
    except Exception:
        # A crash must not read as "a requirement fails" (status 1) in someone's CI.
        import traceback

        traceback.print_exc(file=sys.stderr)
        print(f"turnkit {args.command}: internal error (the traceback above); no verdict was reached",
              file=sys.stderr)
        return EXIT_ERROR


def _err(command: str, message: str) -> int:
    print(f"turnkit {command}: error: {_printable(message)}", file=sys.stderr)
    return EXIT_ERROR


# Control characters (terminal escape sequences start with ESC) are shown, not sent to the terminal.
_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f\x7f-\x9f]")


def _printable(text: str) -> str:
    """``text`` with control characters written as escapes (``\\x1b``), so a name cannot drive the terminal."""
    return _CONTROL.sub(lambda m: m.group(0).encode("unicode_escape").decode("ascii"), text)


# --- new --------------------------------------------------------------------------

def _new(name: str, folder: Path) -> int:
    stem = name[:-5] if name.endswith(".toml") else name
    if not stem.strip() or stem != stem.strip() or stem.startswith(".") or any(c in stem for c in "/\\:"):
        return _err("new", f"NAME must be a plain file name without a folder, not {name!r} "
                           "(use --dir to choose the folder)")
    design_template = TEMPLATES / "design.toml"
    notebook_template = TEMPLATES / "notebook.ipynb"
    for template in (design_template, notebook_template):
        if not template.is_file():
            return _err("new", f"template {template} is missing from this turnkit installation; "
                               "nothing was written")
    design_path = folder / f"{stem}.toml"
    notebook_path = folder / f"{stem}.ipynb"
    existing = [str(p) for p in (design_path, notebook_path) if p.exists()]
    if existing:
        return _err("new", f"{' and '.join(existing)} already exist{'s' if len(existing) == 1 else ''}; "
                           "nothing was written (pick another NAME or --dir)")
    design_text = _named_design(design_template.read_text(encoding="utf-8"), stem)
    notebook_text = _named_notebook(notebook_template.read_text(encoding="utf-8"), stem)
    folder.mkdir(parents=True, exist_ok=True)
    written: list[Path] = []
    try:
        for path, text in ((design_path, design_text), (notebook_path, notebook_text)):
            _create(path, text)
            written.append(path)
    except BaseException:
        for path in written:  # all or nothing
            path.unlink(missing_ok=True)
        raise
    import shlex

    print(f"wrote {design_path}\nwrote {notebook_path}\n"
          f"next: edit {design_path}, then `turnkit size {shlex.quote(str(design_path))}` "
          f"or `turnkit lab {shlex.quote(str(notebook_path))}`")
    return EXIT_PASS


def _named_design(template: str, name: str) -> str:
    """The template with its ``name = ...`` line set to ``name`` (TOML-quoted)."""
    import tomli_w

    line = tomli_w.dumps({"name": name}).strip()
    lines = template.splitlines(keepends=True)
    for i, text in enumerate(lines):
        if text.startswith("name = "):
            lines[i] = line + "\n"
            return "".join(lines)
    raise TurnkitError("the design template has no top-level `name = ...` line")


def _named_notebook(template: str, name: str) -> str:
    """The notebook template, pointed at ``NAME.toml`` when it names its design file.

    The template may refer to its design file as ``design.toml``; that name is
    replaced by ``NAME.toml`` in code cells so the new notebook opens its own design.
    """
    try:
        notebook = json.loads(template)
    except json.JSONDecodeError as exc:
        raise TurnkitError(f"the notebook template is not valid JSON: {exc}") from None
    target = json.dumps(f"{name}.toml")[1:-1]
    changed = False
    for cell in notebook.get("cells", []):
        if cell.get("cell_type") != "code":
            continue
        source = cell.get("source", [])
        joined = "".join(source) if isinstance(source, list) else str(source)
        if "design.toml" in joined:
            replaced = joined.replace("design.toml", target)
            cell["source"] = replaced.splitlines(keepends=True) if isinstance(source, list) else replaced
            changed = True
    if not changed:
        return template
    return json.dumps(notebook, indent=1, ensure_ascii=False) + "\n"


def _create(path: Path, text: str) -> None:
    """Write a new file; fail if it appeared meanwhile (never replaces anything)."""
    with open(path, "x", encoding="utf-8", newline="\n") as handle:
        handle.write(text)


# --- size -------------------------------------------------------------------------

@contextlib.contextmanager
def _imports_kept_out_of_collection():
    """Import the sizing model with the cyclic garbage collector paused, then keep what the imports made
    out of later collections (:func:`gc.freeze`).

    Imports make long-lived objects only (numpy's and turnkit's modules, classes and tables).
    Collecting while they pile up, and walking them again at each later collection, costs a cold
    ``turnkit size`` about a twentieth of its time for nothing; sizing's own objects are collected
    as usual. Nothing is done once the model is imported (e.g. a second call in one process).
    """
    if "turnkit.sizing" in sys.modules or not gc.isenabled():
        yield
        return
    gc.disable()
    try:
        yield
    finally:
        gc.freeze()
        gc.enable()


def _size(file: Path, output: Path | None, overwrite: bool, allow_outside_paths: bool = False) -> int:
    with _imports_kept_out_of_collection():
        from .designfile import load_design
        from .export import SUFFIXES, to_text, write_summary
        from .sizing import size

    if output is not None and output.suffix.lower() not in SUFFIXES:
        return _err("size", f"cannot tell the format of {output}: its extension must be one of "
                            f"{', '.join(SUFFIXES)}")
    if output is not None and output.exists() and not overwrite:
        return _err("size", f"{output} already exists; add --overwrite to replace it")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", TurnkitWarning)
        try:
            design = load_design(file, allow_outside_paths=allow_outside_paths)
            # Trace files are named relative to the design file.
            # Plot data only when the summary shows it (the printed text has no plots).
            wants_curves = output is not None and output.suffix.lower() != ".txt"
            result = size(design, base_dir=file.parent, curves=wants_curves)
        except (DesignFileError, DesignValueError) as exc:
            # Every error names the design file, also those found while sizing.
            if str(file) in str(exc):
                raise
            raise TurnkitError(f"{file}: {exc}") from None
    shown = set(result.warnings)
    for w in caught:
        if issubclass(w.category, TurnkitWarning) and str(w.message) not in shown:
            shown.add(str(w.message))
            print(f"turnkit size: warning: {_printable(str(w.message))}", file=sys.stderr)
        elif not issubclass(w.category, TurnkitWarning):
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    if output is None:
        _write_stdout(to_text(result))
    else:
        path = write_summary(result, output, overwrite=overwrite)
        verdict = "PASS" if result.passed else "FAIL"
        failed = [c.label for c in result.failed_checks] + [f"motion '{s.name}'" for s in result.scenarios
                                                            if not s.passed]
        print(_printable(f"wrote {path} ({verdict}" + (f": {'; '.join(failed)} failed)" if failed else ")")))
    return EXIT_PASS if result.passed else EXIT_FAIL


def _size_batch(files: Sequence[Path], folder: Path | None, fmt: str, overwrite: bool,
                allow_outside_paths: bool = False) -> int:
    """Size several design files; the worst outcome sets the exit status."""
    if folder is not None:
        if folder.exists() and not folder.is_dir():
            return _err("size", f"with several design files, -o must name a folder, not the file {folder}")
        # Two design files with the same name (from different folders) would write one summary over the other.
        by_name: dict[str, Path] = {}
        for file in files:
            name = f"{file.stem}.{fmt}".casefold()
            if name in by_name:
                return _err("size", f"{by_name[name]} and {file} would both write {folder / f'{file.stem}.{fmt}'}; "
                                    "nothing was written: size them into separate folders")
            by_name[name] = file
        folder.mkdir(parents=True, exist_ok=True)
    statuses = []
    for i, file in enumerate(files):
        if folder is None and i:
            _write_stdout("\n" + "=" * 78 + "\n\n")
        out = None if folder is None else folder / f"{file.stem}.{fmt}"
        try:
            statuses.append(_size(file, out, overwrite, allow_outside_paths))
        except (DesignFileError, DesignValueError, TurnkitError, FileExistsError, FileNotFoundError,
                IsADirectoryError, PermissionError) as exc:
            message = str(exc) if str(file) in str(exc) else f"{file}: {exc}"
            print(f"turnkit size: error: {_printable(message)}", file=sys.stderr)
            statuses.append(EXIT_ERROR)
    if EXIT_ERROR in statuses:
        return EXIT_ERROR
    return EXIT_FAIL if EXIT_FAIL in statuses else EXIT_PASS


def _write_stdout(text: str) -> None:
    """Print ``text``; characters the terminal's encoding lacks (e.g. "°" on some consoles) become "?".

    Control characters in it (from names in a design file) are written as escapes.
    """
    text = _printable(text)
    try:
        sys.stdout.write(text)
    except UnicodeEncodeError:
        encoding = getattr(sys.stdout, "encoding", None) or "ascii"
        sys.stdout.write(text.encode(encoding, "replace").decode(encoding))


# --- schema -----------------------------------------------------------------------

def _schema() -> int:
    from .designfile import design_schema

    _write_stdout(json.dumps(design_schema(), indent=2, ensure_ascii=False) + "\n")
    return EXIT_PASS


# --- lab --------------------------------------------------------------------------

def lab_command(notebook: Path | None, extra: Sequence[str] = (), root_dir: Path | None = None) -> list[str]:
    """The command line that starts JupyterLab (``--allow-root`` added when running as root).

    ``root_dir`` becomes the server's root folder (what Lab's file browser
    shows) unless ``extra`` already chooses one.
    """
    import urllib.parse

    command = [sys.executable, "-m", "jupyterlab"]
    if notebook is not None:
        command.append(str(notebook))
    command.extend(extra)
    chosen = any(a.startswith(("--ServerApp.root_dir", "--notebook-dir", "--ServerApp.notebook_dir"))
                 for a in extra)
    if root_dir is not None and not chosen:
        command.append(f"--ServerApp.root_dir={root_dir}")
    if notebook is not None and not chosen and not any("default_url" in a for a in extra):
        # The printed and opened URL then shows the notebook itself, not an empty Lab.
        base = Path(root_dir) if root_dir is not None else Path.cwd()
        try:
            relative = Path(notebook).resolve().relative_to(base.resolve())
        except ValueError:
            relative = None
        if relative is not None:
            command.append(f"--LabApp.default_url=/lab/tree/{urllib.parse.quote(relative.as_posix())}")
    geteuid = getattr(os, "geteuid", None)
    if geteuid is not None and geteuid() == 0 and "--allow-root" not in command:
        command.append("--allow-root")
    return command


#: The folders of a turnkit checkout that ``turnkit lab`` copies before opening a demo notebook.
DEMO_FOLDERS = ("notebooks", "demo")


def demo_checkout() -> Path | None:
    """The turnkit checkout this package runs from (an editable install), or None when installed normally."""
    root = Path(__file__).resolve().parent.parent
    return root if all((root / folder).is_dir() for folder in DEMO_FOLDERS) else None


def copy_demo(target: Path) -> list[Path]:
    """Copy the checkout's demo notebooks and design files into ``target``; return the files copied.

    Files already in ``target`` are kept as they are (they may hold the
    user's own edits); only missing ones are copied.
    """
    import shutil

    root = demo_checkout()
    if root is None:
        raise TurnkitError("no turnkit checkout to copy the demo from")
    copied: list[Path] = []
    for folder in DEMO_FOLDERS:
        for source in sorted((root / folder).rglob("*")):
            relative = source.relative_to(root)
            if any(part.startswith(".") for part in relative.parts) or not source.is_file():
                continue
            destination = target / relative
            if destination.exists():
                continue
            destination.parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(source, destination)
            copied.append(destination)
    return copied


def _lab_place(notebook: Path | None, demo_dir: Path | None) -> tuple[Path | None, Path | None, str]:
    """Where to open Lab: (notebook, root folder, message). A checkout's demo is opened on a copy."""
    root = demo_checkout()
    here = Path.cwd().resolve()
    is_demo = root is not None and (
        (notebook is not None and (root / "notebooks") in notebook.resolve().parents)
        or (notebook is None and here == root))
    if is_demo:
        target = (demo_dir or Path.home() / "turnkit-demo").expanduser().resolve()
        if target == root or root in target.parents:
            raise TurnkitError(f"--demo-dir {target} is inside the turnkit checkout; choose a folder outside it")
        copied = copy_demo(target)
        opened = target / "notebooks" / notebook.name if notebook is not None else None
        state = f"copied {len(copied)} files" if copied else "your copy from before, unchanged"
        message = (f"turnkit lab: working on a copy of the demo in {target} ({state}); saves and exports go "
                   "there and the checkout stays unchanged")
        return opened, target, message
    if notebook is None:
        return None, None, ""
    folder = notebook.resolve().parent
    # Lab's file browser must show the notebook's folder, where its design file lives.
    return notebook, (None if here == folder or here in folder.parents else folder), ""


def _lab(notebook: Path | None, extra: Sequence[str], demo_dir: Path | None = None) -> int:
    if importlib.util.find_spec("jupyterlab") is None:
        return _err("lab", 'JupyterLab is not installed; install it with: pip install "turnkit[notebook]"')
    if notebook is not None and not notebook.is_file():
        return _err("lab", f"notebook {notebook} not found (create one with `turnkit new NAME`)")
    extra = [a for a in extra if a != "--"]
    notebook, root_dir, message = _lab_place(notebook, demo_dir)
    if message:
        print(message, file=sys.stderr)
    return _run_forwarding_signals(lab_command(notebook, extra, root_dir))


def _run_forwarding_signals(command: list[str]) -> int:
    """Run ``command``; SIGTERM, SIGINT and SIGHUP are passed on to it, and it never outlives this process.

    Returns its exit status (128 + the signal number when a signal ended it).
    """
    import signal
    import subprocess

    process = subprocess.Popen(command)

    def forward(signum, _frame) -> None:
        if process.poll() is None:
            process.send_signal(signum)

    names = [getattr(signal, name) for name in ("SIGTERM", "SIGINT", "SIGHUP") if hasattr(signal, name)]
    previous = {}
    try:
        for signum in names:
            try:
                previous[signum] = signal.signal(signum, forward)
            except ValueError:  # not the main thread: nothing to forward
                break
        while True:
            try:
                status = process.wait()
                break
            except KeyboardInterrupt:
                forward(signal.SIGINT, None)
    finally:
        for signum, handler in previous.items():
            signal.signal(signum, handler)
        if process.poll() is None:
            process.terminate()
            try:
                process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                process.kill()
                process.wait()
    return 128 - status if status < 0 else status
