"""An invented sample universe for ``optbench screen``: N underlyings of different
characters, each a scenario folder, reproducible from a seed.

Everything here is invented: names are built from made-up syllables and a sector
word ("Corvane Freight"); codes are a letter, a digit and two letters ("C4RV") — a
digit in second place keeps them plainly apart from the listed tickers people know.
They trade on the invented exchange of the ZPHX demo (same holidays) and are quoted
on the same day, :data:`optbench.demo.ASOF`.

Characters
----------
Each member's daily log returns follow a GJR-GARCH(1,1) with standardised Student-t
innovations (Glosten, Jagannathan and Runkle 1993; Bollerslev 1987), as the ZPHX
demo, with the parameters of its character (:data:`CHARACTERS`):

``calm``
    low long-run vol (9–15 %), light tails, mild leverage effect;
``turbulent``
    high long-run vol (35–55 %), heavy tails, strong leverage effect;
``trending``
    moderate vol with a strong drift (25–45 % a year, up or down);
``switching``
    a long-run level that switches between a calm and a turbulent spell (a
    two-state Markov chain, Hamilton 1989, smoothed exponentially);
``broken``
    one member of every universe of two or more: its ``chain.csv`` lost its ``ask``
    column (a truncated export), so ``optbench screen`` reports it in its own row.

The option chain
----------------
On :data:`optbench.demo.ASOF`, six expiries from one week to one year. Each
expiry's ATM implied vol is the closed-form GJR forecast of the average vol over the
option's life (with the member's true parameters; see
:func:`optbench.demo.reference_forecast_vol` for the formula) plus the member's
premium in vol points, drawn between −3 and +5 points so that rich, fair and cheap
all show up; the smile around it is the SSVI surface of the ZPHX demo (Gatheral and
Jacquier 2014) with a per-member skew; mids are Black-Scholes-Merton prices and the
bid/ask spreads follow the ZPHX rules (vol points times vega, at least one tick).
"""
from __future__ import annotations

import datetime as _dt
import io
from dataclasses import asdict, dataclass
from pathlib import Path

import numpy as np

from optbench import demo

UNIVERSE_SEED = 20261348
FIRST_DATE = _dt.date(2023, 11, 27)      # three years of weekdays before demo.ASOF
RATE = demo.RATE
STYLE = "european"
MULTIPLIER = 100
EXPIRIES = (_dt.date(2026, 12, 4), _dt.date(2026, 12, 18), _dt.date(2027, 1, 15),
            _dt.date(2027, 2, 19), _dt.date(2027, 5, 21), _dt.date(2027, 11, 19))
MONEYNESS = (0.70, 1.30)                 # strikes listed from 70 % to 130 % of spot
CHAIN_COLUMNS = ("underlying", "quote_date", "underlying_price", "expiry", "strike",
                 "type", "bid", "ask", "last", "volume", "open_interest", "style",
                 "multiplier")
BROKEN = "broken"


@dataclass(frozen=True)
class Character:
    """Parameters of one kind of underlying (annual decimals unless noted)."""

    vol: tuple[float, float]           # long-run vol drawn uniformly in this range
    drift: tuple[float, float]         # annual drift of the log price, uniform
    alpha: float                       # GJR ARCH term
    gamma: float                       # GJR leverage term
    beta: float                        # GJR GARCH term
    nu: float                          # Student-t degrees of freedom
    switch: tuple[float, float] = (0.0, 0.0)   # daily calm->turbulent, turbulent->calm
    turbulent_factor: float = 1.0      # turbulent level / calm level (switching only)
    trend_sign: bool = False           # drift sign drawn at random


CHARACTERS = {
    "calm": Character(vol=(0.09, 0.15), drift=(0.02, 0.08), alpha=0.04, gamma=0.05,
                      beta=0.915, nu=9.0),
    "turbulent": Character(vol=(0.35, 0.55), drift=(-0.05, 0.05), alpha=0.07, gamma=0.10,
                           beta=0.85, nu=6.0),
    "trending": Character(vol=(0.18, 0.28), drift=(0.25, 0.45), alpha=0.05, gamma=0.08,
                          beta=0.89, nu=7.0, trend_sign=True),
    "switching": Character(vol=(0.12, 0.18), drift=(0.0, 0.06), alpha=0.03, gamma=0.10,
                           beta=0.90, nu=6.0, switch=(1.0 / 200.0, 1.0 / 80.0),
                           turbulent_factor=2.5),
}
#: the order characters are dealt to the members (the broken one is placed apart)
DEAL = ("calm", "turbulent", "trending", "switching")

