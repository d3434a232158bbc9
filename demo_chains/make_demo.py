"""Make the fictional demo chain snapshots (deterministic).

    python -m chaintriage.demo_chains.make_demo [--out DIR]

writes, by default into this package folder:

- ``tsbh_2026-12-01.csv``: Tessborne Hydraulics Corp. (TSBH), an invented
  mid-cap industrial, spot 114.37, 11 expiries.
- ``ospx_2026-12-01.csv``: Ostrelind Photonics Inc. (OSPX), an invented
  high-volatility technology name, spot 296.42, 12 expiries, with a fictional
  earnings release after the close on 2027-01-12 (the 2027-01-15 expiry is the
  first one that spans it and carries the bump; it is also the one AM-settled
  expiry).
- ``messy_export.csv``: a small export of a third invented name, Mirewood
  Cold Storage (MWCS), carrying typical export problems for trying ``check``.
- ``demo_events.csv``: the events file with OSPX's fictional earnings date and
  its past releases (every 13 weeks back to ``PAST_EVENTS_FROM``, the first day
  of the demo price histories; they serve the past-move comparison).

All three companies, their names and their tickers are invented.

Snapshot time for all files: 2026-12-01T14:30:00-05:00 (a Tuesday, mid-session).

How the clean chains are made
-----------------------------
- Time: T = ACT/365 year fraction from ``as_of`` to the settlement time of the
  expiry in New York (16:00 for ``pm``, 09:30 for ``am``), using the US daylight
  saving rule (second Sunday of March to first Sunday of November).
- Forward and discount: F = S*exp((r - q)*T), DF = exp(-r*T).
- Volatility surface: SSVI (Gatheral & Jacquier 2014, section 4) in forward
  log-moneyness k = ln(K/F)::

      w(k, theta) = theta/2 * (1 + rho*phi*k + sqrt((phi*k + rho)**2 + 1 - rho**2))

  with the power-law phi(theta) = eta * theta**(-gamma), gamma = 1/2, and ATM
  total variance theta(T) = v_inf*T + (v0 - v_inf)*(1 - exp(-kappa*T))/kappa,
  v0 < v_inf (rising ATM vol term structure). An earnings release adds a
  constant ``earnings_jump`` to theta for every expiry that settles after it.
  The generator asserts Theorem 4.2's conditions per slice, g(k) >= 0
  (eq. 2.1) on a wide k grid, and w strictly increasing in T at every k.
- The ``iv`` column is the generating vol sqrt(w/T) on the ACT/365 basis
  (``iv_basis`` = 365). Model prices: Black-76 (chaintriage.core.black76.price)
  with DF. Quotes are European-style.
- Quotes: tick 0.01 for prices under 3.00 and 0.05 from 3.00 up. The full
  spread is (base + rel * price**0.75) * (1 + 0.15 * |sigma distance|) times a
  random factor in [0.8, 1.25], at least 0.02; the quote centre is moved by
  at most 40% of the half-spread; the bid is rounded down and the ask up to the
  tick, so the model price always lies within [bid, ask]. Bids below one tick
  become 0 (far out of the money); asks are at least one tick (one or two ticks
  when the model price is below a tick). When an in-the-money mid would fall
  below DF*max(F-K, 0) + one tick (calls; puts likewise) the ask is raised so
  it does not.
- volume and open_interest: integers peaking near the money and at round
  strikes (multiples of 5 and 10 for TSBH; 25 and 50 for OSPX), decaying in
  the wings; more open interest on monthly expiries.

Columns, in order: underlying, as_of, spot, expiry, strike, kind, bid, ask,
iv, iv_basis, volume, open_interest, settle, rate, div_yield.

messy_export.csv: which line carries which problem
--------------------------------------------------
Line numbers as a text editor shows them (header = line 1). The file has no
rate or dividend-yield columns and its ``IV`` column is written in percent.

- line 1: UTF-8 byte-order mark; headers in mixed case with padding
  (`` Underlying ``, ``AS_OF``, `` Expiry``, ``Strike ``, ``KIND``, ``Bid``,
  `` ASK``, ``IV``, ``Volume``, ``Open_Interest``).
- every row: kinds written as ``C``/``P`` or ``c``/``p``; every ``IV`` carries
  a ``%`` sign (e.g. ``47.3%``).
- line 3: zero bid (a far out-of-the-money put).
- line 9: crossed market, bid 1.45 > ask 1.30.
- line 12: negative price (bid -0.15).
- line 15: non-numeric strike ``N/A``.
- line 18: unknown kind ``straddle``.
- line 20: blank line.
- line 22: missing ask with a bid present (bid 0.05).
- line 24: very wide spread (bid 0.35, ask 6.90).
- line 27: impossible date 2027-02-30.
- line 29: expiry 2026-11-20, before as_of.
- line 31: duplicate contract (same expiry, strike and kind as line 30, other
  quotes).

All other rows are ordinary quotes.
"""

