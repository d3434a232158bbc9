"""The shipped demo chains are reproducible and internally consistent.

These tests prove that the invented demo data is well-formed and free of
static arbitrage. They are NOT correctness proofs of chaintriage: the data is
invented (rules: invented data is for the demo, never to prove correctness).
Sources are named beside each check with REFERENCE.md's tags.
"""

from __future__ import annotations

import datetime as dt
import subprocess
import sys
from importlib.resources import files
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest

from chaintriage.core.black76 import price
from chaintriage.demo_chains import make_demo as md

DEMO_DIR = Path(str(files("chaintriage.demo_chains")))
CHAIN_FILES = {u.ticker: DEMO_DIR / md.file_name(u) for u in md.UNDERLYINGS}
ALL_FILES = [*CHAIN_FILES.values(), DEMO_DIR / md.MESSY_FILE, DEMO_DIR / md.EVENTS_FILE]
NEW_YORK = ZoneInfo("America/New_York")

# US exchange full-day holidays, REFERENCE.md section 8 (NYSE press releases) [V].
HOLIDAYS = {
    dt.date.fromisoformat(s)
    for s in (
        "2026-01-01 2026-01-19 2026-02-16 2026-04-03 2026-05-25 2026-06-19 2026-07-03 "
        "2026-09-07 2026-11-26 2026-12-25 2027-01-01 2027-01-18 2027-02-15 2027-03-26 "
        "2027-05-31 2027-06-18 2027-07-05 2027-09-06 2027-11-25 2027-12-24"
    ).split()
}


# --- helpers written here, independently of the generator ---------------------------


def _year_fraction(as_of: str, expiry: str, settle: str) -> float:
    """ACT/365 from as_of to 16:00 (pm) or 09:30 (am) New York, via the IANA tz database."""
    start = dt.datetime.fromisoformat(as_of)
    wall = dt.time(16) if settle == "pm" else dt.time(9, 30)
    end = dt.datetime.combine(dt.date.fromisoformat(expiry), wall, tzinfo=NEW_YORK)
    return (end - start).total_seconds() / (365 * 86400)


def _ssvi_w(k, theta, rho, eta, gamma):
    """SSVI total variance, Gatheral & Jacquier (2014) section 4, power-law phi = eta*theta**-gamma [V]."""
    phi = eta * theta ** (-gamma)
    return 0.5 * theta * (1 + rho * phi * k + np.sqrt((phi * k + rho) ** 2 + 1 - rho**2))


def _g(k, w, w1, w2):
    """Gatheral & Jacquier (2014) eq. 2.1 [V]: g = (1 - k w'/(2w))^2 - w'^2/4 (1/w + 1/4) + w''/2."""
    return (1 - k * w1 / (2 * w)) ** 2 - (w1**2 / 4) * (1 / w + 0.25) + w2 / 2


def _load(ticker: str) -> pd.DataFrame:
    d = pd.read_csv(CHAIN_FILES[ticker])
    t = np.array([_year_fraction(a, e, s) for a, e, s in zip(d.as_of, d.expiry, d.settle)])
    d["t"] = t
    d["fwd"] = d.spot * np.exp((d.rate - d.div_yield) * t)
    d["df"] = np.exp(-d.rate * t)
    d["k"] = np.log(d.strike / d.fwd)
    return d


def _atm(g: pd.DataFrame, col: str) -> float:
    """Value of ``col`` at k = 0 from a quadratic through the five strikes nearest the forward."""
    near = g.iloc[np.argsort(g.k.abs().to_numpy())[:5]]
    return float(np.polyval(np.polyfit(near.k, near[col], 2), 0.0))


def _thetas(u: md.Underlying) -> dict[str, float]:
    return {e.date.isoformat(): theta for e, _, theta in md.expiry_slices(u)}


@pytest.fixture(scope="module", params=[u.ticker for u in md.UNDERLYINGS])
def chain(request):
    u = next(x for x in md.UNDERLYINGS if x.ticker == request.param)
    return u, _load(u.ticker)


# --- reproducible -------------------------------------------------------------------


def test_generator_reproduces_shipped_files_byte_for_byte(tmp_path):
    written = md.write_demo(tmp_path)
    assert sorted(p.name for p in written) == sorted(p.name for p in ALL_FILES)
    for p in ALL_FILES:
        assert (tmp_path / p.name).read_bytes() == p.read_bytes(), p.name


