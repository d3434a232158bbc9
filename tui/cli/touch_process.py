"""P(touch) of a big chain computed by a second process, streamed to `table`'s writer a few expiries at a time.

The touch figures (core ``AnnotatedSnapshot.compute_touch_many``: local-vol
Crank-Nicolson and the model-free bounds, ~0.5 s of CPU at 200,000 contracts,
plus ~0.1 s importing scipy.linalg) hold the interpreter, so a thread cannot run
them beside the writer. On Linux, with two or more cores, no other Python thread
running, inputs of at least ``MIN_INPUT_BYTES`` and a core idle at that moment,
``serve`` forks at the command's start: the child imports the touch modules
while the parent loads and annotates, then waits. As soon as a snapshot's smiles
are fitted (``annotate``'s ``smiles_ready``), ``TouchServer.submit`` sends it the
touch inputs (``pipeline.TouchSource.inputs``: strikes, times, forwards, smiles;
at least ``MIN_CONTRACTS`` contracts, else the caller computes in-process) cut
into chunks of whole expiries in row order (about ``CHUNK_ROWS`` contracts each).
The child answers each chunk with ``expiries_touch`` of its expiries as soon as
they are computed: the same code on the same inputs, and the expiries of one
call are independent of each other (``touch_local_vol_many`` steps them side by
side in one tridiagonal system, block by block), so the figures are the same to
the bit as one call over all of them. The csv and json writers format a block's
other columns and ask for the touch columns of that block's rows
(``TouchColumns.rows``), waiting only for the chunks that cover them; plain asks
for all of them once its other columns are coded (its widths need every cell).
The parent never imports the touch equations (scipy.linalg) then, unless it
shares the work: when a wait covers every chunk left (plain's ask, ``finish``),
the child has not answered the next one yet and at least ``SHARE_MIN_ROWS``
contracts are unanswered (or the touch modules are imported here already), the
parent computes the last chunks itself, whole chunks from the end backwards with
the same ``expiries_touch`` on the same inputs (the same bits), checking between
its chunks for the child's answers and always leaving it the chunk it works on,
until the two meet. The child is then told to stop (``TouchServer.stop``): it
checks between chunks, and answers ``STOPPED`` after its last answer; the
answers it sent for chunks the parent did are read and dropped before the next
request (``TouchServer._stopped``; no ``STOPPED`` within ``CHILD_SECONDS``: it
is killed). The csv and json writers' waits for a block are short (the child
keeps ahead): they do not share (importing scipy.linalg, ~0.2 s, would cost
more than they wait). ``SHARE = False`` turns sharing off.

The parent never depends on the child: when the child fails, dies, answers
something unreadable or takes longer than ``CHILD_SECONDS``, it is killed and
the expiries not answered yet are computed here (together, as they would have
been). The child is killed and reaped when `table` ends (``TouchServer.close``),
at exit (Ctrl-C, a broken pipe, an error) and dies with its parent (Linux's
parent-death signal), so none is left behind. Elsewhere (Windows, macOS, one
core) ``serve`` returns None and everything is computed in-process.

``CHAINTRIAGE_TOUCH_PROCESS``: ``0`` never forks, ``1`` forks whatever the
chain's size and the load (where forking is possible at all); unset, by size and load.
"""

from __future__ import annotations

import atexit
import os
import pickle
import select
import signal
import struct
import sys
import threading
import time

import numpy as np

#: Fewer contracts than this in the asked expiries: computed in-process (the fork and the pipe would
#: cost more than the overlap gains: measured on two cores, `table --format csv` at 5,000 and 10,000
#: contracts was no faster with the second process, at 20,000 and more it was).
MIN_CONTRACTS = 20_000

#: Inputs of fewer bytes than this: no second process is started (about 19,000 contracts of csv).
MIN_INPUT_BYTES = 1_500_000

#: Contracts per chunk the child answers at once (whole expiries: a chunk closes once it holds this many).
CHUNK_ROWS = 10_000

#: The child's time limit (seconds, from a request): past it the figures are computed in-process.
CHILD_SECONDS = 60.0