from __future__ import annotations

import argparse
import datetime as dt
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from chaintriage.core.black76 import intrinsic, price

SEED = 20261201
AS_OF = "2026-12-01T14:30:00-05:00"
IV_BASIS = "365"
COLUMNS = (
    "underlying", "as_of", "spot", "expiry", "strike", "kind", "bid", "ask",
    "iv", "iv_basis", "volume", "open_interest", "settle", "rate", "div_yield",
)
SECONDS_PER_YEAR = 365.0 * 86400.0


@dataclass(frozen=True)
class Expiry:
    """One listed expiry: date, settlement ('pm'/'am') and listing type."""

    date: dt.date
    settle: str = "pm"
    cycle: str = "weekly"  # 'weekly', 'monthly', 'quarterly' (end of quarter), 'long'


@dataclass(frozen=True)
class Underlying:
    """An invented underlying and its surface. Rates and vols are decimals."""

    ticker: str
    name: str
    spot: float
    rate: float
    div_yield: float
    v0: float  # instantaneous ATM variance (per year)
    v_inf: float  # long-run ATM variance (per year)
    kappa: float  # speed of the ATM variance term structure (per year)
    rho: float  # SSVI correlation (negative: equity skew)
    eta: float  # SSVI power-law level
    gamma: float  # SSVI power-law exponent
    expiries: tuple[Expiry, ...]
    bands: tuple[tuple[float, float, float], ...]  # (max T, max |ln K/S|, strike step); smallest max T >= T applies
    round_strikes: tuple[float, float]  # strikes that get more open interest (big, small)
    oi_atm: float  # open interest scale at the money on a monthly
    spread_base: float  # full spread at zero price
    spread_rel: float  # full spread = (base + rel * price**0.75) * (1 + 0.15 |sigma distance|)
    earnings: dt.datetime | None = None  # New York wall time after which the jump applies
    earnings_jump: float = 0.0  # added to ATM total variance


def _d(s: str) -> dt.date:
    return dt.date.fromisoformat(s)


TSBH = Underlying(
    ticker="TSBH",
    name="Tessborne Hydraulics Corp.",
    spot=114.37,
    rate=0.041,
    div_yield=0.021,
    v0=0.215**2,
    v_inf=0.275**2,
    kappa=2.0,
    rho=-0.55,
    eta=1.15,
    gamma=0.5,
    expiries=(
        Expiry(_d("2026-12-04")),
        Expiry(_d("2026-12-11")),
        Expiry(_d("2026-12-18"), cycle="monthly"),
        Expiry(_d("2026-12-31"), cycle="quarterly"),
        Expiry(_d("2027-01-15"), cycle="monthly"),
        Expiry(_d("2027-02-19"), cycle="monthly"),
        Expiry(_d("2027-03-19"), cycle="monthly"),
        Expiry(_d("2027-03-31"), cycle="quarterly"),
        Expiry(_d("2027-06-17"), cycle="monthly"),  # Fri 2027-06-18 is a holiday
        Expiry(_d("2027-09-17"), cycle="monthly"),
        Expiry(_d("2027-12-17"), cycle="long"),
    ),
    bands=(
        (0.25, 0.15, 1.0), (0.25, 0.30, 2.5), (0.25, 9.0, 5.0),
        (0.60, 0.30, 2.5), (0.60, 9.0, 5.0),
        (9.00, 0.45, 5.0), (9.00, 9.0, 10.0),
    ),
    round_strikes=(10.0, 5.0),
    oi_atm=2400.0,
    spread_base=0.03,
    spread_rel=0.05,
)