def test_command_line_writes_into_given_folder(tmp_path):
    out = tmp_path / "again"
    subprocess.run(
        [sys.executable, "-m", "chaintriage.demo_chains.make_demo", "--out", str(out)],
        check=True, capture_output=True,
    )
    for p in ALL_FILES:
        assert (out / p.name).read_bytes() == p.read_bytes(), p.name


# --- shape of the shipped files -----------------------------------------------------


def test_files_are_small():
    sizes = [p.stat().st_size for p in ALL_FILES]
    assert sum(sizes) < 1_000_000
    rows = sum(len(pd.read_csv(p)) for p in CHAIN_FILES.values())
    assert 1500 <= rows <= 4000


def test_columns_and_snapshot_wide_values(chain):
    u, d = chain
    assert tuple(pd.read_csv(CHAIN_FILES[u.ticker], nrows=0).columns) == (
        "underlying", "as_of", "spot", "expiry", "strike", "kind", "bid", "ask",
        "iv", "iv_basis", "volume", "open_interest", "settle", "rate", "div_yield",
    )  # the snapshot schema of DESIGN.md, iv_basis beside iv
    assert d.notna().all().all()
    for col in ("underlying", "as_of", "spot", "rate", "div_yield", "iv_basis"):
        assert d[col].nunique() == 1, col
    assert d.underlying.iloc[0] == u.ticker
    as_of = pd.Timestamp(d.as_of.iloc[0])
    assert as_of.tzinfo is not None and as_of.utcoffset() == pd.Timedelta(hours=-5)
    assert as_of.weekday() < 5 and as_of.date() not in HOLIDAYS
    assert dt.time(9, 30) < as_of.time() < dt.time(16)  # during the regular session
    assert d.iv_basis.iloc[0] == 365
    assert set(d.kind) == {"call", "put"}
    assert set(d.settle) <= {"pm", "am"}
    assert not d.duplicated(["expiry", "strike", "kind"]).any()


def test_expiries_are_trading_days_from_a_week_to_a_year(chain):
    import QuantLib as ql

    u, d = chain
    expiries = sorted({dt.date.fromisoformat(s) for s in d.expiry})
    assert 8 <= len(expiries) <= 12
    as_of = dt.date(2026, 12, 1)
    days = [(e - as_of).days for e in expiries]
    assert days[0] <= 10 and 300 <= days[-1] <= 400
    nyse = ql.UnitedStates(ql.UnitedStates.NYSE)
    for e in expiries:
        assert e.weekday() < 5 and e not in HOLIDAYS, e  # REFERENCE.md section 8 [V]
        assert nyse.isBusinessDay(ql.Date(e.day, e.month, e.year)), e  # QuantLib NYSE calendar [L]
    # monthly expiries: third Fridays, or the Thursday before when that Friday is a holiday [C]
    third_fridays = {md._nth_weekday(y, m, 4, 3) for y in (2026, 2027) for m in range(1, 13)}
    monthly = [e.date for e in u.expiries if e.cycle == "monthly"]
    assert len(monthly) >= 4
    for e in monthly:
        assert e in third_fridays or (e + dt.timedelta(days=1) in third_fridays and e + dt.timedelta(days=1) in HOLIDAYS)


def test_generator_time_agrees_with_the_tz_database(chain):
    """The generator's built-in daylight-saving rule matches the IANA tz database (zoneinfo) [L]."""
    u, d = chain
    for e, t, _ in md.expiry_slices(u):
        assert t == pytest.approx(_year_fraction(md.AS_OF, e.date.isoformat(), e.settle), abs=1e-12)
    # an expiry after the March 2027 switch is an hour shorter than naive EST arithmetic
    t_june = _year_fraction(md.AS_OF, "2027-06-17", "pm")
    naive = (dt.datetime(2027, 6, 17, 21, tzinfo=dt.timezone.utc) - dt.datetime.fromisoformat(md.AS_OF)).total_seconds()
    assert t_june * 365 * 86400 == pytest.approx(naive - 3600)


def test_quotes_are_sane(chain):
    u, d = chain
    assert (d.bid >= 0).all()
    assert (d.bid <= d.ask).all()
    assert (d.ask > 0).all()
    assert (d.volume >= 0).all() and (d.open_interest >= 0).all()
    assert d.volume.dtype.kind == "i" and d.open_interest.dtype.kind == "i"
    # tick: 0.01 below 3.00, 0.05 from 3.00 up (the generator's stated convention)
    for col in ("bid", "ask"):
        cents = np.round(d[col] * 100).astype(int)
        assert np.allclose(d[col] * 100, cents, atol=1e-6)
        assert (cents[cents >= 300] % 5 == 0).all(), col
    # far out of the money the bid is zero
    assert (d.bid == 0).sum() >= 5


