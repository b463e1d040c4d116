"""Parse an untrusted workbook in a child process with a time and a memory limit.

A crafted or damaged workbook can make a spreadsheet parser spin forever
(an ``.ods`` cut off inside a table), ask for hundreds of gigabytes (a stray
cell at the last row and column) or panic.  In the command line that would
hang or abort calib; in ``calib serve`` it would pin a worker thread or kill
the server.  So the parse runs in a child process (``_calamine_child.py``).
A process with no other thread (the command line) forks itself: the copy
starts at once, with python-calamine loaded and the file's bytes in memory.
Elsewhere (the web server's threads, or a platform without ``fork``) the
child is a new interpreter running that module as a script, which imports
nothing of calib and starts in a few hundredths of a second.  The child is
given

* a memory limit (address space, ``RLIMIT_AS``) of :data:`_BASE_MEMORY` plus
  :data:`_MEMORY_PER_BYTE` times the file size (beyond what a forked copy
  already holds), and
* a processor-time limit (``RLIMIT_CPU``) of :data:`BASE_SECONDS` plus
  :data:`_SECONDS_PER_MB` per megabyte of file, rounded up to whole seconds:
  what ends a parser spinning on damaged data, and
* a wall-clock limit of :data:`_WALL_FACTOR` times that: a child on a busy
  machine (a CI host running many jobs) may wait far longer than it computes,
  and a healthy file must not be called damaged for it; the wall clock only
  keeps a stuck child (or a machine too busy to finish) from holding the
  caller for ever: at most 4 × 36 s for the web's 20 MiB uploads,

and returns the cells.  The parent starts the child first and meanwhile runs
its own checks of the archive (:mod:`calib.io.limits`), so the checks cost
no extra time on a machine with two cores; when they refuse the file, the
child is stopped.  What the child prints (a Rust panic message) is never
shown: every way it can end becomes one :class:`~calib.errors.InputError`.

The child's answer is unpickled with only plain values and the date and time
types allowed, so even a child subverted by a hostile file cannot make the
parent run code.
"""

from __future__ import annotations

import datetime
import faulthandler
import io
import math
import os
import pickle
import selectors
import signal
import subprocess
import sys
import threading
import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, ClassVar, NamedTuple, TypeVar

from calib.errors import InputError
from calib.io import _calamine_child
from calib.io.files import RawFile

__all__ = ["BASE_SECONDS", "BookData", "SheetData", "parse_workbook"]

_BASE_MEMORY = 1024**3
"""Address space allowed to the child for any workbook (1 GiB)."""

_MEMORY_PER_BYTE = 24
"""Further address space per byte of the workbook file."""

BASE_SECONDS = 15.0
"""Processor seconds allowed to the child for any workbook."""

_SECONDS_PER_MB = 1.0
"""Further processor seconds per megabyte of the workbook file."""

_WALL_FACTOR = 4.0
"""Wall-clock seconds allowed per processor second: a busy machine gives the child a
quarter of a core and it still finishes."""

_CPU_LIMITED = sys.platform != "win32"
"""Whether the child can limit its own processor time (``resource`` is POSIX only)."""

_CHILD = Path(__file__).with_name("_calamine_child.py")
_T = TypeVar("_T")


@dataclass(frozen=True)
class SheetData:
    """What the child read from one sheet.

    Attributes
    ----------
    rows : list of list, optional
        Every cell from A1 to the farthest cell, None when the sheet was too
        large to read (see ``end``) or could not be read (see ``failure``).
    end : tuple of int, optional
        0-based (row, column) of the farthest cell.
    merges : list
        Merged ranges as ((first row, first column), (last row, last column)).
    failure : tuple of str, optional
        (kind, detail) when the sheet could not be read.
    """

    rows: list[list[object]] | None = None
    end: tuple[int, int] | None = None
    merges: list[tuple[tuple[int, int], tuple[int, int]]] = field(default_factory=list)
    failure: tuple[str, str] | None = None


