"""Many floats as printf text at once: ``'%.{p}g' % x`` for a whole float64 array, byte for byte.

The text comes back as a byte matrix with holes: one row per value, and the
text of a row is its nonzero bytes in order (zero bytes are left where C's
``%g`` drops a trailing zero, a bare point or a sign). Laid side by side with
other cells, a whole line is then one compaction away (``core.text_rows``);
``as_strings`` gives Python strings.

How: the decimal exponent and the ``p``-digit integer mantissa come from
float arithmetic (the value times a power of ten, rounded half-even). That
product is within a few units in the last place of the exact one, so the
rounded mantissa is the exact decimal rounding unless the product sits near
a half (a rounding tie, exact or not); those few values, and values beyond 1e+-280 (where the power of ten would overflow or
lose precision), are formatted one by one by Python's own ``%``. Digits,
trailing zeros, the point and the exponent are then laid out as C's ``%g``
does: scientific when the exponent after rounding is below -4 or at least
``p``, trailing zeros (and a bare point) dropped, the exponent signed with at
least two digits; nan, inf, -inf and -0 as C prints them.
"""

from __future__ import annotations

import numpy as np

#: Largest precision the float path serves (the mantissa must stay far inside float64's 53 bits).
MAX_PRECISION = 12

#: Values formatted at once: the temporaries of a chunk stay in the processor's cache, and their float64
#: arrays (96 KB) below the size from which malloc maps fresh memory (and the kernel's page faults) for each.
CHUNK = 12288

#: Values at least this far from zero and from the overflow end take the float path; the rest Python's ``%``.
_LOW, _HIGH = 1e-280, 1e280

#: Correctly rounded 10**k for k in -300..300 (index k + 300): Python turns an int into the nearest
#: float and divides ints correctly rounded.
_POW10 = np.array([1 / 10 ** -k if k < 0 else float(10 ** k) for k in range(-300, 301)])

_ZERO, _POINT, _MINUS, _PLUS, _E = 48, 46, 45, 43, 101

#: 0, 1, 2, ...: digit positions, as a column to compare whole (position, value) arrays against.
_PLACES = np.arange(MAX_PRECISION, dtype=np.int32)
_PLACES8 = _PLACES.astype(np.int8)


def general_bytes(values, precision: int = 10, nan: str = "nan", trim: bool = True,
                  out: np.ndarray | None = None) -> np.ndarray:
    """``'%.{precision}g' % v`` of every value as a uint8 matrix with holes: row i's nonzero bytes,
    in order, are value i's text (ASCII). Columns that are zero in every row are left out (kept
    when ``trim`` is false). The
    matrix is the transpose of a C-contiguous (byte position, value) array: ``.T`` of it gives
    each byte position's bytes for all values contiguously.

    ``values``: anything numpy turns into float64 (1-d). ``precision``: 1..``MAX_PRECISION``.
    ``nan``: the text of NaN (ASCII, at most 8 characters; "" leaves the row empty).
    ``out``: a uint8 (2 * precision + 10) x len(values) array to write the (byte position, value)
    array into (each row contiguous), e.g. one reused from block to block: fresh memory costs the
    kernel's page faults.
    """
    if not 1 <= precision <= MAX_PRECISION:
        raise ValueError(f"precision {precision} outside 1..{MAX_PRECISION}")
    x = np.ascontiguousarray(values, dtype=np.float64).ravel()
    p = precision
    width = 2 * p + 10  # the fast layout (see _fast); holds any of the texts below too
    if out is None:
        out = np.empty((width, x.size), dtype=np.uint8)
    elif out.shape != (width, x.size) or out.dtype != np.uint8 or out.strides[1] != 1:
        raise ValueError(f"out must be a uint8 {width} x {x.size} array with contiguous rows")
    by_position = out
    out = by_position.T
    for a in range(0, x.size, CHUNK):
        part = x[a:a + CHUNK]
        abs_part = np.abs(part)
        with np.errstate(invalid="ignore"):
            fast = (abs_part > _LOW) & (abs_part < _HIGH)
        every = fast.all()
        lone = _fast(part if every else np.where(fast, part, 1.0), p, by_position[:, a:a + part.size])
        slow = lone | ~fast
        if not every:  # zeros, nan and inf by their fixed texts (by byte position: whole rows at once)
            odd = np.flatnonzero(~fast)
            v = part[odd]
            for mask, text in ((np.isnan(v), nan), (v == np.inf, "inf"), (v == -np.inf, "-inf"),
                               ((v == 0) & ~np.signbit(v), "0"), ((v == 0) & np.signbit(v), "-0")):
                if mask.any():
                    at = a + odd[mask]
                    # the stand-in 1.0's text is "1" at byte position 6 (_fast's layout): that position and
                    # the text's own bytes are the ones to write
                    for j, byte in enumerate(text.encode("ascii").ljust(7, b"\0")):
                        if byte or j == 6:
                            by_position[j, at] = byte
                    slow[odd[mask]] = False
        rows = np.flatnonzero(slow)
        if rows.size:
            # near-ties and extremes: Python's own printf, left-aligned in the row
            fmt = f"%.{p}g"
            texts = [(fmt % v).encode("ascii").ljust(width, b"\0") for v in part[rows].tolist()]
            out[a + rows] = np.frombuffer(b"".join(texts), dtype=np.uint8).reshape(-1, width)
    if not trim:
        return out
    used = by_position.any(axis=1)
    return out if used.all() else by_position[used].T