OSPX = Underlying(
    ticker="OSPX",
    name="Ostrelind Photonics Inc.",
    spot=296.42,
    rate=0.041,
    div_yield=0.004,
    v0=0.43**2,
    v_inf=0.50**2,
    kappa=1.5,
    rho=-0.35,
    eta=1.0,
    gamma=0.5,
    expiries=(
        Expiry(_d("2026-12-04")),
        Expiry(_d("2026-12-11")),
        Expiry(_d("2026-12-18"), cycle="monthly"),
        Expiry(_d("2026-12-31"), cycle="quarterly"),  # Fri 2027-01-01 is a holiday
        Expiry(_d("2027-01-08")),
        Expiry(_d("2027-01-15"), settle="am", cycle="monthly"),
        Expiry(_d("2027-01-22")),
        Expiry(_d("2027-02-19"), cycle="monthly"),
        Expiry(_d("2027-03-19"), cycle="monthly"),
        Expiry(_d("2027-06-17"), cycle="monthly"),  # Fri 2027-06-18 is a holiday
        Expiry(_d("2027-09-17"), cycle="monthly"),
        Expiry(_d("2027-12-17"), cycle="long"),
    ),
    bands=(
        (0.25, 0.30, 5.0), (0.25, 0.60, 10.0), (0.25, 9.0, 25.0),
        (9.00, 0.45, 10.0), (9.00, 0.90, 25.0), (9.00, 9.0, 50.0),
    ),
    round_strikes=(50.0, 25.0),
    oi_atm=7000.0,
    spread_base=0.05,
    spread_rel=0.05,
    earnings=dt.datetime(2027, 1, 12, 16, 0),
    earnings_jump=0.009,
)

UNDERLYINGS = (TSBH, OSPX)


# --- time ---------------------------------------------------------------------------


def _nth_weekday(year: int, month: int, weekday: int, n: int) -> dt.date:
    """n-th (1-based) weekday (Mon=0) of a month."""
    first = dt.date(year, month, 1)
    return first + dt.timedelta(days=(weekday - first.weekday()) % 7 + 7 * (n - 1))


def new_york_utc_offset_hours(wall: dt.datetime) -> int:
    """UTC offset of New York wall time (hours): -4 in daylight saving time, else -5.

    US rule since 2007: from 02:00 on the second Sunday of March to 02:00 on
    the first Sunday of November.
    """
    start = dt.datetime.combine(_nth_weekday(wall.year, 3, 6, 2), dt.time(2))
    end = dt.datetime.combine(_nth_weekday(wall.year, 11, 6, 1), dt.time(2))
    return -4 if start <= wall < end else -5


def settlement_time(expiry: dt.date, settle: str) -> dt.datetime:
    """Settlement instant (tz-aware, UTC): 16:00 New York for pm, 09:30 for am."""
    wall = dt.datetime.combine(expiry, dt.time(16) if settle == "pm" else dt.time(9, 30))
    offset = new_york_utc_offset_hours(wall)
    return (wall - dt.timedelta(hours=offset)).replace(tzinfo=dt.timezone.utc)


def year_fraction(as_of: str, expiry: dt.date, settle: str) -> float:
    """ACT/365 years from ``as_of`` (ISO 8601 with offset) to settlement."""
    start = dt.datetime.fromisoformat(as_of)
    return (settlement_time(expiry, settle) - start).total_seconds() / SECONDS_PER_YEAR


# --- surface ------------------------------------------------------------------------


def ssvi_phi(theta, eta: float, gamma: float):
    """Power-law phi(theta) = eta * theta**(-gamma) (dimensionless)."""
    return eta * np.asarray(theta, dtype=float) ** (-gamma)