@dataclass(frozen=True)
class BookData:
    """What the child read from a workbook.

    Attributes
    ----------
    names : list of str
        Every sheet, in workbook order.
    worksheets : list of str
        The visible worksheets (no chart sheets), in workbook order.
    sheets : dict
        Sheet name → :class:`SheetData`.
    """

    names: list[str]
    worksheets: list[str]
    sheets: dict[str, SheetData]


class _PlainValues(pickle.Unpickler):
    """Unpickle lists, strings, numbers and the date and time types, nothing else."""

    _ALLOWED: ClassVar[frozenset[tuple[str, str]]] = frozenset(
        ("datetime", name) for name in ("datetime", "date", "time", "timedelta", "timezone"))

    def find_class(self, module: str, name: str) -> object:
        if (module, name) in self._ALLOWED:
            return getattr(datetime, name)
        raise pickle.UnpicklingError(f"{module}.{name} is not a cell value")


class Limits(NamedTuple):
    """What the child may use: address space (bytes), processor and wall-clock seconds."""

    memory: int
    cpu_seconds: int
    wall_seconds: float


def limits_for(size: int) -> Limits:
    """The limits of the child reading a workbook of ``size`` bytes.

    Examples
    --------
    >>> limits = limits_for(2_000_000)
    >>> limits.memory // 1024**2, limits.cpu_seconds, limits.wall_seconds
    (1069, 17, 68.0)
    >>> limits_for(2_500_000).cpu_seconds
    18
    """
    cpu = math.ceil(BASE_SECONDS + _SECONDS_PER_MB * size / 1e6)
    return Limits(_BASE_MEMORY + _MEMORY_PER_BYTE * size, cpu, _WALL_FACTOR * cpu)


def _address_space() -> int | None:
    """Bytes of address space this process holds now (Linux), or None where it cannot say."""
    try:
        with open("/proc/self/statm", "rb") as statm:
            pages = int(statm.read().split()[0])
        return pages * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, IndexError):
        return None


def _can_fork() -> bool:
    """Whether the child may be a forked copy of this process.

    Only where this process runs no other thread: a thread could hold a lock at the
    moment of the fork that the copy would then wait for forever.
    """
    return (hasattr(os, "fork") and sys.platform.startswith("linux")
            and threading.active_count() == 1)


class _Forked:
    """A forked child: its pid and pipes, with the few methods of ``Popen`` :class:`_Child` uses."""

    def __init__(self, pid: int, out: int, err: int) -> None:
        self.pid = pid
        self.returncode: int | None = None
        self.out, self.err = out, err

    def poll(self) -> int | None:
        if self.returncode is None:
            pid, status = os.waitpid(self.pid, os.WNOHANG)
            if pid:
                self.returncode = os.waitstatus_to_exitcode(status)
        return self.returncode

    def kill(self) -> None:
        if self.returncode is None:
            try:
                os.kill(self.pid, signal.SIGKILL)
            except ProcessLookupError:
                pass

    def wait(self, timeout: float | None = None) -> int:
        """Wait for the child to end (``Popen.wait``)."""
        deadline = None if timeout is None else time.monotonic() + timeout
        while self.poll() is None:
            if deadline is not None and time.monotonic() >= deadline:
                raise subprocess.TimeoutExpired("calamine child", timeout or 0.0)
            time.sleep(0.001)
        return self.returncode  # type: ignore[return-value]

    def close(self) -> None:
        for fd in (self.out, self.err):
            try:
                os.close(fd)
            except OSError:
                pass


