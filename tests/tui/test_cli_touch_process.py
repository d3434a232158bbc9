"""`table` with P(touch) computed by a second process and streamed to the writer (tui/cli/touch_process.py).

The second process runs the same code on the same inputs, a few expiries at a
time, so the output must be byte for byte the output of the in-process path
[D] (the in-process path's figures are checked against outside oracles in
tests/core/test_touch*.py); when the child fails in any way, at any chunk, the
rest is computed in-process and the output is the same again; no child process
is left behind (the process table of the system, read in /proc [C]).
"""

from __future__ import annotations

import io
import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from chaintriage.tui.cli import main as cli
from chaintriage.tui.cli import table_output as to
from chaintriage.tui.cli import touch_process as tp
from chaintriage.tui.cli.demo_path import demo_folder

linux_only = pytest.mark.skipif(not sys.platform.startswith("linux") or tp._cores() < 2,
                                reason="a second process is used on Linux with two or more cores only")


def demo_files() -> list[str]:
    folder = Path(demo_folder())
    return [str(folder / "ospx_2026-12-01.csv"), str(folder / "tsbh_2026-12-01.csv"),
            str(folder / "messy_export.csv")]


def children_of(pid: int) -> list[int]:
    """Processes whose parent is ``pid`` and that still run (zombies left out), from /proc."""
    found = []
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            stat = Path(f"/proc/{entry}/stat").read_text()
        except OSError:
            continue
        fields = stat.rsplit(")", 1)[1].split()
        if int(fields[1]) == pid and fields[0] != "Z":
            found.append(int(entry))
    return found


def _gone(pid: int, seconds: float = 10.0) -> bool:
    """Whether ``pid`` has ended (gone, or a zombie waiting for its new parent)."""
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        try:
            state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
        except OSError:
            return True
        if state in ("Z", "X"):
            return True
        time.sleep(0.05)
    return False


@pytest.fixture
def spy(monkeypatch):
    """Records, for each request finished: (its chunks, how many the child answered). The parent's sharing
    is off (the child answers every chunk; sharing is tested with ``shares``)."""
    seen: list[tuple[int, int]] = []
    original = tp.PendingTouch.finish
    monkeypatch.setattr(tp, "SHARE", False)

    def finish(self):
        first = not self.done
        original(self)
        if first:
            seen.append((len(self.chunks), self.from_child))

    monkeypatch.setattr(tp.PendingTouch, "finish", finish)
    return seen


def run_table(capsysbinary, monkeypatch, switch: str, *argv: str) -> tuple[int, bytes, bytes]:
    monkeypatch.setenv(tp.SWITCH, switch)
    code = cli.main(["table", *argv])
    out, err = capsysbinary.readouterr()
    return code, out, err


def only_thread() -> None:
    if threading.active_count() != 1:
        pytest.skip("another thread runs in this process: it would not fork")


@linux_only
@pytest.mark.parametrize("fmt", ["csv", "plain", "json"])
@pytest.mark.parametrize("block_rows, chunk_rows", [(64, 150), (20_000, 1)])
def test_the_same_bytes_with_and_without_the_second_process(fmt, block_rows, chunk_rows, capsysbinary,
                                                            monkeypatch, spy):
    only_thread()
    monkeypatch.setattr(to, "BLOCK_ROWS", block_rows)  # small blocks: many asks while the child computes
    monkeypatch.setattr(tp, "CHUNK_ROWS", chunk_rows)  # small chunks: many answers per snapshot
    files = demo_files()
    here = run_table(capsysbinary, monkeypatch, "0", *files, "--format", fmt)
    assert spy == []
    apart = run_table(capsysbinary, monkeypatch, "1", *files, "--format", fmt)
    assert apart == here  # exit status, stdout and the findings on stderr
    assert len(here[1]) > 100_000 and b"touch" in here[2]  # a real table, with touch findings among the rest
    # one request per snapshot (three files), the chains in several chunks, all answered by the child
    assert len(spy) == 3 and all(answered == chunks for chunks, answered in spy)
    assert min(spy[0][0], spy[1][0]) > (3 if chunk_rows > 1 else 8)
    assert children_of(os.getpid()) == []
    assert tp._LIVE == {}