def ssvi_total_variance(k, theta, rho: float, eta: float, gamma: float):
    """SSVI total variance w(k, theta) (Gatheral & Jacquier 2014, section 4), dimensionless."""
    k = np.asarray(k, dtype=float)
    theta = np.asarray(theta, dtype=float)
    p = ssvi_phi(theta, eta, gamma)
    return 0.5 * theta * (1.0 + rho * p * k + np.sqrt((p * k + rho) ** 2 + 1.0 - rho * rho))


def atm_total_variance(u: Underlying, t, settles_after_earnings) -> np.ndarray:
    """ATM total variance theta(T): rising term structure plus the earnings jump."""
    t = np.asarray(t, dtype=float)
    base = u.v_inf * t + (u.v0 - u.v_inf) * (1.0 - np.exp(-u.kappa * t)) / u.kappa
    return base + u.earnings_jump * np.asarray(settles_after_earnings, dtype=float)


def _g_function(k, theta, rho, eta, gamma):
    """g(k) of Gatheral & Jacquier 2014 eq. 2.1 for an SSVI slice (analytic w', w'')."""
    p = ssvi_phi(theta, eta, gamma)
    x = p * k + rho
    r = np.sqrt(x * x + 1.0 - rho * rho)
    w = 0.5 * theta * (1.0 + rho * p * k + r)
    w1 = 0.5 * theta * p * (rho + x / r)
    w2 = 0.5 * theta * p * p * (1.0 - rho * rho) / r**3
    return (1.0 - k * w1 / (2.0 * w)) ** 2 - 0.25 * w1 * w1 * (1.0 / w + 0.25) + 0.5 * w2


def expiry_slices(u: Underlying) -> list[tuple[Expiry, float, float]]:
    """(expiry, T in ACT/365 years, theta) per expiry, in listing order."""
    out = []
    for e in u.expiries:
        t = year_fraction(AS_OF, e.date, e.settle)
        after = False
        if u.earnings is not None:
            off = new_york_utc_offset_hours(u.earnings)
            event = (u.earnings - dt.timedelta(hours=off)).replace(tzinfo=dt.timezone.utc)
            after = settlement_time(e.date, e.settle) > event
        out.append((e, t, float(atm_total_variance(u, t, after))))
    return out


def check_surface(u: Underlying) -> None:
    """Assert no static arbitrage on the SSVI slices of ``u`` (raises AssertionError)."""
    slices = expiry_slices(u)
    ts = np.array([s[1] for s in slices])
    thetas = np.array([s[2] for s in slices])
    assert np.all(np.diff(ts) > 0), f"{u.ticker}: expiries not in time order"
    assert np.all(np.diff(thetas) > 0), f"{u.ticker}: ATM total variance not increasing"
    p = ssvi_phi(thetas, u.eta, u.gamma)
    a = 1.0 + abs(u.rho)
    # Theorem 4.2: theta*phi*(1+|rho|) < 4 and theta*phi**2*(1+|rho|) <= 4.
    assert np.all(thetas * p * a < 4.0), f"{u.ticker}: Theorem 4.2 first condition fails"
    assert np.all(thetas * p * p * a <= 4.0), f"{u.ticker}: Theorem 4.2 second condition fails"
    k = np.linspace(-4.0, 4.0, 4001)
    w = ssvi_total_variance(k[None, :], thetas[:, None], u.rho, u.eta, u.gamma)
    assert np.all(np.diff(w, axis=0) > 0), f"{u.ticker}: calendar arbitrage"
    g = _g_function(k[None, :], thetas[:, None], u.rho, u.eta, u.gamma)
    assert np.all(g >= 0), f"{u.ticker}: butterfly arbitrage (g < 0)"


# --- strikes, quotes, interest ------------------------------------------------------


