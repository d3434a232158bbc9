"""Loading for the app, without Textual: the bundled demo chains, reading files, and
annotating each snapshot into a ``SnapshotView`` (heavy: run it off the UI thread).

``load_views`` is the whole background job; it reports through callbacks, so the
app decides how they reach its thread.
"""

from __future__ import annotations

import contextlib
import os
import time
from collections.abc import Callable, Iterator, Sequence
from importlib import resources
from pathlib import Path
from typing import TYPE_CHECKING, Any

from chaintriage.core.findings import ChainTriageError
from chaintriage.tui.numerical_environment import set_numerical_defaults
from chaintriage.tui import formatting as fm

if TYPE_CHECKING:  # pragma: no cover
    from chaintriage.core.loading import ColumnMap, LoadResult, SnapshotOverrides
    from chaintriage.core.snapshot import Snapshot
    from chaintriage.tui.session import SnapshotView

DEMO_PACKAGE = "chaintriage.demo_chains"

#: A snapshot with more contracts than this shows its first expiry (annotated alone) before the
#: other expiries are annotated (``core.pipeline.annotate_in_parts``: the expiries are computed
#: independently, so its figures are the same); every chain does, so the first data frame waits
#: for one expiry's work only.
FIRST_EXPIRY_FIRST_ABOVE = 0


def import_numerical_modules() -> None:
    """Import what loading and the ladder need (numpy, pandas, scipy, core, the ladder's widgets):
    called first in the loading worker, so the app's first frame waits for none of it. A process that
    has not imported numpy yet gets ``numerical_environment.NUMERICAL_DEFAULTS`` (one BLAS thread, no
    huge-page requests) unless its environment says otherwise."""
    set_numerical_defaults()
    import chaintriage.core.loading  # noqa: F401
    import chaintriage.core.pipeline  # noqa: F401
    import chaintriage.tui.session  # noqa: F401
    import chaintriage.tui.widgets.distribution_plot  # noqa: F401
    import chaintriage.tui.widgets.strike_grid  # noqa: F401


def demo_files(root=None) -> list[str]:
    """Names of the bundled demo chains (snapshot CSV files, not the messy, events or history ones), sorted.

    ``root`` is the folder to look in (a Traversable); default: the chaintriage.demo_chains package.
    """
    try:
        root = resources.files(DEMO_PACKAGE) if root is None else root
        names = [p.name for p in root.iterdir() if p.name.lower().endswith(".csv")]
    except (ModuleNotFoundError, FileNotFoundError, NotADirectoryError):
        return []
    return sorted(n for n in names if not any(w in n.lower() for w in ("messy", "events", "history")))


#: The bundled demo's events file (OSPX's fictional earnings date).
DEMO_EVENTS = "demo_events.csv"


def demo_events() -> list:
    """The events of the bundled demo chains (empty when the file is not shipped or unusable)."""
    from chaintriage.core.event_file import read_events_file
    from chaintriage.core.findings import ChainTriageError

    try:
        with resources.as_file(resources.files(DEMO_PACKAGE) / DEMO_EVENTS) as path:
            return read_events_file(path)[0]
    except (ChainTriageError, ModuleNotFoundError, FileNotFoundError, OSError):
        return []


def load_for_app(paths: Sequence[str | Path], *, overrides: SnapshotOverrides | None = None,
                 column_map: ColumnMap | None = None,
                 column_maps: Sequence[ColumnMap | None] | None = None) -> LoadResult:
    """Load the given files, or the bundled demo chains when ``paths`` is empty.

    ``column_maps`` (one per path) gives each file its own mapping instead of ``column_map``.
    Raises ChainTriageError when there is nothing to load, or when the files are together bigger
    than the app opens at once (``loading.OPEN_MAX_BYTES``).
    """
    from chaintriage.core.loading import load_files, too_big_to_open

    if paths:
        refusal = too_big_to_open(paths)  # the same cap as `open` (the `l` prompt comes here too)
        if refusal:
            raise ChainTriageError(refusal)
        return load_files(paths, overrides=overrides, column_map=column_map, column_maps=column_maps)
    names = demo_files()
    if not names:
        raise ChainTriageError(
            "no demo chains are bundled with this installation; give snapshot files to open")
    root = resources.files(DEMO_PACKAGE)
    with contextlib.ExitStack() as stack:
        real = [str(stack.enter_context(resources.as_file(root / n))) for n in names]
        return load_files(real, overrides=overrides, column_map=column_map)


