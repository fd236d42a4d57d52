"""Writing tables (CSV and one workbook) and the output folder, atomically.

CSV files are written byte for byte the same for the same input and seed: fixed float format
(12 significant digits), ``\\n`` line ends, UTF-8, no timestamps. Timings live only in
``run.json``.
"""

from __future__ import annotations

import math
import os
import shutil
import tempfile
from pathlib import Path
from types import TracebackType

import pandas as pd

from .._errors import InputError
from ._safety import inside, neutralise_frame, sheet_name

__all__ = ["FLOAT_FORMAT", "OutputFolder", "remove_stale", "write_csv", "write_workbook"]

#: Float format of every CSV table: 12 significant digits, so that the text does not depend on
#: the last bits of floating-point sums.
FLOAT_FORMAT = "%.12g"

#: The file a report folder always has; ``--force`` replaces only folders that hold it.
MARKER = "run.json"


def write_csv(frame: pd.DataFrame, path: Path, *, index: bool = True) -> None:
    """Write ``frame`` as CSV with its index as the first column and text cells neutralised."""
    safe = neutralise_frame(frame, index=index)
    safe.to_csv(path, index=False, lineterminator="\n", float_format=FLOAT_FORMAT,
                encoding="utf-8")


def _cell(value: object) -> object:
    if value is None:
        return None
    if isinstance(value, float) and math.isnan(value):
        return None
    try:
        if pd.isna(value):  # type: ignore[arg-type]
            return None
    except (TypeError, ValueError):
        pass
    if hasattr(value, "item"):
        value = value.item()  # numpy scalar -> Python
    if isinstance(value, int | float | bool):
        return value
    return str(value)


def write_workbook(tables: dict[str, pd.DataFrame], path: Path) -> None:
    """One ``.xlsx`` workbook with a sheet per table (text cells neutralised, numbers kept)."""
    from openpyxl import Workbook
    from openpyxl.styles import Font

    wb = Workbook()
    contents = wb.active
    contents.title = "contents"
    used: set[str] = {"contents"}
    bold = Font(bold=True)
    contents.append(["sheet", "table", "rows", "columns"])
    for cell in contents[1]:
        cell.font = bold
    for name, frame in tables.items():
        ws = wb.create_sheet(sheet_name(name, used))
        contents.append([ws.title, f"tables/{name}.csv", len(frame), frame.shape[1]])
        safe = neutralise_frame(frame)
        ws.append([str(c) for c in safe.columns])
        for cell in ws[1]:
            cell.font = bold
            cell.data_type = "s"
        for row in safe.itertuples(index=False, name=None):
            ws.append([_cell(v) for v in row])
        for row in ws.iter_rows(min_row=2):
            for cell in row:
                if isinstance(cell.value, str):
                    cell.data_type = "s"  # text is text, never a formula
        ws.freeze_panes = "A2"
    wb.properties.creator = "gradients"
    wb.save(path)


class OutputFolder:
    """A report folder written beside its target and moved into place when complete.

    The files are written into a hidden temporary folder in the same parent folder as
    ``target``; :meth:`commit` renames it to ``target`` (an atomic rename on one file system).
    If anything fails, the temporary folder is removed and an existing ``target`` is untouched.
    An existing ``target`` is replaced only when ``force`` is true, only after the new folder is
    complete, and only if it is empty or is itself a report folder (it holds ``run.json``), so a
    mistyped ``--out`` cannot delete unrelated files.
    """

    def __init__(self, target: str | os.PathLike[str], *, force: bool = False) -> None:
        self.target = Path(target).expanduser().absolute()
        self.force = force
        self.root: Path | None = None
        check_target(self.target, force=force)
        #: Partial folders of runs that were killed before they finished, removed here.
        self.removed = remove_stale(self.target)
        check_writable(self.target)

    def __enter__(self) -> OutputFolder:
        parent = self.target.parent
        try:
            parent.mkdir(parents=True, exist_ok=True)
            self.root = Path(tempfile.mkdtemp(prefix=_partial_prefix(self.target), dir=parent))
        except OSError as exc:
            raise _unwritable(self.target, exc) from None
        return self

    def __exit__(self, exc_type: type[BaseException] | None, exc: BaseException | None,
                 tb: TracebackType | None) -> None:
        if exc_type is not None and self.root is not None and self.root.exists():
            shutil.rmtree(self.root, ignore_errors=True)

    def path(self, relative: str) -> Path:
        """A path inside the folder being written (sub-folders created on demand)."""
        assert self.root is not None, "use OutputFolder as a context manager"
        p = inside(self.root, relative)
        p.parent.mkdir(parents=True, exist_ok=True)
        return p

    def commit(self) -> Path:
        """Move the finished folder into place and return its final path."""
        assert self.root is not None
        check_target(self.target, force=self.force)
        old: Path | None = None
        if self.target.exists():
            old = Path(tempfile.mkdtemp(prefix=f".{self.target.name}.old-",
                                        dir=self.target.parent))
            os.rmdir(old)
            os.replace(self.target, old)
        try:
            os.replace(self.root, self.target)
        except OSError:
            if old is not None:
                os.replace(old, self.target)
            raise
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
        self.root = None
        return self.target