def _fast(x: np.ndarray, p: int, by_position: np.ndarray) -> np.ndarray:
    """Text of finite values well inside float64's range, written into ``by_position`` (2p + 10 byte
    positions x values), and ``lone``: the values too near a rounding tie for float arithmetic to
    decide (their text is junk).

    One layout serves every value, a column per possible byte: sign; "0.000" before the digits of
    a fixed-notation value below 1; each digit followed by a possible point; "e-308". A byte that
    the value's text has not is zero. Digits, the points between them and which of them show are
    worked out for all digit positions at once (2-d arrays, digit position x value).
    """
    n = x.size
    a = np.abs(x)
    lo = 10.0 ** (p - 1)
    # int32 exponents: indexing the powers of ten with them is several times faster than with int64
    e = np.floor(np.log10(a)).astype(np.int32)
    y = a * _POW10[(p + 299) - e]
    low, high = y < lo, y >= 10.0 * lo
    off = low.any() or high.any()
    if off:
        e = e - low + high
        y = np.where(low | high, a * _POW10[(p + 299) - e], y)
    margin = max(1e-4, 64 * 2.0 ** -52 * 10.0 ** p)
    r = np.rint(y)
    # near a half (|y - r| is at most 0.5) or off the mantissa range: decided by Python's printf
    gap = y - r
    np.abs(gap, out=gap)
    lone = gap > 0.5 - margin
    if off:  # (without a correction every y is in the range)
        lone |= (y < lo) | (y >= 10.0 * lo)
    # near a power of ten either exponent gives the same text (a mantissa just under 10**p rounds up to it)
    carry = r >= 10.0 * lo  # rounded up to the next power of ten: 10**(p-1), one exponent higher
    e += carry
    np.putmask(r, carry | lone, lo)
    sci = (e < -4) | (e >= p)
    # where the point goes: after digit ``point_after`` (fixed notation: the exponent, -4..p-1) or after
    # the first digit (scientific); int8, the cheapest to compare whole (digit position x value) arrays with
    point_after = e.astype(np.int8)  # (wrapped where scientific; set to 0 there next)
    np.putmask(point_after, sci, 0)
    # the mantissa's digits, most significant first, from groups of at most 4 digits (uint16: the
    # cheapest integer division); r / 10**4 is exact to the unit (r < 10**12), so its floor is too
    digits = np.empty((p, n), dtype=np.uint8)
    rest = r
    end = p
    while end > 0:
        count = min(4, end)
        if end > 4:
            above = np.floor(rest / 1e4)
            h = (rest - above * 1e4).astype(np.uint16)
            rest = above
        else:
            h = rest.astype(np.uint16)
        for k in range(end - 1, end - count - 1, -1):
            q = h // np.uint16(10)
            np.subtract(h, q * np.uint16(10), out=digits[k], casting="unsafe")
            h = q
        end -= count
    # a digit is shown when a nonzero digit follows it or it lies in the integer part (of length
    # point_after + 1: one digit when scientific, none below 1)
    later = digits != 0
    for k in range(p - 2, -1, -1):
        np.logical_or(later[k], later[k + 1], out=later[k])
    shown = later | (_PLACES8[:p, None] <= point_after)
    sign = (x < 0).view(np.uint8)
    np.multiply(sign, np.uint8(_MINUS), out=by_position[0])
    below = (point_after < 0).view(np.uint8)  # fixed notation below 1: "0." first
    np.multiply(below, np.uint8(_ZERO), out=by_position[1])
    np.multiply(below, np.uint8(_POINT), out=by_position[2])
    for j, k in ((3, 2), (4, 3), (5, 4)):  # zeros after "0." of 0.0x, 0.00x, 0.000x
        np.multiply((point_after <= -k).view(np.uint8), np.uint8(_ZERO), out=by_position[j])
    # digit k at position 6 + 2k, the point after it at 7 + 2k
    np.add(digits, np.uint8(_ZERO), out=digits)
    np.multiply(digits, shown.view(np.uint8), out=by_position[6:6 + 2 * p:2])
    points = (point_after == _PLACES8[:p - 1, None]) & shown[1:]
    np.multiply(points.view(np.uint8), np.uint8(_POINT), out=by_position[7:5 + 2 * p:2])
    j = 5 + 2 * p
    few = np.flatnonzero(sci)
    if few.size <= n // 8:  # the exponents of the few values in scientific notation only ("e+dd", "e-ddd")
        by_position[j:] = 0
        if few.size:
            ae = np.abs(e[few]).astype(np.uint32)
            by_position[j, few] = _E
            by_position[j + 1, few] = np.where(e[few] < 0, np.uint8(_MINUS), np.uint8(_PLUS))
            by_position[j + 2, few] = np.where(ae >= 100, (ae // np.uint32(100)).astype(np.uint8) + np.uint8(_ZERO), 0)
            by_position[j + 3, few] = (ae // np.uint32(10) % np.uint32(10)).astype(np.uint8) + np.uint8(_ZERO)
            by_position[j + 4, few] = (ae % np.uint32(10)).astype(np.uint8) + np.uint8(_ZERO)
        return lone
    ae = np.abs(e).astype(np.uint32)
    exponent = [(sci, _E), (sci, np.where(e < 0, np.uint8(_MINUS), np.uint8(_PLUS))),
                (sci & (ae >= 100), (ae // np.uint32(100)).astype(np.uint8) + np.uint8(_ZERO)),
                (sci, (ae // np.uint32(10) % np.uint32(10)).astype(np.uint8) + np.uint8(_ZERO)),
                (sci, (ae % np.uint32(10)).astype(np.uint8) + np.uint8(_ZERO))]
    for i, (mask, byte) in enumerate(exponent):
        np.multiply(mask.view(np.uint8), np.uint8(byte) if np.isscalar(byte) else byte, out=by_position[j + i])
    return lone


def as_strings(matrix: np.ndarray) -> np.ndarray:
    """The rows of an ASCII byte matrix with holes (``general_bytes``, ``fixed_bytes``) as Python
    strings (object array)."""
    n, w = matrix.shape
    out = np.empty(n, dtype=object)
    if n == 0:
        return out
    if (matrix == 10).any():  # a line feed in a text: row by row
        keep = matrix != 0
        ends = np.cumsum(keep.sum(axis=1)).tolist()
        text = np.ascontiguousarray(matrix)[keep].tobytes().decode("ascii")
        out[:] = [text[a:b] for a, b in zip([0] + ends[:-1], ends)]
        return out
    lines = np.empty((n, w + 1), dtype=np.uint8)  # each row ended by a line feed, holes dropped, split at C speed
    lines[:, :w] = matrix
    lines[:, w] = 10
    out[:] = lines.tobytes().translate(None, b"\0").decode("ascii").split("\n")[:-1]
    return out


def general_strings(values, precision: int = 10) -> np.ndarray:
    """``'%.{precision}g' % v`` of every value, as an object array of str."""
    return as_strings(general_bytes(values, precision))


def fixed_bytes(units, decimals: int, sign, suffix: bytes = b"") -> np.ndarray:
    """Fixed-point text of whole numbers of steps ``10**-decimals``: ``units`` 12345 with 2 decimals
    -> "123.45" (what ``f"{v:.{decimals}f}"`` prints for any ``v`` that rounds to those units).

    ``units``: integers (int64, |units| < 1e15). ``sign``: per value the byte put first (0 for
    none, e.g. ord("-") or ord("+")). ``suffix``: bytes after the number ("%"). Returns a uint8
    matrix with holes, as ``general_bytes``.
    """
    u = np.abs(np.asarray(units, dtype=np.int64))
    n = u.size
    digits = max(len(str(int(u.max()))) if n else 1, decimals + 1)
    rows = [np.asarray(sign, dtype=np.uint8) * np.ones(n, dtype=np.uint8)]
    place = [u // np.int64(10 ** (digits - 1 - k)) % 10 for k in range(digits)]
    started = np.zeros(n, dtype=bool)
    for k in range(digits):
        # a leading zero of the integer part is a hole; its last digit always shows
        started = started | (place[k] != 0) | (k >= digits - 1 - decimals)
        if k == digits - decimals and decimals:
            rows.append(np.full(n, _POINT, dtype=np.uint8))
        rows.append((place[k] + _ZERO).astype(np.uint8) * started)
    rows.extend(np.full(n, b, dtype=np.uint8) for b in suffix)
    by_position = np.stack(rows)
    used = by_position.any(axis=1)
    return by_position[used].T