#: Unanswered contracts a wait for all of them must leave for the parent to start sharing the work while
#: the touch modules are not imported here yet: importing them (scipy.linalg) costs the parent ~0.2 s, in
#: which the child computes ~60,000 contracts (~3 us each); sharing gains about half of what is left past
#: that. Measured at 200,000 contracts, plain waited with ~150,000 unanswered: 4.06x to 3.77x read_csv.
SHARE_MIN_ROWS = 80_000

#: Whether the parent shares the rest of the work when it would wait for all of it (``PendingTouch.wait``).
SHARE = True

#: The environment variable that forces the second process off (``0``) or on whatever the size (``1``).
SWITCH = "CHAINTRIAGE_TOUCH_PROCESS"

#: The columns the child computes.
TOUCH_COLUMNS = ("p_touch", "p_touch_low", "p_touch_high")

_HEADER = struct.Struct("<Q")

#: Bytes the answers' pipe is asked to hold (Linux's F_SETPIPE_SZ; an unprivileged process may ask up
#: to 1 MiB): the child computes a few chunks ahead while the parent formats, not blocked in a write.
PIPE_BYTES = 1 << 20


def _cores() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        return os.cpu_count() or 1


def _idle_core() -> bool:
    """Whether a core has nothing to run besides this process right now (Linux's count of runnable
    threads, ``procs_running`` in /proc/stat, this one included, below the cores). On a machine
    whose cores are all busy the two processes would share them with the others: the figures come
    no sooner and cost more CPU (cache and switches). True when the count cannot be read."""
    try:
        with open("/proc/stat", "rb") as fh:
            for line in fh:
                if line.startswith(b"procs_running "):
                    return int(line.split()[1]) < _cores()
    except (OSError, ValueError, IndexError):
        pass
    return True


def usable(contracts: int) -> bool:
    """Whether a second process would compute the touch figures of ``contracts`` contracts."""
    switch = os.environ.get(SWITCH, "").strip()
    if switch == "0":
        return False
    if not sys.platform.startswith("linux") or not hasattr(os, "fork") or _cores() < 2:
        return False
    if threading.active_count() != 1:  # forking copies only this thread: another may hold a lock
        return False
    return switch == "1" or contracts >= MIN_CONTRACTS


def worth_forking(input_bytes: int) -> bool:
    """Whether ``serve`` starts a second process for inputs of ``input_bytes``: ``usable``, at least
    ``MIN_INPUT_BYTES`` and a core idle now (``_idle_core``), or the switch on."""
    if os.environ.get(SWITCH, "").strip() == "1":
        return usable(0)
    return input_bytes >= MIN_INPUT_BYTES and usable(MIN_CONTRACTS) and _idle_core()


def serve(input_bytes: int) -> TouchServer | None:
    """A second process forked now, at the command's start, importing the touch modules (scipy.linalg)
    while this one loads and annotates; it then computes what ``TouchServer.submit`` sends it. None
    when it is not worth it (inputs under ``MIN_INPUT_BYTES``, see ``usable``) or cannot start."""
    if not worth_forking(input_bytes):
        return None
    try:
        ask_r, ask_w = os.pipe()
        answer_r, answer_w = os.pipe()
    except OSError:
        return None
    try:  # room for several chunks' answers (the default 64 KiB holds less than one)
        import fcntl

        fcntl.fcntl(answer_r, getattr(fcntl, "F_SETPIPE_SZ", 1031), PIPE_BYTES)
    except (ImportError, OSError):
        pass
    parent = os.getpid()
    try:
        pid = os.fork()
    except OSError:
        for fd in (ask_r, ask_w, answer_r, answer_w):
            os.close(fd)
        return None
    if pid == 0:  # the child: never returns
        os.close(ask_w)
        os.close(answer_r)
        _child(ask_r, answer_w, parent)
    os.close(ask_r)
    os.close(answer_w)
    os.set_blocking(ask_w, False)  # a request is written as the child takes it, up to a deadline
    return TouchServer(pid, ask_w, answer_r)