class _Pipes(io.RawIOBase):
    """The child's standard output as a stream read until a deadline; its error output kept.

    Both pipes are read as data comes, so that a child writing to either never waits
    for the parent; past ``deadline`` (monotonic seconds) a read raises
    ``subprocess.TimeoutExpired``.
    """

    _ERROR_KEPT = 1 << 20  # a panic message is a few lines; more is dropped

    def __init__(self, out: int, err: int, deadline: float) -> None:
        self.out, self.err, self.deadline = out, err, deadline
        self.error = bytearray()
        self._selector = selectors.DefaultSelector()
        self._selector.register(out, selectors.EVENT_READ)
        self._selector.register(err, selectors.EVENT_READ)

    def readable(self) -> bool:
        return True

    def _wait(self) -> list[int]:
        left = self.deadline - time.monotonic()
        if left <= 0:
            raise subprocess.TimeoutExpired("calamine child", 0.0)
        ready = [key.fd for key, _ in self._selector.select(left)]
        if self.err in ready:
            chunk = os.read(self.err, 1 << 16)
            if not chunk:
                self._selector.unregister(self.err)
            elif len(self.error) < self._ERROR_KEPT:
                self.error += chunk
        return ready

    def readinto(self, buffer: Any) -> int:
        if self.out not in self._selector.get_map():
            return 0
        while self.out not in self._wait():
            pass
        read = os.readv(self.out, [buffer])
        if not read:
            self._selector.unregister(self.out)
        return read

    @property
    def at_end(self) -> bool:
        """Whether the child's standard output has been read to its end."""
        return self.out not in self._selector.get_map()

    def drain(self) -> None:
        """Read both pipes to their ends."""
        while self._selector.get_map():
            if self.out in self._wait() and not os.read(self.out, 1 << 20):
                self._selector.unregister(self.out)

    def close(self) -> None:
        self._selector.close()
        super().close()


_Book = dict[str, Any]


def _read_answer(pipes: _Pipes) -> _Book | None:
    """The child's messages read into ``{"names", "worksheets", "sheets"}`` (or ``{"failure"}``);
    None when its answer ends early or is not what :mod:`calib.io._calamine_child` sends.

    Raises
    ------
    subprocess.TimeoutExpired
        When the answer does not come in time.
    """
    buffered = io.BufferedReader(pipes, 1 << 20)
    try:
        return _messages(_PlainValues(buffered))
    finally:
        buffered.detach()  # the pipes stay open: the error output is read to its end next


def _messages(reader: _PlainValues) -> _Book | None:
    book: _Book = {"sheets": {}}
    current: dict[str, Any] = {}
    try:
        while (message := reader.load()) != ("done",):
            kind = message[0]
            if kind == "rows":
                current["rows"].extend(message[1])
            elif kind == "sheet":
                _, name, end, merges, has_rows = message
                current = {"end": end, "merges": merges, "rows": [] if has_rows else None}
                book["sheets"][str(name)] = current
            elif kind == "book":
                book["names"], book["worksheets"] = list(message[1]), list(message[2])
            elif kind == "failure" and message[1] is None:
                return {"failure": tuple(message[2])}
            elif kind == "failure":
                book["sheets"][str(message[1])] = current = {"failure": tuple(message[2])}
            else:
                return None
    except subprocess.TimeoutExpired:
        raise
    except Exception:  # noqa: BLE001 - an answer cut short or damaged is no answer
        return None
    return book if "names" in book else None


def _fork(raw: RawFile, memory: int, seconds: int, max_rows: int, max_cells: int,
          sheet: str | int | None) -> _Forked | None:
    """Fork a child that parses ``raw``; None where this process cannot say its own size."""
    held = _address_space()
    if held is None:
        return None
    import python_calamine  # noqa: F401 - loaded here once, so that every copy has it
    out_read, out_write = os.pipe()
    err_read, err_write = os.pipe()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)  # Python 3.12 on forking at all
        pid = os.fork()
    if pid == 0:  # the child: never returns into calib
        code = 70
        try:
            os.close(out_read)
            os.close(err_read)
            os.dup2(err_write, 2)  # a panic message goes to the parent, never to a terminal
            faulthandler.disable()  # (it may write to a copy of the terminal's descriptor)
            with open(out_write, "wb", buffering=1 << 20) as out:
                _calamine_child.serve(raw.data, held + memory, seconds, max_rows, max_cells,
                                      out, sheet)
            code = 0
        except BaseException:  # noqa: BLE001 - whatever happens, the copy ends here
            code = 70
        finally:
            os._exit(code)
    os.close(out_write)
    os.close(err_write)
    return _Forked(pid, out_read, err_read)


