"""Lines of text cells laid out at once, as bytes: cells as byte matrices with holes.

A cell column is a uint8 matrix, one row per line, whose row holds the
cell's UTF-8 bytes in order with zero bytes anywhere among them (holes, not
text): ``core.number_text`` writes numbers so, ``text_bytes`` writes given
strings so (left-aligned). ``join_lines`` lays the columns side by side with
a separator and a line end and keeps every nonzero byte in order: the lines,
in one pass over the bytes. Text holding a NUL character cannot be a cell.
Cells gathered by codes from a column's few distinct ones move as one
machine word (4, 8, 16 or 32 bytes, the separator and junk the next cell
overwrites included): numpy moves cells of other sizes byte-wise.
"""

from __future__ import annotations

import numpy as np


def text_bytes(texts: list[str]) -> np.ndarray:
    """The UTF-8 bytes of each text, left-aligned in a zero-padded uint8 matrix (one row per text).

    Raises ValueError when a text holds a NUL character (it would read as a hole).
    """
    if not texts:
        return np.zeros((0, 0), dtype=np.uint8)
    if "\0" in "".join(texts):
        raise ValueError("a text cell holds a NUL character")
    try:
        narrow = np.array(texts, dtype=bytes)  # ASCII only, at C speed
    except UnicodeEncodeError:
        encoded = [t.encode("utf-8") for t in texts]
        width = max(map(len, encoded))
        if width == 0:
            return np.zeros((len(encoded), 0), dtype=np.uint8)
        flat = b"".join(b.ljust(width, b"\0") for b in encoded)
        return np.frombuffer(flat, dtype=np.uint8).reshape(len(encoded), width)
    width = narrow.dtype.itemsize
    if width == 0 or narrow.size == 0:
        return np.zeros((len(texts), 0), dtype=np.uint8)
    return narrow.view(np.uint8).reshape(len(texts), width)


def line_matrix(columns: list, sep: bytes = b",", end: bytes = b"\n",
                room: np.ndarray | None = None, widened: dict | None = None) -> np.ndarray:
    """Each row's cells (the matrices of ``columns``, equal row counts) side by side, ``sep`` between
    them and ``end`` after: one row per line, with holes. ``sep`` and ``end`` hold no NUL byte.

    A column may also be a pair (distinct cells, codes): its row i is ``distinct[codes[i]]`` (a
    column's distinct texts laid out once, gathered straight into the lines). ``room``: a flat
    uint8 array to lay the lines in when it is big enough (one reused from block to block spares
    the kernel's page faults of fresh memory); the result is then a view of it. ``widened``: a dict kept
    from block to block for the pairs' distinct cells widened to a word size (``place_cells``), made once."""
    n = _rows(columns[0])
    seps = np.frombuffer(sep, dtype=np.uint8)
    ends = np.frombuffer(end, dtype=np.uint8)
    widths = [(c[0] if isinstance(c, tuple) else c).shape[1] for c in columns]
    total = sum(widths) + len(sep) * (len(columns) - 1) + len(end)
    if room is not None and room.size >= n * total:
        lines = room[:n * total].reshape(n, total)
    else:
        lines = np.empty((n, total), dtype=np.uint8)
    uniform = len(sep) > 0 and sep == sep[:1] * len(sep)
    if uniform:  # every separator at once (the cells then cover the rest)
        lines.fill(sep[0])
    at = 0
    for j, (cells, w) in enumerate(zip(columns, widths)):
        if j:
            if not uniform:
                lines[:, at:at + len(sep)] = seps
            at += len(sep)
        if w and n:
            if isinstance(cells, tuple):
                last = j == len(columns) - 1
                # bytes after the cell that are written later in full (the next cell, or the line end)
                place_cells(lines, at, *cells, after=b"" if last else sep,
                            spare=len(end) if last else widths[j + 1], widened=widened, key=j)
            else:
                place_cells(lines, at, cells)
        at += w
    lines[:, at:] = ends
    return lines