def _child(ask: int, answer: int, parent: int) -> None:
    """Import, then answer each request chunk by chunk until the parent closes its end; exit (never
    running the parent's exit handlers or flushing its buffers)."""
    status = 1
    try:
        import gc

        gc.disable()  # a short life: a collection would only copy the parent's pages
        signal.signal(signal.SIGINT, signal.SIG_DFL)  # Ctrl-C ends the child at once
        signal.signal(signal.SIGPIPE, signal.SIG_DFL)
        _die_with(parent)
        null = os.open(os.devnull, os.O_WRONLY)  # the table's reader sees its end when the parent ends
        os.dup2(null, 1)
        os.close(null)
        from chaintriage.core import touch_expiry, touch_local_vol  # noqa: F401 - scipy.linalg, now

        while True:
            message = _read_message(ask, None)
            if message is None:  # the parent has finished (or gone)
                break
            request = pickle.loads(message)
            if request is None:  # a stop after the request's last answer: acknowledged
                if not _write_message(answer, STOPPED, None):
                    break
                continue
            args, kwargs, chunks = request
            for chunk in chunks:
                if _stop_asked(ask):  # the parent has the rest: acknowledged, the request dropped
                    _write_message(answer, STOPPED, None)
                    break
                got = _computed(*_chunk_inputs(args, kwargs, chunk))
                if not _write_message(answer, pickle.dumps(got, protocol=pickle.HIGHEST_PROTOCOL), None):
                    break
        status = 0
    except BaseException:  # noqa: BLE001 - whatever it is, the parent computes the figures itself
        pass
    finally:
        os._exit(status)


#: The child's answer to a stop (``TouchServer.stop``): an empty message, after the request's last answer.
STOPPED = b""

#: A stop, as the parent sends it (a request of None).
_STOP = pickle.dumps(None)


def _stop_asked(ask: int) -> bool:
    """Whether the parent has sent a stop (read here; nothing else comes while a request is under way)."""
    if not select.select([ask], [], [], 0)[0]:
        return False
    message = _read_message(ask, None)
    if message is None or pickle.loads(message) is not None:
        raise EOFError("the parent has gone, or sent something other than a stop")
    return True


def _chunk_inputs(args: tuple, kwargs: dict, chunk: list[int]) -> tuple[tuple, dict]:
    """``expiries_touch``'s arguments for the expiries ``chunk`` (positions in ``args``' lists)."""
    strikes, spot, t, forwards, smiles, indices, vols = args
    sub = dict(kwargs)
    if sub.get("labels") is not None:
        sub["labels"] = [sub["labels"][j] for j in chunk]
    return ([strikes[j] for j in chunk], spot, t, forwards, smiles, [indices[j] for j in chunk],
            [vols[j] for j in chunk]), sub


def _computed(args: tuple, kwargs: dict) -> list:
    """The child's work for one chunk: ``expiries_touch`` (kept apart so a test can make it fail)."""
    from chaintriage.core.touch_expiry import expiries_touch

    return expiries_touch(*args, **kwargs)


def _read_message(fd: int, deadline: float | None) -> bytes | None:
    """One length-prefixed message; None at the pipe's end or past ``deadline`` (time.monotonic)."""
    header = _read(fd, _HEADER.size, deadline)
    return None if header is None else _read(fd, _HEADER.unpack(header)[0], deadline)


def _read(fd: int, n: int, deadline: float | None) -> bytes | None:
    parts, left = [], n
    while left:
        if deadline is not None:
            wait = deadline - time.monotonic()
            if wait <= 0 or not select.select([fd], [], [], wait)[0]:
                return None
        chunk = os.read(fd, min(left, 1 << 20))
        if not chunk:
            return None
        parts.append(chunk)
        left -= len(chunk)
    return b"".join(parts)


class _Inbox:
    """The parent's end of the answers' pipe, read without blocking into a buffer whenever the writer
    asks (``pump``), so the child seldom waits for room in the pipe."""

    def __init__(self, fd: int) -> None:
        self.fd = fd
        self.buffer = bytearray()
        self.ended = False
        os.set_blocking(fd, False)

    def pump(self) -> None:
        """Whatever the pipe holds now, moved into the buffer."""
        while not self.ended:
            try:
                data = os.read(self.fd, 1 << 20)
            except BlockingIOError:
                return
            except OSError:
                data = b""
            if not data:
                self.ended = True
                return
            self.buffer += data

    def ready(self) -> bool:
        """Whether a whole message is here now (the pipe read first)."""
        self.pump()
        return len(self.buffer) >= _HEADER.size and len(self.buffer) >= _HEADER.size + _HEADER.unpack_from(self.buffer)[0]

    def message(self, deadline: float) -> bytes | None:
        """The next length-prefixed message; None at the pipe's end or past ``deadline`` (time.monotonic)."""
        while True:
            self.pump()
            if len(self.buffer) >= _HEADER.size:
                size = _HEADER.size + _HEADER.unpack_from(self.buffer)[0]
                if len(self.buffer) >= size:
                    data = bytes(self.buffer[_HEADER.size:size])
                    del self.buffer[:size]
                    return data
            wait = deadline - time.monotonic()
            if self.ended or wait <= 0:
                return None
            try:
                select.select([self.fd], [], [], wait)
            except (OSError, ValueError):
                return None


