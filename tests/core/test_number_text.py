"""Floats as '%.{p}g' text at once (core.number_text) and lines of byte cells (core.text_rows).

Oracle: Python's own printf-style formatting, ``'%.10g' % x`` [L] (the
language's formatting, correctly rounded, C's %g layout), value by value;
and ``str.join`` for the lines [L]. The values span the whole float64 range
(random bit patterns), plus crafted edges: rounding ties exact and inexact,
values that round up to the next power of ten, subnormals, the largest
doubles, signed zeros, nan and infinities.
"""

from __future__ import annotations

import numpy as np
import pytest

from chaintriage.core.number_text import MAX_PRECISION, as_strings, general_bytes, general_strings
from chaintriage.core.text_rows import compact, join_lines, line_matrix, text_bytes


def random_doubles(n: int, seed: int) -> np.ndarray:
    """Every bit pattern equally likely: every exponent, both signs, subnormals, nan and inf."""
    rng = np.random.default_rng(seed)
    return rng.integers(-2 ** 63, 2 ** 63 - 1, n, dtype=np.int64).view(np.float64)


def crafted(seed: int = 1) -> np.ndarray:
    rng = np.random.default_rng(seed)
    edges = [0.0, -0.0, np.nan, -np.nan, np.inf, -np.inf, 5e-324, -5e-324, 2.2250738585072014e-308,
             2.225073858507201e-308, 1.7976931348623157e308, -1.7976931348623157e308, 1e-280, 1e280,
             9.9999999995, 9.999999999499999, 9.999999999500001, 99999.999995, 0.00099999999995, 1e-5, 1e-4,
             9.99999999995e-5, 0.0001, 0.00009999999999, 1e10, 9999999999.5, 9999999998.5, 9999999999.4,
             12345678905.0, 12345678915.0, 12345678925.0, 0.5, 1.5, 2.5, 1e16, 123456789.0, 1234567890.0, 1e9,
             0.1, 0.3, 100.0, 1.0, -1.0, 2.675, 1.005, 181.10000000000002, 1e22, 1e23, 1e-7, 123456.789e300]
    ints = rng.integers(-10 ** 15, 10 ** 15, 20000).astype(float)  # exact integers: ties at digit 10
    halves = (rng.integers(-10 ** 11, 10 ** 11, 20000) * 10 + 5).astype(float)  # ...d5: exact ties
    scales = 10.0 ** rng.integers(-300, 300, 20000)
    near_pow = scales * (1 - 5e-11 * rng.integers(-3, 4, 20000))  # next to powers of ten, round up or not
    tick = 10.0 ** rng.integers(0, 6, 20000)
    grid = np.round(rng.uniform(-5000, 5000, 20000) * tick) / tick  # quotes on a tick grid
    wide = rng.normal(size=20000) * 10.0 ** rng.integers(-20, 20, 20000)
    steps = np.nextafter(np.repeat(np.array([9.9999999995, 0.99999999995, 99999.999995, 1e-4, 1e10]), 200),
                         np.inf)
    walk = steps.copy()
    for k in range(1, 200):  # ulp walks around each boundary, both directions
        walk[k::200] = np.nextafter(walk[k - 1::200], np.inf if k % 2 else -np.inf)
    return np.concatenate([edges, ints, halves, near_pow, grid, wide, walk, -walk,
                           scales * np.float64(5e-324) / 5e-324])


def python_g(values: np.ndarray, precision: int) -> list[str]:
    fmt = f"%.{precision}g"
    return [fmt % v for v in values.tolist()]


def mismatches(values: np.ndarray, precision: int) -> list:
    got = general_strings(values, precision).tolist()
    return [(v, g, e) for v, g, e in zip(values.tolist(), got, python_g(values, precision)) if g != e]


def test_ten_digits_equal_python_on_a_million_random_doubles():
    values = random_doubles(1_000_000, seed=11)
    bad = mismatches(values, 10)
    assert not bad, bad[:5]


@pytest.mark.parametrize("precision", [10, 1, 6, 12])
def test_crafted_edges_equal_python(precision):
    bad = mismatches(crafted(), precision)
    assert not bad, bad[:5]


@pytest.mark.parametrize("precision", [2, 5, 6, 9, 12])
def test_other_precisions_on_random_doubles(precision):
    bad = mismatches(random_doubles(100_000, seed=precision), precision)
    assert not bad, bad[:5]


def test_realistic_figures_equal_python():
    """Probabilities, vols, prices on a cent grid, greeks: the writers' everyday values."""
    rng = np.random.default_rng(4)
    values = np.concatenate([rng.random(200_000), rng.lognormal(-1, 0.5, 100_000),
                             np.round(rng.uniform(0, 500, 100_000), 2), rng.normal(0, 0.01, 100_000),
                             np.round(rng.uniform(0, 500, 100_000), 2) / 2])
    bad = mismatches(values, 10)
    assert not bad, bad[:5]