def strike_grid(u: Underlying, t: float, sd: float, forward: float) -> np.ndarray:
    """Listed strikes for one expiry (price units).

    From -4.2 to +4 ATM standard deviations ``sd`` = sqrt(theta) in ln(K/F)
    (at least -12%/+10%), kept within 0.2 to 3 times spot; the strike step
    grows with the distance from spot (``u.bands`` for the expiry's T class).
    """
    lo = max(forward * math.exp(-max(4.2 * sd, 0.12)), 0.2 * u.spot)
    hi = min(forward * math.exp(max(4.0 * sd, 0.10)), 3.0 * u.spot)
    tmax_used = min(tm for (tm, _, _) in u.bands if t <= tm)
    bands = [(m, step) for (tm, m, step) in u.bands if tm == tmax_used]
    strikes: set[float] = set()
    inner = 0.0
    for m, step in bands:
        a = max(lo, u.spot * math.exp(-m))
        b = min(hi, u.spot * math.exp(m))
        n0, n1 = math.ceil(a / step - 1e-9), math.floor(b / step + 1e-9)
        for n in range(n0, n1 + 1):
            kk = round(n * step, 2)
            if kk > 0 and abs(math.log(kk / u.spot)) >= inner - 1e-12:
                strikes.add(kk)
        inner = m
    return np.array(sorted(strikes))


def _tick_floor(x: np.ndarray) -> np.ndarray:
    """Round down to the tick (0.01 below 3.00, 0.05 from 3.00), in integer cents."""
    c = np.floor(x * 100.0 + 1e-7)
    c5 = np.floor(c / 5.0) * 5.0
    return np.where(c >= 300.0, c5, c)


def _tick_ceil(x: np.ndarray) -> np.ndarray:
    """Round up to the tick (0.01 below 3.00, 0.05 from 3.00), in integer cents."""
    c = np.ceil(x * 100.0 - 1e-7)
    return np.where(c >= 300.0, np.ceil(c / 5.0) * 5.0, c)


def _noise(rng: np.random.Generator, n: int) -> np.ndarray:
    """Approximately standard normal draws from uniforms only (Irwin-Hall, 12 terms)."""
    return rng.random((n, 12)).sum(axis=1) - 6.0


def _expiry_rows(u: Underlying, e: Expiry, t: float, theta: float, rng) -> list[str]:
    fwd = u.spot * math.exp((u.rate - u.div_yield) * t)
    df = math.exp(-u.rate * t)
    sd = math.sqrt(theta)
    strikes = strike_grid(u, t, sd, fwd)
    n = strikes.size
    k = np.log(strikes / fwd)
    w = ssvi_total_variance(k, theta, u.rho, u.eta, u.gamma)
    iv = np.sqrt(w / t)
    z = k / sd  # sigma distance on the ATM vol

    kinds = np.repeat(np.array([True, False]), n)  # calls then puts
    kk = np.tile(strikes, 2)
    zz = np.tile(z, 2)
    ivv = np.tile(iv, 2)
    model = price(fwd, kk, ivv, t, df, kinds)
    intr = intrinsic(fwd, kk, df, kinds)

    # quotes, in cents
    m_c = model * 100.0
    full = (u.spread_base + u.spread_rel * model**0.75) * (1.0 + 0.15 * np.abs(zz))
    full *= 0.8 + 0.45 * rng.random(2 * n)
    half_c = np.maximum(full * 50.0, 1.0)  # half-spread in cents, at least one tick
    centre = m_c + 0.4 * half_c * (2.0 * rng.random(2 * n) - 1.0)
    bid = _tick_floor((centre - half_c) / 100.0)
    ask = _tick_ceil((centre + half_c) / 100.0)
    bid = np.where(bid < 1.0, 0.0, bid)
    tiny = m_c < 1.0
    ask = np.where(tiny, np.where(rng.random(2 * n) < 0.6, 1.0, 2.0), np.maximum(ask, 1.0))
    floor_c = intr * 100.0 + 1.0  # an in-the-money mid must not fall below intrinsic + one tick
    low_mid = (intr > 0) & ((bid + ask) / 2.0 < floor_c)
    ask = np.where(low_mid, _tick_ceil((2.0 * floor_c - bid) / 100.0), ask)
    assert np.all(bid <= m_c + 1e-6) and np.all(ask >= m_c - 1e-6), "model outside the quote"
    assert np.all(bid >= 0) and np.all(bid < ask)

    # open interest and volume
    cyc = {"weekly": 0.35, "monthly": 1.0, "quarterly": 0.55, "long": 0.7}[e.cycle]
    big, small = u.round_strikes
    rnd = np.where(np.isclose(np.mod(kk, big), 0), 2.4, np.where(np.isclose(np.mod(kk, small), 0), 1.6, 1.0))
    side = np.where(kinds, np.where(zz > 0, 1.0, 0.45), np.where(zz < 0, 1.35, 0.4))
    shape = np.exp(-0.5 * (zz / 1.7) ** 2) + 0.04 * np.exp(-np.abs(zz) / 1.5)
    oi = u.oi_atm * cyc * rnd * side * shape * np.exp(0.45 * _noise(rng, 2 * n))
    oi = np.floor(oi)
    turnover = 0.02 + 0.25 * math.exp(-t / 0.08)
    vol_shape = np.exp(-0.5 * (zz / 1.1) ** 2)
    volume = np.floor(oi * turnover * vol_shape * np.exp(0.6 * _noise(rng, 2 * n)) + 0.25 * rng.random(2 * n))

    rows = []
    exp_s = e.date.isoformat()
    for i in range(2 * n):
        rows.append(",".join((
            u.ticker, AS_OF, f"{u.spot:.2f}", exp_s, _fmt_strike(kk[i]),
            "call" if kinds[i] else "put",
            f"{bid[i] / 100.0:.2f}", f"{ask[i] / 100.0:.2f}", f"{ivv[i]:.6f}", IV_BASIS,
            str(int(volume[i])), str(int(oi[i])), e.settle, f"{u.rate:.4f}", f"{u.div_yield:.4f}",
        )))
    # sort by strike, calls before puts at each strike
    order = np.lexsort((~kinds, kk))
    return [rows[i] for i in order]