_SYLLABLES = ("Bral", "Corv", "Dunm", "Eskr", "Fenw", "Galv", "Hask", "Ilvr", "Jorv",
              "Kest", "Lumb", "Morv", "Nevr", "Orrn", "Pelv", "Quar", "Rusk", "Solv",
              "Tarn", "Ulvm", "Varn", "Wexl", "Yarr", "Zebr")
_ENDINGS = ("ane", "ith", "ora", "usk", "elm", "arro", "ivo", "enth", "oss", "und")
_SECTORS = ("Holdings", "Freight", "Grid Works", "Foods", "Minerals", "Textiles",
            "Software", "Shipping", "Pharma", "Utilities", "Glassworks", "Aerospace",
            "Timber", "Ceramics", "Telecom")


@dataclass(frozen=True)
class Member:
    """One invented underlying of the sample universe."""

    code: str
    name: str
    character: str
    spot: float
    long_run_vol: float
    drift: float
    premium: float                     # ATM IV minus forecast, vol points (decimal)
    note: str

    def to_dict(self) -> dict:
        return asdict(self)


# ------------------------------------------------------------------ names and codes
def invented_names(rng: np.random.Generator, n: int) -> list[tuple[str, str]]:
    """``n`` distinct ``(code, name)`` pairs: made-up words, codes letter-digit-letter-letter."""
    words = [s + e for s in _SYLLABLES for e in _ENDINGS]
    combos = len(words) * len(_SECTORS)
    if n > combos:
        raise ValueError(f"at most {combos} invented names")
    picks = rng.choice(combos, size=n, replace=False)
    out, codes = [], set()
    for p in picks:
        word, sector = words[p // len(_SECTORS)], _SECTORS[p % len(_SECTORS)]
        consonants = list(dict.fromkeys(c for c in word[1:].upper() if c not in "AEIOU"))
        pairs = [a + b for a in consonants + list("XQZ") for b in consonants + list("XQZ")
                 if a != b]
        digit = int(rng.integers(10))
        code = next((c for c in (f"{word[0].upper()}{(digit + d) % 10}{p}"
                                 for p in pairs for d in range(10)) if c not in codes), None)
        if code is None:                      # pragma: no cover - hundreds of codes per word
            raise ValueError("ran out of invented codes")
        codes.add(code)
        out.append((code, f"{word} {sector}"))
    return out


# ------------------------------------------------------------------ one member
def _simulate_closes(rng: np.random.Generator, ch: Character, vol: float, drift: float,
                     n: int, start: float) -> tuple[np.ndarray, float, float, float]:
    """Closes of a GJR-GARCH(1,1)-t path; returns ``(close, next_var, long_run_var,
    persistence)`` (daily variances)."""
    calm_var = vol ** 2 / 252.0
    level = np.full(n, calm_var)
    long_run = calm_var
    if ch.switch[0] > 0:
        u = rng.random(n)
        turbulent = np.zeros(n, bool)
        state = False
        for i in range(n):
            if u[i] < (ch.switch[1] if state else ch.switch[0]):
                state = not state
            turbulent[i] = state
        target = np.log(np.where(turbulent, calm_var * ch.turbulent_factor ** 2, calm_var))
        smooth = np.empty(n)
        x = target[0]
        for i in range(n):
            x = demo.LEVEL_SMOOTHING * x + (1.0 - demo.LEVEL_SMOOTHING) * target[i]
            smooth[i] = x
        level = np.exp(smooth)
        share = ch.switch[0] / (ch.switch[0] + ch.switch[1])
        long_run = calm_var * ((1.0 - share) + share * ch.turbulent_factor ** 2)
    persistence = ch.alpha + 0.5 * ch.gamma + ch.beta
    omega = level * (1.0 - persistence)
    z = rng.standard_t(ch.nu, size=n) * np.sqrt((ch.nu - 2.0) / ch.nu)
    eps = np.empty(n)
    v = level[0]
    for i in range(n):
        eps[i] = np.sqrt(v) * z[i]
        v = omega[i] + (ch.alpha + (ch.gamma if eps[i] < 0.0 else 0.0)) * eps[i] ** 2 \
            + ch.beta * v
    mu = drift / 252.0 - 0.5 * vol ** 2 / 252.0
    returns = mu + eps
    returns[0] = 0.0
    close = np.round(start * np.exp(np.cumsum(returns)), 2)
    return close, float(v), float(long_run), float(persistence)


def _forecast(next_var: float, long_run: float, persistence: float,
              trading_days: np.ndarray) -> np.ndarray:
    """Annualised average vol over each horizon (closed-form GJR term structure, as
    :func:`optbench.demo.reference_forecast_vol`)."""
    h = np.asarray(trading_days, float)
    avg = long_run + (next_var - long_run) * (1.0 - persistence ** h) / (
        (1.0 - persistence) * h)
    return np.sqrt(252.0 * avg)


def _strike_step(spot: float) -> float:
    """A round strike increment near 2.5 % of spot (1, 2.5 or 5 times a power of ten)."""
    raw = 0.025 * spot
    power = 10.0 ** np.floor(np.log10(raw))
    return float(min((1.0, 2.5, 5.0, 10.0), key=lambda m: abs(m * power - raw)) * power)


def _chain_rows(rng: np.random.Generator, code: str, spot: float, div_yield: float,
                atm: np.ndarray, rho: float) -> list[dict]:
    from optbench.pricing.bsm import bsm_price
    exp = np.array(EXPIRIES, dtype="datetime64[D]")
    t_exp = (exp - np.datetime64(demo.ASOF)).astype(int) / 365.0
    theta = np.maximum.accumulate(atm ** 2 * t_exp * (1.0 + 1e-6 * np.arange(len(atm))))
    step = _strike_step(spot)
    strikes = np.arange(np.ceil(MONEYNESS[0] * spot / step) * step,
                        MONEYNESS[1] * spot + 1e-9, step)
    n_k = strikes.size
    i = np.repeat(np.arange(len(EXPIRIES)), 2 * n_k)
    is_call = np.tile(np.repeat([True, False], n_k), len(EXPIRIES))
    strike = np.tile(strikes, 2 * len(EXPIRIES))
    t = t_exp[i]
    fwd = spot * np.exp((RATE - div_yield) * t)
    k = np.log(strike / fwd)
    phi = demo.SSVI_ETA * theta[i] ** (-demo.SSVI_LAMBDA) * (1.0 + theta[i]) ** (
        demo.SSVI_LAMBDA - 1.0)
    w = 0.5 * theta[i] * (1.0 + rho * phi * k + np.sqrt((phi * k + rho) ** 2 + 1.0 - rho ** 2))
    vol = np.sqrt(w / t)
    mid = bsm_price(spot, strike, t, RATE, div_yield, vol, is_call)
    sd = vol * np.sqrt(t)
    d1 = (np.log(fwd / strike) + 0.5 * sd ** 2) / sd
    vega = spot * np.exp(-div_yield * t) * np.sqrt(t) * np.exp(-0.5 * d1 ** 2) / np.sqrt(
        2 * np.pi)
    half_vol = 0.002 + 0.001 * np.minimum(np.abs(k) / sd, 4.0) + 0.0015 / np.sqrt(t * 12.0)
    half = np.maximum(np.maximum(vega * half_vol, 0.5 * demo._tick(mid)), 0.004 * mid)
    bid = np.maximum(demo._round_down(mid - half), 0.0)
    ask = demo._round_up(mid + half)
    intrinsic = np.maximum(np.where(is_call, spot - strike, strike - spot), 0.0)
    # the quoted mid stays above the no-arbitrage lower bound of a European option,
    # max(±(S e^{-qt} - K e^{-rt}), 0) (Hull, Options, Futures, and Other Derivatives, ch. 11)
    parity = spot * np.exp(-div_yield * t) - strike * np.exp(-RATE * t)
    lower = np.maximum(np.where(is_call, parity, -parity), 0.0)
    keep = ((mid >= demo.MIN_MID) & (bid >= 0.01) & (bid >= intrinsic)
            & (0.5 * (bid + ask) >= lower + 0.005) & (ask - bid <= 0.8 * 0.5 * (ask + bid)))
    oi = np.floor(1500.0 * np.exp(-0.5 * (k / (0.06 + 0.35 * np.sqrt(t))) ** 2)
                  * rng.lognormal(0.0, 0.7, size=k.size))
    volume = rng.poisson(oi * 0.05)
    last = np.maximum(demo._round_near(bid + rng.random(k.size) * (ask - bid)), 0.01)
    f = demo._fmt
    quote_date, px = demo.ASOF.isoformat(), f(spot)
    return [{"underlying": code, "quote_date": quote_date, "underlying_price": px,
             "expiry": EXPIRIES[i[j]].isoformat(), "strike": f(strike[j]),
             "type": "C" if is_call[j] else "P", "bid": f(bid[j]), "ask": f(ask[j]),
             "last": f(last[j]) if volume[j] > 0 else "", "volume": str(int(volume[j])),
             "open_interest": str(int(oi[j])), "style": STYLE, "multiplier": str(MULTIPLIER)}
            for j in np.flatnonzero(keep)]


def member_files(rng: np.random.Generator, code: str, name: str,
                 character: str) -> tuple[Member, dict[str, bytes]]:
    """One member's scenario files (``chain.csv``, ``history.csv``, ``meta.toml``)."""
    hol = demo.holidays()
    dates = demo.trading_dates(FIRST_DATE, demo.ASOF, hol)
    ch = CHARACTERS["calm" if character == BROKEN else character]
    vol = float(rng.uniform(*ch.vol))
    drift = float(rng.uniform(*ch.drift)) * (float(rng.choice((-1.0, 1.0)))
                                             if ch.trend_sign else 1.0)
    start = float(np.exp(rng.uniform(np.log(20.0), np.log(800.0))))
    close, next_var, long_run, persistence = _simulate_closes(rng, ch, vol, drift,
                                                              dates.size, start)
    spot = float(close[-1])
    tdays = demo._trading_days_to(np.array(EXPIRIES, dtype="datetime64[D]"), hol)
    premium = float(rng.uniform(-0.03, 0.05))
    atm = _forecast(next_var, long_run, persistence, tdays) + premium \
        + rng.normal(0.0, 0.004, size=len(EXPIRIES))
    atm = np.maximum(atm, 0.03)
    div_yield = round(float(rng.uniform(0.0, 0.03)), 4)
    rows = _chain_rows(rng, code, spot, div_yield, atm, rho=float(rng.uniform(-0.8, -0.3)))
    columns = CHAIN_COLUMNS
    note = f"long-run vol {vol:.0%}, drift {drift:+.0%} a year, premium {100 * premium:+.1f} pts"
    if character == BROKEN:
        columns = tuple(c for c in CHAIN_COLUMNS if c != "ask")
        note = "chain.csv has no ask column (a truncated export): the screen reports it"
    chain = io.StringIO()
    chain.write(",".join(columns) + "\n")
    for r in rows:
        chain.write(",".join(r[c] for c in columns) + "\n")
    hist = io.StringIO()
    hist.write("date,close\n")
    for d, c in zip(dates.astype(str), close):
        hist.write(f"{d},{c:.2f}\n")
    holidays = ", ".join(f'"{d.isoformat()}"' for d in hol)
    meta = (
        "# optbench sample universe member. The data are invented: the company, its\n"
        "# code, prices and option chain are simulated by `optbench demo --universe`.\n"
        f'name = "{name}"\n'
        f'code = "{code}"\n'
        f'character = "{character}"\n'
        f"spot = {spot:.2f}\n"
        f"asof = {demo.ASOF.isoformat()}\n"
        f"rate = {RATE}\n"
        f"div_yield = {div_yield}\n"
        f'style = "{STYLE}"\n'
        f"multiplier = {MULTIPLIER}\n"
        f'note = "Invented data for demonstration only; not a real company."\n'
        f"holidays = [{holidays}]\n"
    )
    member = Member(code=code, name=name, character=character, spot=spot,
                    long_run_vol=vol, drift=drift, premium=premium, note=note)
    return member, {"chain.csv": chain.getvalue().encode(),
                    "history.csv": hist.getvalue().encode(), "meta.toml": meta.encode()}


# ------------------------------------------------------------------ the universe
def characters_for(rng: np.random.Generator, n: int) -> list[str]:
    """The character of each of ``n`` members: dealt in turn from :data:`DEAL`, with
    one member (at a seeded position) ``broken`` when ``n >= 2``."""
    dealt = [DEAL[i % len(DEAL)] for i in range(n - (1 if n >= 2 else 0))]
    if n >= 2:
        dealt.insert(int(rng.integers(n)), BROKEN)
    return dealt


def generate_universe(n: int, seed: int = UNIVERSE_SEED) -> list[tuple[Member, dict]]:
    """``n`` members and their files (pure: nothing written); same seed, same bytes."""
    rng = np.random.default_rng(seed)
    names = invented_names(rng, n)
    kinds = characters_for(rng, n)
    # each member draws from its own stream, so one member's files do not depend on
    # how many random numbers the members before it used
    streams = rng.spawn(n)
    return [member_files(s, code, name, kind)
            for s, (code, name), kind in zip(streams, names, kinds)]


def write_universe(folder: str | Path, n: int, seed: int = UNIVERSE_SEED) -> list[Member]:
    """Write ``n`` members into ``folder/<code>/`` (created if needed); the members."""
    folder = Path(folder)
    out = []
    for member, files in generate_universe(n, seed):
        target = folder / member.code
        target.mkdir(parents=True, exist_ok=True)
        for name, data in files.items():
            (target / name).write_bytes(data)
        out.append(member)
    return out