def test_nan_text_and_shapes():
    x = np.array([np.nan, 1.5, -np.nan, np.inf])
    assert as_strings(general_bytes(x, 10, nan="")).tolist() == ["", "1.5", "", "inf"]
    assert general_strings(np.array([])).tolist() == []
    assert general_strings(np.full(5, np.nan), 10).tolist() == ["nan"] * 5
    with pytest.raises(ValueError):
        general_bytes(x, MAX_PRECISION + 1)


def test_matrix_rows_hold_the_text_between_holes():
    """Row i's nonzero bytes in order are the text [D]; longer inputs are formatted in chunks."""
    values = random_doubles(100_000, seed=3)
    m = general_bytes(values)
    assert m.dtype == np.uint8 and m.shape[0] == values.size
    rows = [bytes(r[r != 0]).decode() for r in m[:2000]]
    assert rows == python_g(values[:2000], 10)


def test_join_lines_equals_str_join():
    rng = np.random.default_rng(2)
    n = 3000
    nums = rng.normal(size=n) * 10.0 ** rng.integers(-6, 8, n)
    nums[::7] = np.nan
    words = np.array(["call", "put", "", "caf\u00e9", "a \u2192 b", "x,y"], dtype=object)
    codes = rng.integers(0, words.size, n)
    cols = [general_bytes(nums, 10, nan=""), text_bytes(list(words))[codes], general_bytes(-nums, 6, nan="")]
    rows = list(zip(["" if np.isnan(v) else "%.10g" % v for v in nums], words[codes],
                    ["" if np.isnan(v) else "%.6g" % -v for v in nums]))
    assert join_lines(cols).decode("utf-8") == "".join(",".join(r) + "\n" for r in rows)
    assert join_lines(cols, sep=b" | ", end=b";\n").decode("utf-8") == "".join(" | ".join(r) + ";\n" for r in rows)
    assert join_lines([]) == b""
    with pytest.raises(ValueError):
        text_bytes(["a\0b"])


def test_join_lines_with_gathered_columns_and_reused_memory():
    """Columns given as (distinct cells, codes), lines laid in reused memory, decimals written into a
    given array: the same text as ``str.join`` of Python's printf [L]."""
    rng = np.random.default_rng(4)
    words = np.array(["call", "put", "", "caf\u00e9", "x,y"], dtype=object)
    room = np.empty(0, dtype=np.uint8)
    out = np.full((2 * 10 + 10, 4000), 255, dtype=np.uint8)  # stale bytes everywhere
    for n in (4000, 1500, 4000):  # the room too small, then big enough, then a view again
        nums = rng.normal(size=n) * 10.0 ** rng.integers(-6, 8, n)
        nums[::5] = np.nan
        codes = rng.integers(0, words.size, n)
        numbers = general_bytes(nums, 10, nan="", trim=False, out=out[:, :n])
        assert np.shares_memory(numbers, out)
        lines = line_matrix([numbers, (text_bytes(list(words)), codes)], room=room)
        if lines.size <= room.size:
            assert np.shares_memory(lines, room)
        else:
            room = lines.reshape(-1)
        expected = "".join(f"{'' if np.isnan(v) else '%.10g' % v},{w}\n"
                           for v, w in zip(nums.tolist(), words[codes]))
        assert compact(lines).decode("utf-8") == expected
    with pytest.raises(ValueError):
        general_bytes(np.ones(3), 10, out=np.empty((30, 4), dtype=np.uint8))


@pytest.mark.parametrize("sep", [b",", b"  ", b" | ", b""])
def test_gathered_columns_of_every_width_side_by_side(sep):
    """[D] Gathered columns of widths 1..20 (cells widened to a word size with junk past the separator,
    overwritten by the next cell or the line end), next to each other, an empty column, the last: the
    text equals ``str.join`` of the cells, with and without the widened cells kept between calls."""
    rng = np.random.default_rng(9)
    n = 500
    columns, texts = [], []
    for w in [*range(1, 21), 0, 3, 7, 13]:
        distinct = ["".join(rng.choice(list("abcdef xyz"), size=w)) if w else "" for _ in range(17)]
        distinct = [t.rjust(w, "q") if t else t for t in distinct]
        codes = rng.integers(0, len(distinct), n)
        columns.append((text_bytes(distinct) if w else np.zeros((len(distinct), 0), dtype=np.uint8), codes))
        texts.append([distinct[c] for c in codes])
    expected = "".join(sep.decode().join(r) + "\n" for r in zip(*texts))
    kept: dict = {}
    for widened in (None, kept, kept):  # the second call with ``kept`` reuses the widened cells
        assert compact(line_matrix(columns, sep=sep, widened=widened)).decode() == expected
    assert kept


def test_powers_of_ten_are_correctly_rounded():
    """The table of 10**k the float path scales by: each the float nearest the exact rational [L]
    (``fractions.Fraction`` arithmetic is exact and its float() correctly rounded)."""
    from fractions import Fraction

    from chaintriage.core import number_text

    assert number_text._POW10.tolist() == [float(Fraction(10) ** k) for k in range(-300, 301)]
