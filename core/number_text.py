"""Many floats as printf text at once: ``'%.{p}g' % x`` for a whole float64 array, byte for byte.

The text comes back as a byte matrix (one row per value, ASCII, zero-padded
on the right) and the length of each row, ready to be laid into lines
(``core.text_rows``) or turned into strings (``as_strings``).

How: the decimal exponent and the ``p``-digit integer mantissa come from
float arithmetic (the value times a power of ten, rounded half-even). That
product is within a few units in the last place of the exact one, so the
rounded mantissa is the exact decimal rounding unless the product sits near
a half (a rounding tie, exact or not) or near a power of ten; those few
values, and values beyond 1e+-280 (where the power of ten would overflow or
lose precision), are formatted one by one by Python's own ``%``. Digits,
trailing zeros, the point and the exponent are then laid out as C's ``%g``
does: scientific when the exponent after rounding is below -4 or at least
``p``, trailing zeros (and a bare point) dropped, the exponent signed with at
least two digits; nan, inf, -inf and -0 as C prints them.
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np

#: Largest precision the float path serves (the mantissa must stay far inside float64's 53 bits).
MAX_PRECISION = 12

#: Values at least this far from zero and from the overflow end take the float path; the rest Python's ``%``.
_LOW, _HIGH = 1e-280, 1e280

#: Correctly rounded 10**k for k in -300..300 (index k + 300).
_POW10 = np.array([float(Fraction(10) ** k) for k in range(-300, 301)])

_ZERO, _POINT, _MINUS, _PLUS, _E = 48, 46, 45, 43, 101


def _pow10(k: np.ndarray) -> np.ndarray:
    return _POW10[np.asarray(k) + 300]


def general_bytes(values, precision: int = 10) -> tuple[np.ndarray, np.ndarray]:
    """``'%.{precision}g' % v`` of every value: (uint8 matrix, one zero-padded row per value; lengths).

    ``values``: anything numpy turns into float64 (1-d). ``precision``: 1..``MAX_PRECISION``.
    """
    if not 1 <= precision <= MAX_PRECISION:
        raise ValueError(f"precision {precision} outside 1..{MAX_PRECISION}")
    x = np.ascontiguousarray(values, dtype=np.float64).ravel()
    n = x.size
    p = precision
    # widest text: sign, p digits, point, "e-308": at most p + 7; also room for "-inf", "-nan"
    width = max(p + 7, 5)
    out = np.zeros((n, width), dtype=np.uint8)
    length = np.zeros(n, dtype=np.int64)
    a = np.abs(x)
    fast = (a > _LOW) & (a < _HIGH)
    idx = np.flatnonzero(fast)
    if idx.size:
        body, blen, lone = _fast_body(a[idx], p)
        keep = ~lone
        rows = idx[keep]
        out[rows, :body.shape[1]] = body[keep]
        length[rows] = blen[keep]
        slow = np.concatenate([np.flatnonzero(~fast), idx[lone]])
    else:
        slow = np.flatnonzero(~fast)
    # the rest (zeros, nan, inf, extremes, near-ties): Python's own printf, sign included
    fmt = f"%.{p}g"
    for i, v in zip(slow.tolist(), x[slow].tolist()):
        t = (fmt % v).encode("ascii")
        out[i, :len(t)] = np.frombuffer(t, dtype=np.uint8)
        length[i] = len(t)
    # a minus before the fast rows' text (the slow rows carry their own)
    neg = np.zeros(n, dtype=bool)
    neg[idx] = True
    neg[slow] = False
    neg &= x < 0
    if neg.any():
        out[neg, 1:] = out[neg, :-1]
        out[neg, 0] = _MINUS
        length[neg] += 1
    return out, length


def _fast_body(a: np.ndarray, p: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Unsigned text of positive finite values well inside float64's range: (matrix, lengths, lone),
    ``lone`` marking values too near a tie or a power of ten for float arithmetic to decide."""
    lo = 10.0 ** (p - 1)
    e = np.floor(np.log10(a)).astype(np.int64)
    y = a * _pow10(p - 1 - e)
    low, high = y < lo, y >= 10.0 * lo
    e = e - low + high
    y = np.where(low | high, a * _pow10(p - 1 - e), y)
    frac = y - np.floor(y)
    margin = max(1e-4, 64 * 2.0 ** -52 * 10.0 ** p)
    lone = (np.abs(frac - 0.5) < margin) | (np.abs(y - lo) < margin) | (y < lo) | (y >= 10.0 * lo)
    m = np.rint(y).astype(np.int64)
    carry = m >= 10 ** p  # rounded up to the next power of ten: 10**(p-1), one exponent higher
    m = np.where(carry, 10 ** (p - 1), m)
    e = e + carry
    m = np.where(lone, 10 ** (p - 1), m)  # any valid mantissa: these rows are replaced
    k = a.size
    digits = np.empty((k, p), dtype=np.uint8)
    rest = m.copy()
    for j in range(p - 1, -1, -1):
        digits[:, j] = rest % 10 + _ZERO
        rest //= 10
    # significant digits after dropping trailing zeros
    nonzero = digits != _ZERO
    nd = p - np.argmax(nonzero[:, ::-1], axis=1)
    width = p + 7
    body = np.zeros((k, width), dtype=np.uint8)
    blen = np.zeros(k, dtype=np.int64)
    sci = (e < -4) | (e >= p)
    for ex in range(-4, p):  # fixed notation, one exponent at a time
        rows = np.flatnonzero((e == ex) & ~sci)
        if rows.size == 0:
            continue
        d = digits[rows]
        if ex >= 0:  # digits[:ex+1] "." digits[ex+1:]
            w = p + 1
            body[rows, :ex + 1] = d[:, :ex + 1]
            body[rows, ex + 1] = _POINT
            body[rows, ex + 2:w] = d[:, ex + 1:]
            blen[rows] = np.where(nd[rows] > ex + 1, nd[rows] + 1, ex + 1)
        else:  # "0." zeros digits
            lead = -ex - 1
            body[rows, 0] = _ZERO
            body[rows, 1] = _POINT
            body[rows, 2:2 + lead] = _ZERO
            body[rows, 2 + lead:2 + lead + p] = d
            blen[rows] = 2 + lead + nd[rows]
        # clear what lies past each row's length (trailing zeros, a bare point)
        body[rows] *= np.arange(width)[None, :] < blen[rows][:, None]
    rows = np.flatnonzero(sci)
    if rows.size:
        d = digits[rows]
        ndr = nd[rows]
        mant = np.zeros((rows.size, p + 1), dtype=np.uint8)
        mant[:, 0] = d[:, 0]
        mant[:, 1] = _POINT
        mant[:, 2:] = d[:, 1:]
        mlen = np.where(ndr > 1, ndr + 1, 1)
        mant *= np.arange(p + 1)[None, :] < mlen[:, None]
        ex = e[rows]
        ae = np.abs(ex)
        tail = np.zeros((rows.size, 5), dtype=np.uint8)  # "e" sign and two or three digits
        tail[:, 0] = _E
        tail[:, 1] = np.where(ex < 0, _MINUS, _PLUS)
        three = ae >= 100
        tail[:, 2] = np.where(three, ae // 100 + _ZERO, ae // 10 + _ZERO)
        tail[:, 3] = np.where(three, ae // 10 % 10 + _ZERO, ae % 10 + _ZERO)
        tail[:, 4] = np.where(three, ae % 10 + _ZERO, 0)
        tlen = np.where(three, 5, 4)
        sb = np.zeros((rows.size, width), dtype=np.uint8)
        sb[:, :p + 1] = mant
        # the tail goes right after each mantissa: positions mlen .. mlen + tlen
        cols = mlen[:, None] + np.arange(5)[None, :]
        r = np.repeat(np.arange(rows.size), 5).reshape(rows.size, 5)
        ok = np.arange(5)[None, :] < tlen[:, None]
        sb[r[ok], cols[ok]] = tail[ok]
        body[rows] = sb
        blen[rows] = mlen + tlen
    return body, blen, lone


def as_strings(matrix: np.ndarray, lengths: np.ndarray) -> np.ndarray:
    """The rows of a zero-padded ASCII byte matrix as Python strings (object array)."""
    n, w = matrix.shape
    if n == 0:
        return np.empty(0, dtype=object)
    if w == 0:
        return np.full(n, "", dtype=object)
    fixed = np.ascontiguousarray(matrix).view(f"S{w}").ravel()  # trailing zero bytes drop off
    return fixed.astype(f"U{w}").astype(object)


def general_strings(values, precision: int = 10) -> np.ndarray:
    """``'%.{precision}g' % v`` of every value, as an object array of str."""
    return as_strings(*general_bytes(values, precision))