def _fmt_strike(x: float) -> str:
    s = f"{x:.2f}".rstrip("0").rstrip(".")
    return s


def chain_text(u: Underlying) -> str:
    """The CSV text of one underlying's snapshot (header plus rows, LF line ends)."""
    check_surface(u)
    rng = np.random.default_rng([SEED, sum(map(ord, u.ticker))])
    lines = [",".join(COLUMNS)]
    for e, t, theta in expiry_slices(u):
        lines.extend(_expiry_rows(u, e, t, theta, rng))
    return "\n".join(lines) + "\n"


def file_name(u: Underlying) -> str:
    """File name of an underlying's snapshot, e.g. ``tsbh_2026-12-01.csv``."""
    return f"{u.ticker.lower()}_{AS_OF[:10]}.csv"


# --- messy export -------------------------------------------------------------------

MESSY_FILE = "messy_export.csv"

#: line number (header = 1) -> the problem on that line (also listed in the module docstring)
MESSY_PROBLEMS: dict[int, str] = {
    1: "UTF-8 byte-order mark; mixed-case, padded headers",
    3: "zero bid",
    9: "crossed market (bid > ask)",
    12: "negative price",
    15: "non-numeric strike",
    18: "unknown kind",
    20: "blank line",
    22: "missing ask with a bid",
    24: "very wide spread",
    27: "impossible date 2027-02-30",
    29: "expiry before as_of",
    31: "duplicate contract (same as line 30)",
}

MESSY_HEADER = " Underlying ,AS_OF,Spot, Expiry,Strike ,KIND,Bid, ASK,IV,Volume,Open_Interest"