def _partial_prefix(target: Path) -> str:
    """Name prefix of the folder a run writes into: it carries the process ID of the run, so
    that a later run can tell a folder left by a killed run from one still being written."""
    return f".{target.name}.partial-{os.getpid()}-"


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # another user's process
        return True
    return True


def remove_stale(target: Path) -> list[Path]:
    """Remove the partial folders beside ``target`` left by runs that were killed outright.

    A run writes into ``.<name>.partial-<pid>-<random>`` and renames it into place when done;
    a run stopped by Ctrl-C or SIGTERM removes it itself, but one killed outright (SIGKILL, a
    power cut) cannot. Such a folder is removed when its process no longer exists; the folder
    of a run still going is left alone. Returns the folders removed.
    """
    parent = target.parent
    removed: list[Path] = []
    if not parent.is_dir():
        return removed
    prefix = f".{target.name}.partial-"
    try:
        entries = list(parent.iterdir())
    except OSError:
        return removed
    for entry in entries:
        if not entry.name.startswith(prefix) or not entry.is_dir():
            continue
        pid_text = entry.name[len(prefix):].split("-", 1)[0]
        if pid_text.isdigit() and _alive(int(pid_text)) and int(pid_text) != os.getpid():
            continue
        shutil.rmtree(entry, ignore_errors=True)
        removed.append(entry)
    return removed


def _unwritable(target: Path, exc: OSError) -> InputError:
    reason = exc.strerror or type(exc).__name__
    return InputError(
        f"The report folder {str(target)!r} cannot be written: {reason} "
        f"({str(exc.filename or target.parent)!r}). This is a permission problem with the "
        "folder, not with the data: choose a folder you can write to (--out, or `[output] "
        "folder` in the project file), or change the folder's permissions.",
        file=str(target))


def check_writable(target: Path) -> None:
    """Raise InputError when the folder that will hold ``target`` cannot be written.

    Tried for real (a folder created and removed beside the target), before any analysis
    runs, so that a permission problem is found in seconds rather than after the run.
    """
    parent = target.parent
    existing = parent
    while not existing.exists() and existing != existing.parent:
        existing = existing.parent
    if not existing.is_dir():
        raise InputError(f"The report folder {str(target)!r} cannot be made: "
                         f"{str(existing)!r} is a file, not a folder. Choose another folder "
                         "(--out, or `[output] folder`).", file=str(target))
    try:
        probe = Path(tempfile.mkdtemp(prefix=f".{target.name}.probe-", dir=existing))
    except OSError as exc:
        raise _unwritable(target, exc) from None
    probe.rmdir()


def check_target(target: Path, *, force: bool) -> None:
    """Raise InputError when ``target`` may not be (re)written."""
    if not target.exists():
        return
    if not target.is_dir():
        raise InputError(
            f"The output path {str(target)!r} exists and is a file, not a folder. Choose another "
            "output folder (--out)."
        )
    if not force:
        raise InputError(
            f"The output folder {str(target)!r} already exists. Choose another folder (--out), "
            "or pass --force to replace it once the new report is complete."
        )
    entries = [p.name for p in target.iterdir()]
    if entries and MARKER not in entries:
        raise InputError(
            f"The output folder {str(target)!r} is not empty and is not a gradients report (it "
            f"has no {MARKER}), so --force will not replace it. Choose an empty or new folder."
        )