def annotate_view(snapshot: Snapshot, pipeline_settings: Any, load_findings: Sequence = (),
                  confidence: float | None = None, precompute: int | None = None) -> SnapshotView:
    """Run core's pipeline on one snapshot and wrap it for the screen (heavy: call off the UI thread).

    The distributions, and the ranges at ``confidence``, of the first ``precompute``
    expiries (all when None) are computed here too, so paging through them costs no
    model work; ``precompute_view`` does the rest later.
    """
    from chaintriage.core.pipeline import annotate
    from chaintriage.tui.session import SnapshotView, file_findings_without_underlying

    annotated = annotate(snapshot, pipeline_settings)
    view = SnapshotView(annotated, file_findings_without_underlying(load_findings, snapshot.sources))
    precompute_view(view, confidence, stop=precompute)
    return view


def annotate_views_in_parts(snapshot: Snapshot, pipeline_settings: Any, load_findings: Sequence = (),
                            confidence: float | None = None) -> Iterator[SnapshotView]:
    """``annotate_view`` in two steps (``core.pipeline.annotate_in_parts``): a view of the first expiry
    alone, then the whole chain (the whole alone when it has one expiry); each with its first expiry's
    distribution and range computed."""
    from chaintriage.core.pipeline import annotate_in_parts
    from chaintriage.tui.session import SnapshotView, file_findings_without_underlying

    file_findings = file_findings_without_underlying(load_findings, snapshot.sources)
    for annotated in annotate_in_parts(snapshot, pipeline_settings):
        view = SnapshotView(annotated, file_findings)
        precompute_view(view, confidence, stop=1)
        yield view


#: Seconds the background work sleeps between two expiries, so the screen's thread gets the
#: interpreter (the GIL) at once when it has a key to handle or a frame to draw.
YIELD_SECONDS = 0.0005


def precompute_view(view: SnapshotView, confidence: float | None, start: int = 0, stop: int | None = None,
                    pause: float = 0.0) -> None:
    """Compute (and cache) the distributions and ranges of expiries ``start:stop``, sleeping ``pause``
    seconds after each (background work: see YIELD_SECONDS)."""
    for e in view.expiries[start:stop]:
        view.distribution(e)
        if confidence is not None:
            view.ranges(e, confidence)
        if pause:
            time.sleep(pause)


def load_views(paths: Sequence[str], *, snapshots: Sequence[Snapshot] | None = None,
               overrides: SnapshotOverrides | None = None, column_map: ColumnMap | None = None,
               pipeline_settings: Any = None, confidence: Callable[[], float] | None = None,
               on_busy: Callable[[str], None] = lambda text: None,
               on_view: Callable[[SnapshotView, bool], None] = lambda view, first: None,
               on_replace: Callable[[SnapshotView, SnapshotView], None] | None = None,
               column_maps: Sequence[ColumnMap | None] | None = None,
               companions: Callable[[Snapshot], list[tuple[str, ColumnMap | None]]] | None = None,
               ) -> tuple[list[str], int]:
    """The background job: read ``paths`` (the demo when empty, file by file; or take ``snapshots``
    already read), annotate each snapshot and hand each view to ``on_view(view, first)`` as soon as
    it is ready.

    With ``on_replace``, a snapshot of more than FIRST_EXPIRY_FIRST_ABOVE contracts is handed
    over first as a view of its first expiry alone, then ``on_replace(partial, whole)`` swaps in
    the whole chain once it is annotated.

    ``column_maps`` gives each path its own mapping. ``companions(snapshot)`` names the files
    (and their mappings) of a snapshot already shown with the same underlying and instant: they
    are read again together with the new file and merged, as the command line merges files
    given together (a contract given twice is left out of the later file, with a finding).

    ``confidence()`` gives the range confidence to precompute at (asked each time: the user
    may change it meanwhile). ``on_busy`` says what is being done. ``on_view`` may block until the view is drawn: the
    rest of the expiries' distributions are computed after it returns. Returns (messages
    about what could not be loaded, how many views were handed over). Never raises.
    """
    errors: list[str] = []
    added = 0

    def level() -> float | None:
        return None if confidence is None else confidence()

    try:
        settings = pipeline_settings
        if settings is None:
            from chaintriage.core.pipeline import PipelineSettings

            settings = PipelineSettings()
        for snapshots, load_findings, n_first, n_all in _read_batches(
                paths, snapshots, overrides, column_map, column_maps, companions, errors):
            added = _annotate_batch(snapshots, load_findings, n_first, n_all, settings, level, added, errors,
                                    on_busy, on_view, on_replace)
    except ChainTriageError as exc:
        errors.append(str(exc))
    except Exception as exc:  # never a traceback on screen: say what failed and go on
        errors.append(f"could not load: {type(exc).__name__}: {exc}")
    return errors, added