def test_mid_never_below_discounted_intrinsic(chain):
    """A European option is worth at least DF*max(F-K, 0) (call) / DF*max(K-F, 0) (put),
    Hull [V]; in the money the generator keeps the mid a tick above it."""
    u, d = chain
    call = d.kind == "call"
    intr = d.df * np.where(call, np.maximum(d.fwd - d.strike, 0), np.maximum(d.strike - d.fwd, 0))
    mid = (d.bid + d.ask) / 2
    assert (mid[intr > 0] >= intr[intr > 0] + 0.01 - 1e-9).all()
    assert (mid > 0).all()
    # far out of the money: zero bid, ask at one or two ticks
    assert d.ask[d.bid == 0].min() <= 0.02


def test_no_vertical_spread_arbitrage_in_quotes(chain):
    """Calls fall and puts rise with strike, so a lower-strike call's ask must not be
    below a higher-strike call's bid (and the mirror for puts) [C]."""
    u, d = chain
    for _, e in d.groupby("expiry"):
        c = e[e.kind == "call"].sort_values("strike")
        p = e[e.kind == "put"].sort_values("strike")
        # ask(K_i) >= max bid over K_j > K_i, for calls
        best_bid_above = np.maximum.accumulate(c.bid.to_numpy()[::-1])[::-1]
        assert (c.ask.to_numpy()[:-1] >= best_bid_above[1:]).all()
        best_bid_below = np.maximum.accumulate(p.bid.to_numpy())
        assert (p.ask.to_numpy()[1:] >= best_bid_below[:-1]).all()


def test_put_call_parity_within_half_spreads(chain):
    """C - P = DF*(F - K) (put-call parity, Hull, Options, Futures, and Other Derivatives [V]);
    the quoted mids must satisfy it within the two half-spreads."""
    u, d = chain
    c = d[d.kind == "call"].set_index(["expiry", "strike"])
    p = d[d.kind == "put"].set_index(["expiry", "strike"])
    assert c.index.equals(p.index)
    lhs = (c.bid + c.ask) / 2 - (p.bid + p.ask) / 2
    rhs = c.df * (c.fwd - c.index.get_level_values("strike"))
    slack = (c.ask - c.bid) / 2 + (p.ask - p.bid) / 2
    assert ((lhs - rhs).abs() <= slack + 1e-9).all()
    # and the slack is not so loose that the check is empty: near the money it is tight
    near = c.k.abs() < 0.05
    assert (slack[near] / c.fwd[near] < 0.02).all()


# --- the surface --------------------------------------------------------------------


def test_file_iv_is_the_ssvi_surface(chain):
    """The iv column is sqrt(w/T) of the SSVI slices whose parameters the tests below check."""
    u, d = chain
    theta = d.expiry.map(_thetas(u))
    w = _ssvi_w(d.k.to_numpy(), theta.to_numpy(), u.rho, u.eta, u.gamma)
    assert np.allclose(d.iv, np.sqrt(w / d.t), rtol=0, atol=6e-7)


def test_no_calendar_arbitrage(chain):
    """Total variance w(k, T) increases with T at every fixed k = ln(K/F)
    (Gatheral & Jacquier 2014, section 2.1 [V])."""
    u, d = chain
    exp = sorted(_thetas(u).items(), key=lambda kv: kv[1])
    by_time = sorted(_thetas(u), key=lambda s: d.t[d.expiry == s].iloc[0])
    assert [s for s, _ in exp] == by_time  # theta ordered like time
    thetas = np.array([th for _, th in exp])
    k = np.linspace(-3, 3, 1201)
    w = _ssvi_w(k[None, :], thetas[:, None], u.rho, u.eta, u.gamma)
    assert (np.diff(w, axis=0) > 0).all()
    # the same on the file itself, at each expiry's at-the-money point:
    atm_w = [_atm(g.assign(w=g.iv**2 * g.t), "w") for _, g in d[d.kind == "call"].groupby("expiry")]
    assert (np.diff(atm_w) > 0).all()


def test_g_function_reproduces_the_published_counterexample():
    """Gatheral & Jacquier (2014) Example 3.1 (raw SVI, (a,b,m,rho,sigma) =
    (-0.0410, 0.1331, 0.3586, 0.3060, 0.4153)): g(0.9) = -0.032685, g(0) = 1.038650 [V],
    recomputed in REFERENCE.md section 6. Guards the g used below."""
    a, b, m, rho, sig = -0.0410, 0.1331, 0.3586, 0.3060, 0.4153
    k = np.array([0.0, 0.5, 0.9, 1.5])
    x = k - m
    r = np.sqrt(x * x + sig * sig)
    w = a + b * (rho * x + r)
    g = _g(k, w, b * (rho + x / r), b * sig**2 / r**3)
    assert g == pytest.approx([1.038650, 0.069379, -0.032685, 0.029124], abs=1e-6)