@linux_only
def test_the_compared_chain_has_touch_figures_on_both_sides_of_several_expiries(capsysbinary, monkeypatch):
    only_thread()
    code, out, _ = run_table(capsysbinary, monkeypatch, "1", demo_files()[0], "--format", "csv")
    frame = pd.read_csv(io.BytesIO(out))
    with_touch = frame[frame["p_touch"].notna()]
    assert with_touch["expiry"].nunique() >= 5
    assert set(with_touch["kind"]) == {"call", "put"}
    assert ((with_touch["p_touch"] > 0.01) & (with_touch["p_touch"] < 0.99)).sum() > 100


@linux_only
@pytest.mark.parametrize("fmt", ["csv", "plain", "json"])
def test_expiry_side_and_beyond_choices_with_the_second_process(fmt, capsysbinary, monkeypatch, spy):
    only_thread()
    monkeypatch.setattr(to, "BLOCK_ROWS", 32)
    monkeypatch.setattr(tp, "CHUNK_ROWS", 50)
    argv = [demo_files()[0], "--format", fmt, "--expiry", "2026-12-18", "--expiry", "2027-01-15",
            "--side", "puts", "--beyond", "0.5"]
    here = run_table(capsysbinary, monkeypatch, "0", *argv)
    apart = run_table(capsysbinary, monkeypatch, "1", *argv)
    assert here[0] == 0 and apart == here and here[1].count(b"\n") > 20
    assert len(spy) == 1 and spy[0][0] == 2 and spy[0][1] == 2  # the two asked expiries only


def test_small_chains_and_the_switch_stay_in_process(capsysbinary, monkeypatch, spy):
    monkeypatch.delenv(tp.SWITCH, raising=False)
    assert not tp.usable(tp.MIN_CONTRACTS - 1)
    assert tp.serve(tp.MIN_INPUT_BYTES - 1) is None
    code = cli.main(["table", demo_files()[0], "--format", "csv"])  # 1,136 contracts
    assert code == 0 and spy == []
    monkeypatch.setenv(tp.SWITCH, "0")
    assert not tp.usable(10 ** 9)
    assert tp.serve(10 ** 9) is None


def test_chunks_are_whole_expiries_in_order():
    rows = [np.arange(n) for n in (5, 5, 1, 12, 3, 3)]
    assert tp.chunks_of(rows, 10) == [[0, 1], [2, 3], [4, 5]]
    assert tp.chunks_of(rows, 1) == [[0], [1], [2], [3], [4], [5]]
    assert tp.chunks_of(rows, 10 ** 6) == [[0, 1, 2, 3, 4, 5]]


#: The chunk (counted in the child) from which a failing child fails.
FAIL_FROM = 3
_asked = [0]


def _failing(fail):
    """``_computed`` answering the first chunks, then failing with ``fail`` (run in the child)."""
    original = tp._computed

    def computed(args, kwargs):
        _asked[0] += 1
        if _asked[0] >= FAIL_FROM:
            return fail(args, kwargs)
        return original(args, kwargs)

    return computed


def _raise(args, kwargs):
    raise RuntimeError("the child fails")


def _exit_silently(args, kwargs):
    os._exit(0)


class _Unreadable:
    """Pickles in the child; unpickling it in the parent fails (a garbled message)."""

    def __reduce__(self):
        return (_fail_to_load, ())


def _fail_to_load():
    raise ValueError("garbled")


def _garbled(args, kwargs):
    return [_Unreadable() for _ in args[0]]


def _hang(args, kwargs):
    time.sleep(120)


def _wrong_figures(args, kwargs):
    return ["not figures" for _ in args[0]]  # a message that unpickles but is not the figures