class _Child:
    """The running child: started at once, answered by :meth:`result`."""

    def __init__(self, raw: RawFile, max_rows: int, max_cells: int,
                 sheet: str | int | None = None) -> None:
        self.limits = limits_for(len(raw.data))
        self.memory = self.limits.memory
        self.started = time.monotonic()
        self.done = False
        forked = _fork(raw, self.memory, self.limits.cpu_seconds, max_rows, max_cells,
                       sheet) if _can_fork() else None
        if forked is not None:
            self.process: subprocess.Popen[bytes] | _Forked = forked
            return
        command = [sys.executable, "-P", str(_CHILD), str(self.memory),
                   str(self.limits.cpu_seconds), str(max_rows), str(max_cells)]
        if sheet is not None:
            command.append(f"#{sheet}" if isinstance(sheet, int) else f"={sheet}")
        self.process = subprocess.Popen(command, stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                        stderr=subprocess.PIPE)
        # The child reads all its input before it writes anything, so this cannot block for
        # long; its answer waits in the pipe while the parent runs its own checks (reading
        # it meanwhile in a thread would only take turns with them).
        try:
            self.process.stdin.write(raw.data)  # type: ignore[union-attr]
            self.process.stdin.close()  # type: ignore[union-attr]
        except OSError:  # the child ended early; its return code will say how
            pass
        self.process.stdin = None  # communicate() must not touch the closed pipe

    def _fds(self) -> tuple[int, int]:
        if isinstance(self.process, _Forked):
            return self.process.out, self.process.err
        return self.process.stdout.fileno(), self.process.stderr.fileno()  # type: ignore[union-attr]

    def _close(self) -> None:
        if isinstance(self.process, _Forked):
            self.process.close()
        else:
            self.process.stdout.close()  # type: ignore[union-attr]
            self.process.stderr.close()  # type: ignore[union-attr]

    def stop(self) -> None:
        """End the child if it still runs (the parent refused the file, or gave up)."""
        if self.done:
            return
        if self.process.poll() is None:
            self.process.kill()
        self._close()
        self.process.wait()
        self.done = True

    def result(self) -> tuple[int, _Book | None, bytes] | None:
        """Return code, answer (None when cut short or damaged) and error output; None when
        the wall-clock limit passed.

        The answer is read as the child sends it, so the first rows are unpickled here
        while the child is still making the last.  A child that finished while the parent
        was still checking waits to hand over its answer, so it gets a moment after the
        checks however long they took (a child that spins meanwhile has used up its
        processor-time limit already).
        """
        now = time.monotonic()
        left = max(self.started + self.limits.wall_seconds - now, min(2.0, now - self.started),
                   0.0)
        pipes = _Pipes(*self._fds(), now + left)
        try:
            answer = _read_answer(pipes)
            damaged = answer is None and not pipes.at_end
            if damaged:
                self.process.kill()  # an answer not as sent: nothing more to read from it
            pipes.drain()
            code = self.process.wait(timeout=max(pipes.deadline - time.monotonic(), 0.0))
        except subprocess.TimeoutExpired:
            pipes.close()
            self.stop()
            return None
        pipes.close()
        self._close()
        self.done = True
        return (0 if damaged else code), answer, bytes(pipes.error)