def test_no_butterfly_arbitrage(chain):
    """Each SSVI slice satisfies Theorem 4.2 (theta*phi*(1+|rho|) < 4 and
    theta*phi^2*(1+|rho|) <= 4) and g(k) >= 0 (eq. 2.1, Lemma 2.2), Gatheral &
    Jacquier 2014 [V]; w', w'' by central differences here."""
    u, d = chain
    thetas = np.array(sorted(_thetas(u).values()))
    phi = u.eta * thetas ** (-u.gamma)
    assert (thetas * phi * (1 + abs(u.rho)) < 4).all()
    assert (thetas * phi**2 * (1 + abs(u.rho)) <= 4).all()
    k = np.linspace(-3, 3, 1201)[None, :]
    th = thetas[:, None]
    h = 1e-4
    f = lambda kk: _ssvi_w(kk, th, u.rho, u.eta, u.gamma)  # noqa: E731
    w, wp, wm = f(k), f(k + h), f(k - h)
    g = _g(k, w, (wp - wm) / (2 * h), (wp - 2 * w + wm) / h**2)
    assert (g > 0).all()
    # Lee's wing bound (cited by Gatheral & Jacquier [V]): wing slopes below 2
    assert (thetas * phi * (1 + abs(u.rho)) / 2 < 2).all()


def test_call_prices_fall_and_are_convex_in_strike(chain):
    """Per expiry, call prices from the file's iv decrease in strike with slope in
    [-DF, 0] and are convex (a fact of the trade [C]; Breeden & Litzenberger 1978 [M])."""
    u, d = chain
    for _, e in d[d.kind == "call"].groupby("expiry"):
        e = e.sort_values("strike")
        c = price(e.fwd.to_numpy(), e.strike.to_numpy(), e.iv.to_numpy(), e.t.to_numpy(), e.df.to_numpy(), True)
        slope = np.diff(c) / np.diff(e.strike.to_numpy())
        df = e.df.iloc[0]
        assert (slope <= 1e-12).all() and (slope >= -df - 1e-12).all()
        assert (np.diff(slope) >= -1e-7).all()


def test_skew_is_equity_like(chain):
    """Negative skew: the implied vol 10% below the forward exceeds the vol 10% above [C]."""
    u, d = chain
    for _, e in d[d.kind == "call"].groupby("expiry"):
        lo, hi = np.interp([-0.1, 0.1], e.k, e.iv)
        assert lo > hi


def test_earnings_bump_shows_in_the_first_expiry_that_spans_it():
    """OSPX: ATM vol jumps at 2027-01-15 (first expiry after the 2027-01-12 release) and
    falls back after it; TSBH's ATM vol rises smoothly with T."""
    d = _load("OSPX")
    atm = {s: _atm(g, "iv") for s, g in d[d.kind == "call"].groupby("expiry")}
    assert atm["2027-01-15"] - atm["2027-01-08"] > 0.05
    assert atm["2027-01-22"] < atm["2027-01-15"]
    assert atm["2027-02-19"] < atm["2027-01-22"]
    t = d.groupby("expiry").t.first()
    assert d.settle[d.expiry == "2027-01-15"].eq("am").all()
    assert t["2027-01-15"] > _year_fraction(md.AS_OF, "2027-01-12", "pm")

    # without the release's variance, the surface's ATM vol sqrt(theta/T) rises with T
    # (the file matches the surface, see test_file_iv_is_the_ssvi_surface)
    for u in md.UNDERLYINGS:
        slices = md.expiry_slices(u)
        spans = np.array([u.earnings is not None and e.date >= dt.date(2027, 1, 15) for e, _, _ in slices])
        assert spans.sum() == (7 if u.ticker == "OSPX" else 0)
        theta = np.array([th for _, _, th in slices]) - u.earnings_jump * spans
        t = np.array([t for _, t, _ in slices])
        assert (np.diff(np.sqrt(theta / t)) > 0).all()