def _write_message(fd: int, data: bytes, deadline: float | None) -> bool:
    """Write a length-prefixed message; False when the reader has gone or past ``deadline``."""
    view = memoryview(_HEADER.pack(len(data)) + data)
    try:
        while view:
            try:
                view = view[os.write(fd, view):]
                continue
            except BlockingIOError:  # (a non-blocking pipe, full)
                pass
            wait = None if deadline is None else deadline - time.monotonic()
            if (wait is not None and wait <= 0) or not select.select([], [fd], [], wait)[1]:
                return False
    except OSError:  # EPIPE: the reader has gone
        return False
    return True


def _die_with(parent: int) -> None:
    """Ask Linux to end this process when its parent ends (prctl PR_SET_PDEATHSIG); exit if the
    parent has already gone."""
    try:
        import ctypes

        ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGKILL, 0, 0, 0)  # 1: PR_SET_PDEATHSIG
    except (OSError, AttributeError):
        pass
    if os.getppid() != parent:
        os._exit(1)


#: Second processes not reaped yet: pid -> their pipe ends here (killed and reaped at exit).
_LIVE: dict[int, tuple[int, ...]] = {}


def _reap_all() -> None:
    for pid in list(_LIVE):
        _end(pid)


atexit.register(_reap_all)


def _end(pid: int) -> int | None:
    """Close the pipes to a child, kill it and reap it; its wait status, None if unknown."""
    for fd in _LIVE.pop(pid, ()):
        try:
            os.close(fd)
        except OSError:
            pass
    try:
        os.kill(pid, signal.SIGKILL)
    except OSError:
        pass
    try:
        return os.waitpid(pid, 0)[1]
    except (ChildProcessError, OSError):
        return None


def chunks_of(rows: list[np.ndarray], size: int) -> list[list[int]]:
    """Consecutive expiries (positions in ``rows``, each expiry's rows) grouped into chunks of at
    least ``size`` rows (the last may hold fewer)."""
    chunks: list[list[int]] = []
    current, held = [], 0
    for j, r in enumerate(rows):
        current.append(j)
        held += len(r)
        if held >= size:
            chunks.append(current)
            current, held = [], 0
    if current:
        chunks.append(current)
    return chunks