def _read_batches(paths, snapshots, overrides, column_map, column_maps, companions, errors):
    """(snapshots, their files' findings, number of the first, how many in all) to annotate, batch by
    batch: ``snapshots`` as given; the bundled demo file by file, so the first chain is annotated and
    shown without waiting for the others to be read (its files hold different underlyings: nothing
    would merge across them; with an override of the underlying they are read together, as any
    files); else all ``paths`` at once (snapshots in different files may merge)."""
    if snapshots is not None:
        yield list(snapshots), [], 0, len(snapshots)
        return
    if not paths and (overrides is None or overrides.underlying is None):
        names = demo_files()
        if not names:
            raise ChainTriageError(
                "no demo chains are bundled with this installation; give snapshot files to open")
        root = resources.files(DEMO_PACKAGE)
        for i, name in enumerate(names):
            with resources.as_file(root / name) as path:
                result = load_for_app([str(path)], overrides=overrides, column_map=column_map)
            errors.extend(str(e) for e in result.errors)
            yield result.snapshots, result.findings, i, len(names)
        return
    result = load_for_app(paths, overrides=overrides, column_map=column_map, column_maps=column_maps)
    errors.extend(str(e) for e in result.errors)
    snapshots, load_findings = result.snapshots, result.findings
    if companions is not None:
        snapshots, load_findings = _merge_with_shown(snapshots, load_findings, result, companions,
                                                     overrides, column_maps, paths)
    yield snapshots, load_findings, 0, len(snapshots)


def _annotate_batch(snapshots, load_findings, n_first, n_all, settings, level, added, errors,
                    on_busy, on_view, on_replace) -> int:
    """``load_views``' work on one batch of snapshots; returns how many views were handed over in all."""
    for n, snap in enumerate(snapshots, start=n_first):
        on_busy(f"computing {fm.clean_text(snap.underlying)} "
                f"({len(snap.contracts):,} contracts, {n + 1} of {max(n_all, n + 1)})")
        partial = None
        shown = False
        try:
            if on_replace is not None and len(snap.contracts) > FIRST_EXPIRY_FIRST_ABOVE:
                parts = annotate_views_in_parts(snap, settings, load_findings, level())
                view = next(parts)
                if len(view.expiries) < snap.contracts["expiry"].nunique():  # a part: show it, then the rest
                    view.partial = True
                    on_view(view, added == 0)
                    on_busy(f"computing {fm.clean_text(snap.underlying)}: the other expiries "
                            f"({len(snap.contracts) - len(view):,} contracts)")
                    whole = next(parts, None)  # None: far strikes left no other expiry, it was the whole
                    shown = whole is None
                    if whole is None:
                        view.partial = False
                    partial, view = (None, view) if whole is None else (view, whole)
            else:
                view = annotate_view(snap, settings, load_findings, level(), precompute=1)
        except ChainTriageError as exc:
            errors.append(f"{snap.label}: {exc}")
            continue
        if partial is not None:
            on_replace(partial, view)
        elif not shown:
            on_view(view, added == 0)
        added += 1
        precompute_view(view, level(), start=1, pause=YIELD_SECONDS)
    return added


def _merge_with_shown(snapshots, load_findings, result, companions, overrides, column_maps, paths):
    """Snapshots whose underlying and instant are already shown: read again with the files shown,
    merged (see ``load_views``). Returns (snapshots, findings)."""
    import os

    from chaintriage.core.loading import load_files

    maps_by_path = {os.path.realpath(p): (column_maps[i] if column_maps else None) for i, p in enumerate(paths)}
    out, findings = [], list(load_findings)
    for snap in snapshots:
        earlier = companions(snap)
        if not earlier:
            out.append(snap)
            continue
        files = [p for p, _ in earlier] + list(snap.sources)
        maps = [m for _, m in earlier] + [maps_by_path.get(os.path.realpath(p)) for p in snap.sources]
        merged = load_files(files, overrides=overrides, column_maps=maps)
        same = [m for m in merged.snapshots if (m.underlying, m.as_of) == (snap.underlying, snap.as_of)]
        if not same:
            out.append(snap)
            continue
        out.append(same[0])
        findings = [f for f in findings if f.file not in snap.sources] + \
            [f for f in merged.findings if f.file in same[0].sources or f.file is None]
    return out, findings