def test_open_interest_peaks_near_the_money_and_at_round_strikes(chain):
    u, d = chain
    big, _ = u.round_strikes
    checked = 0
    for s, e in d.groupby("expiry"):
        z = (e.k / np.sqrt(_atm(e, "iv") ** 2 * e.t.iloc[0])).abs()  # sigma distance
        far = z > 3
        if far.sum() < 4:  # long OSPX expiries list strikes only out to 3x spot
            continue
        checked += 1
        assert e.open_interest[z < 1].mean() > 3 * e.open_interest[far].mean(), s
        assert e.volume[z < 1].mean() > 3 * e.volume[far].mean(), s
    assert checked >= 8
    inner = d[(d.k.abs() < 0.2)]
    on_round = np.isclose(np.mod(inner.strike, big), 0)
    assert inner.open_interest[on_round].mean() > 1.5 * inner.open_interest[~on_round].mean()


# --- the messy export ---------------------------------------------------------------


def _messy_lines() -> list[str]:
    raw = (DEMO_DIR / md.MESSY_FILE).read_bytes()
    assert raw.startswith(b"\xef\xbb\xbf")
    return raw[3:].decode("utf-8").split("\n")[:-1]


def _is_float(s: str) -> bool:
    try:
        float(s)
    except ValueError:
        return False
    return True


def _is_date(s: str) -> bool:
    try:
        dt.date.fromisoformat(s)
    except ValueError:
        return False
    return True


def test_messy_header_is_mixed_case_and_padded():
    header = _messy_lines()[0].split(",")
    names = [h.strip().lower() for h in header]
    assert {"underlying", "as_of", "spot", "expiry", "strike", "kind", "bid", "ask", "iv"} <= set(names)
    assert any(h != h.strip() for h in header)
    assert any(h.strip() not in (h.strip().lower(), h.strip().upper()) for h in header)
    assert any(h.strip() == h.strip().upper() and h.strip() != h.strip().lower() for h in header)


def test_messy_problems_are_on_the_documented_lines():
    lines = _messy_lines()
    assert 25 <= len(lines) <= 60
    for n in md.MESSY_PROBLEMS:
        assert f"- line {n}:" in md.__doc__, n  # documented at the top of the generator
    cols = [h.strip().lower() for h in lines[0].split(",")]
    rows = {n: dict(zip(cols, lines[n - 1].split(","))) for n in range(2, len(lines) + 1) if lines[n - 1]}
    as_of = dt.date.fromisoformat(rows[2]["as_of"][:10])

    assert lines[19] == ""  # line 20
    assert float(rows[3]["bid"]) == 0.0
    assert float(rows[9]["bid"]) > float(rows[9]["ask"])
    assert float(rows[12]["bid"]) < 0 or float(rows[12]["ask"]) < 0
    assert not _is_float(rows[15]["strike"])
    assert rows[18]["kind"].lower() not in {"c", "p", "call", "put"}
    assert rows[22]["ask"] == "" and float(rows[22]["bid"]) > 0
    b, a = float(rows[24]["bid"]), float(rows[24]["ask"])
    ordinary = [float(r["ask"]) - float(r["bid"]) for n, r in rows.items() if n not in md.MESSY_PROBLEMS]
    assert a - b > (a + b) / 2 and a - b > 5 * np.median(ordinary)
    assert rows[27]["expiry"] == "2027-02-30" and not _is_date(rows[27]["expiry"])
    assert dt.date.fromisoformat(rows[29]["expiry"]) < as_of
    key = lambda r: (r["expiry"], r["strike"], r["kind"].lower())  # noqa: E731
    assert key(rows[31]) == key(rows[30]) and rows[31] != rows[30]

    # every other line is an ordinary quote, with c/p kinds and IV in percent
    flagged = set(md.MESSY_PROBLEMS)
    kinds_seen = set()
    for n, r in rows.items():
        assert r["iv"].endswith("%") and _is_float(r["iv"][:-1])
        if n in flagged:
            continue
        assert r["kind"] in {"C", "P", "c", "p"}, n
        kinds_seen.add(r["kind"])
        assert _is_float(r["strike"]) and _is_date(r["expiry"]), n
        assert dt.date.fromisoformat(r["expiry"]) > as_of, n
        assert 0 <= float(r["bid"]) <= float(r["ask"]), n
    assert kinds_seen == {"C", "P", "c", "p"}
    keys = [key(r) for n, r in rows.items() if n != 31]
    assert len(keys) == len(set(keys))  # the only duplicate is the documented one


def test_messy_file_still_reads_as_a_table():
    d = pd.read_csv(DEMO_DIR / md.MESSY_FILE, encoding="utf-8-sig", skip_blank_lines=True, dtype=str)
    assert len(d) == len([x for x in _messy_lines()[1:] if x])
    assert d.iloc[:, 0].str.strip().eq("MWCS").all()