class TouchServer:
    """The second process (``serve``): ``submit`` sends it a snapshot's touch inputs; ``close`` ends it."""

    def __init__(self, pid: int, ask: int, answer: int) -> None:
        self.pid, self.ask, self.answer = pid, ask, answer
        self.inbox = _Inbox(answer)
        self.alive = True
        self.pending: PendingTouch | None = None
        self.stopping = False  # a stop sent, its acknowledgement (``STOPPED``) not read yet
        _LIVE[pid] = (ask, answer)

    def submit(self, source, expiries) -> PendingTouch | None:
        """The touch figures of ``expiries`` of a snapshot being annotated (``source``: its
        ``pipeline.TouchSource``, as ``annotate`` hands it to ``smiles_ready``) being computed by the
        second process, or None when the caller should compute them (``touch_many``): fewer than
        ``MIN_CONTRACTS`` contracts, nothing to compute, or the second process gone. The annotated
        snapshot is then given to the answer (``PendingTouch.attach``)."""
        self.finish()  # one request at a time
        self._stopped()
        if not self.alive:
            return None
        todo, args, kwargs = source.inputs(expiries)
        if not todo or not usable(sum(len(k) for k in args[0])):
            return None
        rows = [source.rows_of(e) for e in todo]
        chunks = chunks_of(rows, CHUNK_ROWS)
        deadline = time.monotonic() + CHILD_SECONDS
        try:
            message = pickle.dumps((args, kwargs, chunks), protocol=pickle.HIGHEST_PROTOCOL)
        except Exception:  # noqa: BLE001 - inputs that cannot be sent: computed here
            return None
        if not _write_message(self.ask, message, deadline):
            self.close()
            return None
        self.pending = PendingTouch(self, todo, rows, chunks, deadline, len(source.strikes), args, kwargs)
        return self.pending

    def stop(self) -> None:
        """Tell the child to drop the request under way (the parent has computed the rest): it answers
        ``STOPPED`` after its last answer, read before the next request (``_stopped``). Closed when the
        stop cannot be sent."""
        if self.alive and not self.stopping:
            self.stopping = True
            if not _write_message(self.ask, _STOP, time.monotonic() + 1.0):
                self.close()

    def _stopped(self) -> None:
        """The answers the child sent before its ``STOPPED`` read and dropped; closed when it does not come
        in ``CHILD_SECONDS``."""
        if not (self.alive and self.stopping):
            return
        deadline = time.monotonic() + CHILD_SECONDS
        while True:
            message = self.inbox.message(deadline)
            if message is None:
                self.close()
                return
            if message == STOPPED:
                self.stopping = False
                return

    def finish(self) -> None:
        """The request under way, if any, finished: its figures written into its snapshot."""
        if self.pending is not None:
            self.pending.finish()

    def close(self) -> None:
        """End the second process (killed: whatever it was doing is not needed any more) and reap it.
        Chunks not answered yet are then computed here when asked for."""
        if self.alive:
            self.alive = False
            _end(self.pid)