def _too_few(args, kwargs):
    return []


@linux_only
@pytest.mark.parametrize("failure", [_raise, _exit_silently, _garbled, _hang, _wrong_figures, _too_few])
@pytest.mark.parametrize("fmt", ["csv", "plain", "json"])
def test_a_failing_child_falls_back_to_the_same_output(failure, fmt, capsysbinary, monkeypatch, spy):
    only_thread()
    monkeypatch.setattr(to, "BLOCK_ROWS", 64)
    monkeypatch.setattr(tp, "CHUNK_ROWS", 100)
    files = demo_files()[:1]
    here = run_table(capsysbinary, monkeypatch, "0", *files, "--format", fmt)
    monkeypatch.setattr(tp, "_computed", _failing(failure))  # inherited by the forked child
    monkeypatch.setattr(tp, "CHILD_SECONDS", 1.0)
    t0 = time.monotonic()
    apart = run_table(capsysbinary, monkeypatch, "1", *files, "--format", fmt)
    assert apart == here
    # the first chunks from the child, the rest computed here
    assert len(spy) == 1 and spy[0][1] == FAIL_FROM - 1 and spy[0][0] > FAIL_FROM
    assert time.monotonic() - t0 < 30
    assert children_of(os.getpid()) == []
    assert tp._LIVE == {}


#: A `table` run whose second process hangs (for the signal tests): prints nothing before the signal.
HANGING_CHILD = """
import os, sys, time
os.environ["CHAINTRIAGE_TOUCH_PROCESS"] = "1"
from chaintriage.tui.cli import touch_process as tp
tp._computed = lambda args, kwargs: time.sleep(300)
tp.CHILD_SECONDS = 300.0
from chaintriage.tui.cli.main import main
sys.exit(main(["table", sys.argv[1], "--format", "csv", "--quiet"]))
"""


def _child_of(proc: subprocess.Popen, seconds: float = 60.0) -> int:
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        kids = children_of(proc.pid)
        if kids:
            return kids[0]
        assert proc.poll() is None, proc.stderr.read()
        time.sleep(0.05)
    raise AssertionError("no second process started")