def _rows(column) -> int:
    return len(column[1]) if isinstance(column, tuple) else column.shape[0]


#: Cell sizes numpy gathers as one machine word or two (a gather of any other size moves each cell
#: byte-wise: ~4x slower).
_WORD_SIZES = (4, 8, 16, 32)


def place_cells(lines: np.ndarray, at: int, cells: np.ndarray, codes: np.ndarray | None = None,
                after: bytes = b"", spare: int = 0, widened: dict | None = None, key: object = None) -> None:
    """Copy ``cells`` (rows x w bytes), or with ``codes`` the rows ``cells[codes]``, into columns
    ``at``..``at + w`` of ``lines`` (C-contiguous rows): each cell moved whole, as one w-byte element
    (several times faster than byte by byte).

    With ``codes``, ``after`` (bytes that follow each cell in the lines) and ``spare`` (how many bytes
    after those are written later, whole): cells are widened with ``after`` and junk up to a word size
    when that fits, and gathered a word at a time; the caller overwrites the junk. ``widened``: a dict
    keeping the widened cells under ``key`` for the next call with the same cells (given by callers that
    gather from the same cells block after block; without it many cells are gathered as they are)."""
    w = cells.shape[1]
    if codes is not None:
        size = next((s for s in _WORD_SIZES if s >= w + len(after)), 0)
        if size > w and size - w - len(after) <= spare and at + size <= lines.shape[1]:
            kept = widened.get(key) if widened is not None else None
            if kept is not None and kept[0] is cells and kept[1] == after and kept[2].shape[1] == size:
                cells = kept[2]
            elif widened is None and 4 * cells.shape[0] > len(codes):
                pass  # cells not few against the rows gathered, and not kept for more: widening costs more
            else:
                wide = np.zeros((cells.shape[0], size), dtype=np.uint8)
                wide[:, :w] = cells
                wide[:, w:w + len(after)] = np.frombuffer(after, dtype=np.uint8)
                if widened is not None:
                    widened[key] = (cells, after, wide)
                cells = wide
        w = cells.shape[1]
    if not cells.flags.c_contiguous:  # e.g. a transposed (byte position, row) matrix: made rows first
        cells = np.ascontiguousarray(cells)
    whole = cells.view(f"V{w}").reshape(cells.shape[0])
    if codes is not None:
        whole = whole[codes]
    target = np.ndarray((len(whole),), dtype=f"V{w}", buffer=lines, offset=at, strides=(lines.strides[0],))
    target[...] = whole


def strip_line_ends(lines: np.ndarray, end: int = 1) -> np.ndarray:
    """``lines`` (from ``line_matrix``) with the spaces before each line's last ``end`` bytes made
    holes: ``str.rstrip(" ")`` of every line, in place."""
    body = lines[:, :lines.shape[1] - end]
    if body.shape[1] == 0:
        return lines
    kept = (body != 32) & (body != 0)
    last = body.shape[1] - np.argmax(kept[:, ::-1], axis=1)  # one past the last kept byte
    last[~kept.any(axis=1)] = 0
    body[np.arange(body.shape[1])[None, :] >= last[:, None]] = 0
    return lines


def compact(lines: np.ndarray) -> bytes:
    """The nonzero bytes of a matrix with holes, row after row."""
    return lines.tobytes().translate(None, b"\0")


def join_lines(columns: list, sep: bytes = b",", end: bytes = b"\n", room: np.ndarray | None = None) -> bytes:
    """Each row's cells (the matrices of ``columns``, equal row counts, or pairs as ``line_matrix``
    takes them) joined by ``sep``, ended by ``end``: the bytes of all the lines. ``sep`` and ``end``
    hold no NUL byte. ``room``: as ``line_matrix``."""
    if not columns:
        return b""
    return compact(line_matrix(columns, sep, end, room))