class PendingTouch:
    """Touch figures being computed by the second process (``TouchServer.submit``), chunk by chunk,
    for the annotated snapshot given to ``attach`` (before anything else is asked).

    ``wait(n)`` takes the first ``n`` chunks (the child's, or computed here when the child fails);
    ``columns(keep)`` hands the touch columns of the selected rows to a writer; ``finish`` takes the
    rest and writes every figure and finding into the annotated snapshot (``apply_touch``, in the
    order ``touch_many`` would)."""

    def __init__(self, server: TouchServer, todo: list, rows: list, chunks: list, deadline: float, n: int,
                 args: tuple, kwargs: dict) -> None:
        self.server, self.todo, self.rows, self.chunks = server, todo, rows, chunks
        self.args, self.kwargs = args, kwargs  # the request's inputs (``expiries_touch``'s arguments)
        self.a = None
        self.deadline = deadline
        self.got: list = [None] * len(todo)  # each expiry's ExpiryTouch (None: not yet, or nothing)
        self.taken = 0  # chunks taken so far from the front (the child's, in order)
        self.tail = len(chunks)  # chunks from here on computed here while the child worked (``_share``)
        self.done = False
        self.from_child = 0  # chunks the child answered
        self.shared = 0  # chunks computed here while the child worked
        #: the chunk that holds each contract row (-1: none, nothing to wait for)
        self.chunk_of_row = np.full(n, -1, dtype=np.int64)
        for c, chunk in enumerate(chunks):
            for j in chunk:
                self.chunk_of_row[rows[j]] = c
        #: the touch columns over every contract row (NaN where nothing is computed), filled as chunks come
        self.values = {name: np.full(n, np.nan) for name in TOUCH_COLUMNS}

    def attach(self, a) -> None:
        """The annotated snapshot the figures are for (``annotate``'s result)."""
        self.a = a

    def wait(self, n: int) -> None:
        """The first ``n`` chunks taken (waiting for the child, or computed here when it fails). When
        ``n`` covers every chunk left and the child has not answered the next one yet, this process
        computes the last ones meanwhile (``_share``), from the end backwards, until the two meet."""
        n = min(n, len(self.chunks))
        while self.taken < min(n, self.tail):
            if n >= self.tail and self._share_now():
                self._share()
                continue
            chunk = self.chunks[self.taken]
            got = self._receive(len(chunk))
            if got is None:  # the child failed: what is left computed here, together
                self._compute_rest()
                return
            self.from_child += 1
            self._take(chunk, got)
            self.taken += 1
        if self.taken == self.tail < len(self.chunks):  # met in the middle: the child's request dropped
            self.taken = len(self.chunks)
            self.server.stop()

    def _share_now(self) -> bool:
        """Whether to compute the last chunk not taken here now: sharing on, the child alive, working on
        the next chunk (no answer waiting) with another left behind it, and either the touch modules
        imported here already or at least ``SHARE_MIN_ROWS`` contracts unanswered."""
        if not (SHARE and self.server.alive and self.tail - self.taken >= 2) or self.server.inbox.ready():
            return False
        return "chaintriage.core.touch_local_vol" in sys.modules or sum(
            len(self.rows[j]) for c in self.chunks[self.taken:self.tail] for j in c) >= SHARE_MIN_ROWS

    def _share(self) -> None:
        """The last chunk not taken computed here: ``expiries_touch`` on the chunk's inputs, as the child
        would (the same bits)."""
        from chaintriage.core.touch_expiry import expiries_touch

        chunk = self.chunks[self.tail - 1]
        args, kwargs = _chunk_inputs(self.args, self.kwargs, chunk)
        self._take(chunk, expiries_touch(*args, **kwargs))
        self.tail -= 1
        self.shared += 1

    def _take(self, chunk: list[int], got: list) -> None:
        for j, figures in zip(chunk, got):
            self.got[j] = figures
            if figures is not None:
                for name, arr in zip(TOUCH_COLUMNS, (figures.p_touch, figures.low, figures.high)):
                    self.values[name][self.rows[j]] = arr

    def _compute_rest(self) -> None:
        rest = [j for chunk in self.chunks[self.taken:self.tail] for j in chunk]
        if rest:
            computed = self.a.compute_touch_many([self.todo[j] for j in rest])
            for chunk in self.chunks[self.taken:self.tail]:
                self._take(chunk, [computed.get(self.todo[j]) for j in chunk])
        self.taken = len(self.chunks)

    def _receive(self, count: int) -> list | None:
        """The child's figures of the next chunk (``count`` expiries), or None when it failed (it is
        then killed and reaped)."""
        got = None
        if self.server.alive:
            try:
                message = self.server.inbox.message(self.deadline)
                got = pickle.loads(message) if message is not None else None
            except Exception:  # noqa: BLE001 - anything unreadable: computed here instead
                got = None
        if not (isinstance(got, list) and len(got) == count and all(_is_figures(g) for g in got)):
            self.server.close()
            return None
        return got

    def finish(self) -> None:
        """Every chunk taken, the figures and findings written into the snapshot (``apply_touch``)."""
        if self.done:
            return
        self.wait(len(self.chunks))
        self.done = True
        if self.server.pending is self:
            self.server.pending = None
        self.a.apply_touch({e: g for e, g in zip(self.todo, self.got) if g is not None})

    def columns(self, keep) -> TouchColumns:
        """The touch columns of the rows ``keep`` (a boolean mask over the snapshot's contracts) for a
        writer (``table_output.LateColumns``)."""
        return TouchColumns(self, np.flatnonzero(np.asarray(keep, dtype=bool)))


def _is_figures(got) -> bool:
    """Whether ``got`` is one expiry's answer: an ``ExpiryTouch`` (or None, nothing computed)."""
    if got is None:
        return True
    from chaintriage.core.touch_expiry import ExpiryTouch

    return isinstance(got, ExpiryTouch)


class TouchColumns:
    """``table_output.LateColumns``: the touch figures of the selected rows (``positions`` in the
    snapshot's contracts), filled as the writer asks for them."""

    names = TOUCH_COLUMNS

    def __init__(self, pending: PendingTouch, positions: np.ndarray) -> None:
        self.pending, self.positions = pending, positions
        self.known = 0
        self._values = {name: np.full(positions.size, np.nan) for name in self.names}

    def rows(self, stop: int) -> dict[str, np.ndarray]:
        if self.pending.server.alive:  # answers come in meanwhile: the child is not held up by a full pipe
            self.pending.server.inbox.pump()
        stop = min(int(stop), self.positions.size)
        if stop > self.known:
            at = self.positions[self.known:stop]
            self.pending.wait(int(self.pending.chunk_of_row[at].max()) + 1)
            for name in self.names:
                self._values[name][self.known:stop] = self.pending.values[name][at]
            self.known = stop
        return self._values