def parse_workbook(raw: RawFile, *, what: str, max_rows: int, max_cells: int,
                   checks: Callable[[], _T], sheet: str | int | None = None
                   ) -> tuple[BookData, _T]:
    """Parse ``raw`` in a child process while ``checks`` runs here; return both results.

    Parameters
    ----------
    raw : RawFile
        The workbook.
    what : str
        What the file should be, for messages (``"an .xlsx workbook"``).
    max_rows, max_cells : int
        Sheets reaching past these are not read (their ``end`` says how far they reach).
    checks : callable
        Run in this process meanwhile; when it raises, the child is stopped.
    sheet : str or int, optional
        The one sheet whose cells are wanted (a name, in any case, or a 0-based
        index); the others are listed but not parsed (their ``rows`` are None).

    Raises
    ------
    InputError
        When the child runs out of time or memory, stops on damaged data, or
        the workbook as a whole cannot be read.  Out of processor time means a
        parser spinning on damaged data; out of wall-clock time with processor
        time to spare means a machine too busy to finish, and the message says
        so (try again) instead of blaming the file.
    """
    child = _Child(raw, max_rows, max_cells, sheet)
    try:
        checked = checks()
        outcome = child.result()
    finally:
        child.stop()
    if outcome is None:
        raise _out_of_wall_time(raw, what, child.limits)
    code, answer, err = outcome
    if code != 0 or answer is None:
        raise _ended(raw, what, code, err, child.limits)
    if "failure" in answer:
        raise failure_error(raw, what, tuple(answer["failure"]), memory=child.memory)
    sheets = {name: SheetData(rows=s.get("rows"), end=s.get("end"),
                              merges=list(s.get("merges", [])),
                              failure=tuple(s["failure"]) if "failure" in s else None)
              for name, s in answer["sheets"].items()}
    return BookData(list(answer["names"]), list(answer["worksheets"]), sheets), checked


def _out_of_wall_time(raw: RawFile, what: str, limits: Limits) -> InputError:
    """The refusal when the wall clock ran out before the child finished."""
    if not _CPU_LIMITED:  # no processor-time limit here: the wall clock alone cannot tell
        return InputError(
            f"cannot be read as a workbook (reading it took longer than "
            f"{limits.wall_seconds:g} s, the limit for a file of this size: the file is "
            f"damaged, or the machine too busy; try again); expected {what} saved by a "
            f"spreadsheet program",
            file=raw.given,
        )
    return InputError(
        f"was not read in time: the workbook reader was stopped after {limits.wall_seconds:g} "
        f"s, the wait allowed for a file of this size, before it had used its "
        f"{limits.cpu_seconds} s of processor time, so the machine was too busy to finish it "
        f"(which says nothing against the file); try again, when the machine is less busy",
        file=raw.given,
    )


def _ended(raw: RawFile, what: str, code: int, err: bytes, limits: Limits) -> InputError:
    memory_words = (b"memory allocation", b"MemoryError", b"out of memory", b"capacity overflow")
    out_of_time = {-getattr(signal, name) for name in ("SIGXCPU", "SIGKILL")
                   if hasattr(signal, name)}
    if code in out_of_time and b"memory" not in err:
        return InputError(
            f"cannot be read as a workbook (the reader used up the {limits.cpu_seconds} s of "
            f"processor time allowed for a file of this size, going round data it could not "
            f"finish: the file is damaged or not what its name says); expected {what} saved "
            f"by a spreadsheet program",
            file=raw.given,
        )
    memory = limits.memory
    if any(word in err for word in memory_words) or code == -signal.SIGABRT:
        return failure_error(raw, what, ("memory", ""), memory=memory)
    return failure_error(raw, what, ("panic", ""), memory=memory)


def failure_error(raw: RawFile, what: str, failure: tuple[str, ...], *, memory: int,
                  sheet: str | None = None) -> InputError:
    """The one-line refusal for a failure the child reported (kind, detail)."""
    kind, detail = failure[0], failure[1] if len(failure) > 1 else ""
    if kind == "password":
        text = (f"the workbook is password-protected; expected {what} without a password "
                f"(save an unprotected copy)")
    elif kind == "memory":
        text = (f"cannot be read as a workbook (reading it needed more than the "
                f"{memory // 1024**2:,} MB of memory calib allows for a file of this size; "
                f"a stray cell far from the table, or a damaged file?); expected {what} saved "
                f"by a spreadsheet program")
    elif kind == "panic":
        text = (f"cannot be read as a workbook (the reader stopped at data it could not "
                f"follow; the file is damaged); expected {what} saved by a spreadsheet program")
    else:
        text = (f"cannot be read as a workbook ({detail}); expected {what} saved by a "
                f"spreadsheet program")
    return InputError(text, file=raw.given, sheet=sheet)