def messy_text() -> str:
    """The messy export (str, without the byte-order mark; the writer adds it)."""
    spot, r = 41.86, 0.041
    e1, e2 = dt.date(2026, 12, 18), dt.date(2027, 1, 15)
    specs = [(e1, s) for s in range(34, 51, 2)] + [(e2, s) for s in range(30, 56, 5)]
    rows: list[list[str] | None] = []
    for i, (exp, s) in enumerate(specs):
        t = year_fraction(AS_OF, exp, "pm")
        f = spot * math.exp(r * t)
        x = math.log(s / f)
        vol = (0.36 if exp == e1 else 0.34) - 0.35 * x + 0.9 * x * x
        oi = int(900 * math.exp(-0.5 * (x / 0.12) ** 2)) + 5
        for call in (True, False):
            m = float(price(f, float(s), vol, t, math.exp(-r * t), call))
            half = 0.03 + 0.03 * m
            b = max(0.0, math.floor((m - half) * 100.0) / 100.0)
            a = max(0.01, math.ceil((m + half) * 100.0) / 100.0)
            kind = ("C" if call else "P") if i % 2 == 0 else ("c" if call else "p")
            rows.append(["MWCS", AS_OF, f"{spot:.2f}", exp.isoformat(), str(s), kind,
                         f"{b:.2f}", f"{a:.2f}", f"{100.0 * vol:.1f}%", str(oi // 7), str(oi)])
    lines: list[list[str] | None] = [None] + rows  # lines[n - 1] is file line n
    lines.insert(19, None)  # line 20: blank
    dup = list(lines[29])  # line 30; its twin goes in as line 31
    dup[6] = f"{max(0.0, float(dup[6]) - 0.05):.2f}"
    dup[7] = f"{float(dup[7]) + 0.05:.2f}"
    dup[9] = "3"
    lines.insert(30, dup)

    def row(n: int) -> list[str]:
        return lines[n - 1]

    row(3)[6] = "0.00"  # zero bid (far out-of-the-money put)
    row(9)[6], row(9)[7] = "1.45", "1.30"  # crossed: bid > ask
    row(12)[6] = "-0.15"  # negative price
    row(15)[4] = "N/A"  # non-numeric strike
    row(18)[5] = "straddle"  # unknown kind
    row(22)[6], row(22)[7] = "0.05", ""  # bid without an ask
    row(24)[6], row(24)[7] = "0.35", "6.90"  # very wide spread
    row(27)[3] = "2027-02-30"  # impossible date
    row(29)[3] = "2026-11-20"  # expiry before as_of
    text = [MESSY_HEADER] + ["" if x is None else ",".join(x) for x in lines[1:]]
    return "\n".join(text) + "\n"


# --- writing ------------------------------------------------------------------------


# --- events --------------------------------------------------------------------------

#: The demo's scheduled events (the earnings dates the chains were priced with).
EVENTS_FILE = "demo_events.csv"


#: The first day of the demo price histories: past releases are listed from here on.
PAST_EVENTS_FROM = dt.date(2022, 12, 1)


def past_releases(u: Underlying) -> list[dt.date]:
    """The past releases of an underlying with earnings: every 13 weeks back, oldest first."""
    if u.earnings is None:
        return []
    out = []
    k = 1
    while (d := u.earnings.date() - dt.timedelta(days=91 * k)) >= PAST_EVENTS_FROM:
        out.append(d)
        k += 1
    return out[::-1]


def events_text() -> str:
    """The events file: per underlying with earnings, its past releases then the coming one."""
    lines = ["underlying,date,timing,label"]
    for u in UNDERLYINGS:
        if u.earnings is not None:
            timing = "after_close" if u.earnings.hour >= 16 else "before_open"
            for d in past_releases(u):
                lines.append(f"{u.ticker},{d:%Y-%m-%d},{timing},quarterly results")
            lines.append(f"{u.ticker},{u.earnings:%Y-%m-%d},{timing},quarterly results")
    return "\n".join(lines) + "\n"


def write_demo(out_dir: Path | str) -> list[Path]:
    """Write all demo files into ``out_dir`` (created if needed); return their paths."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    written = []
    for u in UNDERLYINGS:
        p = out / file_name(u)
        p.write_bytes(chain_text(u).encode("utf-8"))
        written.append(p)
    p = out / MESSY_FILE
    p.write_bytes(b"\xef\xbb\xbf" + messy_text().encode("utf-8"))
    written.append(p)
    p = out / EVENTS_FILE
    p.write_bytes(events_text().encode("utf-8"))
    written.append(p)
    return written


def main(argv: list[str] | None = None) -> int:
    """Command-line entry: ``--out DIR`` (default: this package folder)."""
    ap = argparse.ArgumentParser(description="Write the fictional demo chain snapshots.")
    ap.add_argument("--out", default=str(Path(__file__).resolve().parent), help="output folder")
    args = ap.parse_args(argv)
    for p in write_demo(args.out):
        print(p)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