@linux_only
def test_ctrl_c_ends_the_second_process_too():
    proc = subprocess.Popen([sys.executable, "-c", HANGING_CHILD, demo_files()[0]],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    try:
        child = _child_of(proc)
        time.sleep(1.0)  # the parent is past loading, waiting for the figures
        proc.send_signal(signal.SIGINT)
        assert proc.wait(timeout=60) == 130
        assert _gone(child)
    finally:
        proc.kill()
        proc.wait()


@linux_only
def test_a_killed_parent_takes_the_second_process_with_it():
    proc = subprocess.Popen([sys.executable, "-c", HANGING_CHILD, demo_files()[0]],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    try:
        child = _child_of(proc)
        time.sleep(0.3)  # past the child's start (where it asks to die with its parent)
        proc.kill()  # no exit handler runs
        proc.wait(timeout=60)
        assert _gone(child)
    finally:
        proc.kill()
        proc.wait()


#: A `table` run through the second process whose reader goes away early (``| head``).
CUT_SHORT = """
import os, sys
os.environ["CHAINTRIAGE_TOUCH_PROCESS"] = "1"
from chaintriage.tui.cli import table_output as to, touch_process as tp
to.BLOCK_ROWS = 16
tp.CHUNK_ROWS = 40
from chaintriage.tui.cli.main import main
sys.exit(main(["table", *sys.argv[1:], "--format", "csv", "--quiet"]))
"""


@linux_only
def test_a_reader_that_goes_away_leaves_no_process():
    proc = subprocess.Popen([sys.executable, "-c", CUT_SHORT, *demo_files()],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    try:
        child = _child_of(proc)
        head = proc.stdout.read(2000)  # the first lines, as `| head` takes them
        proc.stdout.close()
        _, err = proc.communicate(timeout=60)
        assert head.startswith(b"underlying,as_of,expiry")
        assert proc.returncode in (0, 1) and b"Traceback" not in err
        assert _gone(child)
    finally:
        proc.kill()
        proc.wait()


class Late:
    """LateColumns for the writer tests: the values known for the rows asked so far only."""

    def __init__(self, values: dict[str, np.ndarray]) -> None:
        self.names = tuple(values)
        self._full = values
        self._known = {name: np.full(len(v), np.nan) for name, v in values.items()}
        self.asked: list[int] = []

    def rows(self, stop: int) -> dict[str, np.ndarray]:
        self.asked.append(stop)
        for name in self.names:
            self._known[name][:stop] = self._full[name][:stop]
        return self._known


def awkward_frame(n: int = 700, seed: int = 5) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    p = rng.uniform(0, 1, n) * 10.0 ** rng.integers(-12, 1, n)
    p[rng.uniform(size=n) < 0.1] = np.nan
    p[100:300] = np.nan  # whole blocks without a value
    return pd.DataFrame({
        "name": np.where(rng.uniform(size=n) < 0.5, "a,b", "=c"),
        "x": rng.normal(size=n) * 1e5,
        "p_touch": p,
        "when": pd.Timestamp("2027-01-15"),
        "p_touch_high": np.minimum(1.0, p * 3),
        "y": rng.normal(size=n),
    })


@pytest.mark.parametrize("fmt", ["csv", "plain", "json"])
def test_writers_with_late_columns_write_what_they_write_without(fmt, monkeypatch):
    monkeypatch.setattr(to, "BLOCK_ROWS", 64)
    full = awkward_frame()
    expected = to.render(full, fmt)
    late_names = ["p_touch", "p_touch_high"]
    pending = full.copy()
    pending[late_names] = np.nan  # placeholders, as `table` hands them over
    late = Late({name: full[name].to_numpy() for name in late_names})
    out = io.StringIO()
    stream = to.TableStream(fmt, out)
    stream.write(pending, late=late)
    stream.close()
    assert out.getvalue() == expected
    if fmt != "plain":  # asked a block at a time, in order
        assert late.asked[1:] == list(range(64, 700, 64)) + [700]
    # two pieces, each with its own late columns: as the pieces joined
    halves = [(pending.iloc[:300], full.iloc[:300]), (pending.iloc[300:], full.iloc[300:])]
    out = io.StringIO()
    stream = to.TableStream(fmt, out)
    for part, whole in halves:
        stream.write(part, late=Late({name: whole[name].to_numpy() for name in late_names}))
    stream.close()
    assert out.getvalue() == expected


@linux_only
def test_the_parent_does_not_import_the_touch_equations_when_the_child_serves():
    code = ("import os, sys; os.environ['CHAINTRIAGE_TOUCH_PROCESS'] = '1'\n"
            "from chaintriage.tui.cli.main import main\n"
            f"status = main(['table', {demo_files()[0]!r}, '--format', 'csv', '--quiet'])\n"
            "print('chaintriage.core.touch_local_vol' in sys.modules, 'scipy.linalg' in sys.modules, "
            "file=sys.stderr)\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0 and done.stderr.split()[-2:] == ["False", "False"]


@pytest.mark.parametrize("size", [1, 250])
def test_touch_figures_in_chunks_are_the_bits_of_one_call(size):
    """[D] ``expiries_touch`` over chunks of expiries (as the child computes them) against one call over
    all of them (as ``touch_many`` does): the same bits, the same findings."""
    from chaintriage.core.loading import load_files
    from chaintriage.core.pipeline import annotate
    from chaintriage.core.touch_expiry import expiries_touch

    a = annotate(load_files([demo_files()[0]]).snapshots[0])
    todo, args, kwargs = a.touch_inputs(list(a.results))
    whole = expiries_touch(*args, **kwargs)
    chunks = tp.chunks_of([a.touch_rows(e) for e in todo], size)
    assert len(chunks) >= 3
    parts = [got for chunk in chunks for got in tp._computed(*tp._chunk_inputs(args, kwargs, chunk))]
    assert len(parts) == len(whole) == len(todo) > 5
    for one, part in zip(whole, parts):
        for x, y in ((one.p_touch, part.p_touch), (one.low, part.low), (one.high, part.high)):
            assert x.tobytes() == y.tobytes()
        assert [str(f) for f in one.findings] == [str(f) for f in part.findings]
        assert (one.method, one.clipped, one.max_cross) == (part.method, part.clipped, part.max_cross)


def test_no_second_process_on_one_core_beside_another_thread_or_off_linux(monkeypatch):
    monkeypatch.setenv(tp.SWITCH, "1")
    monkeypatch.setattr(tp, "_cores", lambda: 1)
    assert tp.serve(10 ** 9) is None
    monkeypatch.setattr(tp, "_cores", lambda: 2)
    monkeypatch.setattr(tp.sys, "platform", "darwin")
    assert tp.serve(10 ** 9) is None
    monkeypatch.setattr(tp.sys, "platform", "linux")
    stop = threading.Event()
    other = threading.Thread(target=stop.wait)
    other.start()
    try:
        assert tp.serve(10 ** 9) is None  # forking copies only this thread: another may hold a lock
    finally:
        stop.set()
        other.join()
    assert tp._LIVE == {}


def test_no_second_process_when_every_core_is_busy(monkeypatch):
    monkeypatch.delenv(tp.SWITCH, raising=False)
    monkeypatch.setattr(tp, "_cores", lambda: 2)
    monkeypatch.setattr(tp, "_idle_core", lambda: False)
    assert not tp.worth_forking(10 ** 9)
    monkeypatch.setenv(tp.SWITCH, "1")  # forced on: whatever the load
    assert tp.worth_forking(10 ** 9) == (sys.platform.startswith("linux") and threading.active_count() == 1)
    monkeypatch.delenv(tp.SWITCH)
    monkeypatch.setattr(tp, "_idle_core", lambda: True)
    assert tp.worth_forking(tp.MIN_INPUT_BYTES) == (sys.platform.startswith("linux") and threading.active_count() == 1)
    assert not tp.worth_forking(tp.MIN_INPUT_BYTES - 1)


@pytest.fixture
def shares(monkeypatch):
    """Records, for each request finished: (its chunks, how many the child answered, how many the parent
    computed while the child worked)."""
    seen: list[tuple[int, int, int]] = []
    original = tp.PendingTouch.finish

    def finish(self):
        first = not self.done
        original(self)
        if first:
            seen.append((len(self.chunks), self.from_child, self.shared))

    monkeypatch.setattr(tp.PendingTouch, "finish", finish)
    return seen


def _slow(seconds: float, log: Path | None = None):
    """``_computed`` taking ``seconds`` longer a chunk (run in the child), each chunk's first expiry
    appended to ``log``."""
    original = tp._computed

    def computed(args, kwargs):
        time.sleep(seconds)
        if log is not None:
            with open(log, "a") as fh:
                fh.write(f"{len(args[0][0])}\n")
        return original(args, kwargs)

    return computed


@linux_only
@pytest.mark.parametrize("fmt", ["plain", "csv", "json"])
def test_the_same_bytes_when_the_parent_shares_the_work(fmt, capsysbinary, monkeypatch, shares, tmp_path):
    """[D] A slow child: the parent computes the last chunks itself (plain asks for every chunk at once;
    csv and json share in ``finish`` at most), meets the child, stops it; the output, findings included,
    is the in-process one, and the child computed no more than one chunk past what it answered."""
    only_thread()
    monkeypatch.setattr(to, "BLOCK_ROWS", 64)
    monkeypatch.setattr(tp, "CHUNK_ROWS", 100)
    monkeypatch.setattr(tp, "SHARE_MIN_ROWS", 0)
    files = demo_files()
    here = run_table(capsysbinary, monkeypatch, "0", *files, "--format", fmt)
    assert shares == []
    log = tmp_path / "child.log"
    monkeypatch.setattr(tp, "_computed", _slow(0.05, log))  # inherited by the forked child
    apart = run_table(capsysbinary, monkeypatch, "1", *files, "--format", fmt)
    assert apart == here  # exit status, stdout and the findings on stderr
    assert len(shares) == 3 and all(answered + shared == chunks for chunks, answered, shared in shares)
    # the child's chunks from the front (the one it works on always left to it), the parent's from the end
    assert all(answered >= 1 for _, answered, _ in shares)
    if fmt == "plain":  # every chunk asked at once: shared (the first chain, 11 chunks, at least)
        assert shares[0][2] >= 1 and sum(shared for _, _, shared in shares) >= 2
    # the child stopped: at most the chunk under way when told, past its answers, per request
    computed = len(log.read_text().split())
    assert computed <= sum(answered for _, answered, _ in shares) + len(shares)
    assert children_of(os.getpid()) == []
    assert tp._LIVE == {}


@linux_only
def test_the_child_answers_the_next_request_after_a_stop(monkeypatch, shares):
    """After the parent met the child in one snapshot's chunks, the next snapshot's are the child's
    again (the stop acknowledged, the answers it sent before dropped): the same figures as in-process."""
    only_thread()
    monkeypatch.setattr(tp, "CHUNK_ROWS", 100)
    monkeypatch.setattr(tp, "SHARE_MIN_ROWS", 0)
    monkeypatch.setattr(tp, "_computed", _slow(0.03))
    monkeypatch.setenv(tp.SWITCH, "1")
    from chaintriage.core.loading import load_files
    from chaintriage.core.pipeline import annotate

    snaps = load_files(demo_files()[:2]).snapshots
    server = tp.serve(10 ** 9)
    assert server is not None
    try:
        for snap in snaps:
            ready = []
            a = annotate(snap, smiles_ready=lambda source: ready.append(
                server.submit(source, list(source.results))))
            pending = ready[0]
            pending.attach(a)
            pending.wait(len(pending.chunks))  # everything at once: shared
            assert pending.shared >= 1 and pending.from_child >= 1 and server.stopping
            pending.finish()
            b = annotate(snap)
            b.touch_many(list(b.results))
            for name in tp.TOUCH_COLUMNS:
                assert a.contracts[name].to_numpy().tobytes() == b.contracts[name].to_numpy().tobytes()
            assert [str(f) for f in a.findings] == [str(f) for f in b.findings]
        assert server.alive and shares[1][1] >= 1
    finally:
        server.close()
    assert children_of(os.getpid()) == [] and tp._LIVE == {}


@linux_only
@pytest.mark.parametrize("failure", [_raise, _hang])
def test_a_child_failing_while_the_parent_shares_falls_back_to_the_same_output(failure, capsysbinary,
                                                                               monkeypatch, shares):
    """The child fails at its first chunk while the parent computes from the end: the parent shares down
    to that chunk, then computes it once the child is found gone (or past ``CHILD_SECONDS``)."""
    only_thread()
    monkeypatch.setattr(tp, "CHUNK_ROWS", 50)
    monkeypatch.setattr(tp, "SHARE_MIN_ROWS", 0)
    files = demo_files()[:1]
    here = run_table(capsysbinary, monkeypatch, "0", *files, "--format", "plain")
    monkeypatch.setattr(tp, "_computed", failure)
    monkeypatch.setattr(tp, "CHILD_SECONDS", 1.0)
    apart = run_table(capsysbinary, monkeypatch, "1", *files, "--format", "plain")
    assert apart == here
    chunks, answered, shared = shares[0]
    assert answered == 0 and 1 <= shared < chunks  # the child's chunk computed here after it failed
    assert children_of(os.getpid()) == [] and tp._LIVE == {}
