"""Column-name aliases for chain and history files.

A broker's export rarely spells a column the way optbench does: ``Strike Price``,
``Expiration``, ``Call/Put``, ``OpenInterest``, ``UnderlyingPrice``, ``QuoteDate``.
Every header is reduced to a *key* (lower case, letters and digits only) and looked
up in the alias tables below, so ``Strike Price``, ``strike_price`` and
``STRIKEPRICE`` all mean ``strike``.
"""
from __future__ import annotations

import re
from collections.abc import Iterable

_NON_ALNUM = re.compile(r"[^a-z0-9]+")

# canonical chain field -> accepted header keys (see :func:`header_key`)
CHAIN_ALIASES: dict[str, tuple[str, ...]] = {
    "expiry": ("expiry", "expiration", "expirationdate", "expirydate", "exp", "expdate",
               "expiration_date", "expire", "expiredate", "maturity", "maturitydate"),
    "strike": ("strike", "strikeprice", "k", "exerciseprice", "strikepx"),
    "type": ("type", "optiontype", "callput", "putcall", "cp", "pc", "right", "cpflag",
             "optionright", "kind", "flag"),
    "bid": ("bid", "bidprice", "bidpx"),
    "ask": ("ask", "askprice", "askpx", "offer", "offerprice"),
    "last": ("last", "lastprice", "lasttrade", "lasttradeprice", "lastpx"),
    "volume": ("volume", "vol", "tradevolume", "volumetoday"),
    "open_interest": ("openinterest", "oi", "openint"),
    "symbol": ("symbol", "optionsymbol", "occsymbol", "contractsymbol", "osi",
               "optioncode", "contract"),
    "underlying": ("underlying", "underlyingsymbol", "underlyingcode", "root",
                   "underlyingname"),
    "underlying_price": ("underlyingprice", "underlyinglast", "spot", "spotprice",
                         "underlyingclose", "undprice"),
    "quote_date": ("quotedate", "asof", "asofdate", "tradedate", "date", "quotetime",
                   "snapshotdate"),
    "style": ("style", "exercisestyle", "exercise", "exercisetype"),
    "multiplier": ("multiplier", "contractmultiplier", "contractsize", "sharespercontract"),
    "iv": ("iv", "impliedvolatility", "impliedvol", "impvol", "ivol", "ivmid"),
    "rate": ("rate", "riskfreerate", "interestrate", "r"),
    "div_yield": ("divyield", "dividendyield", "yield", "q"),
}

# fields that belong to one side (call or put) of a wide-layout row
SIDE_FIELDS = ("bid", "ask", "last", "volume", "open_interest", "symbol", "iv")
CALL_WORDS = ("call", "calls", "c")
PUT_WORDS = ("put", "puts", "p")

# history fields; the adjusted close is preferred over the plain close
HISTORY_ALIASES: dict[str, tuple[str, ...]] = {
    "date": ("date", "tradedate", "day", "timestamp", "time", "datetime", "asof"),
    "adj_close": ("adjclose", "adjustedclose", "closeadj", "closeadjusted", "adjclosing",
                  "adjustedclosingprice", "adjcloseprice"),
    "close": ("close", "closeprice", "closing", "closingprice", "last", "price", "px",
              "settle", "settlement"),
    "open": ("open", "openprice", "opening"),
    "high": ("high", "highprice", "hi"),
    "low": ("low", "lowprice", "lo"),
}


def header_key(name: object) -> str:
    """Reduce a header to its lookup key: lower case, letters and digits only.

    >>> header_key(" Strike Price ")
    'strikeprice'
    >>> header_key("Call/Put")
    'callput'
    """
    return _NON_ALNUM.sub("", str(name).lower())


def _lookup(aliases: dict[str, tuple[str, ...]]) -> dict[str, str]:
    table = {}
    for field, keys in aliases.items():
        for key in keys:
            table[header_key(key)] = field
    return table


_CHAIN_LOOKUP = _lookup(CHAIN_ALIASES)
_HISTORY_LOOKUP = _lookup(HISTORY_ALIASES)


def _map(columns: Iterable[object], lookup: dict[str, str]) -> dict[str, str]:
    found: dict[str, str] = {}
    for col in columns:
        field = lookup.get(header_key(col))
        if field is not None and field not in found:  # first column of a field wins
            found[field] = col
    return found


def map_chain_columns(columns: Iterable[object]) -> dict[str, str]:
    """Canonical chain field -> the file's column, for every column recognised.

    When two columns name the same field, the first (leftmost) one is used and the
    other is kept only as a raw field.
    """
    return _map(columns, _CHAIN_LOOKUP)


def map_history_columns(columns: Iterable[object]) -> dict[str, str]:
    """Canonical history field -> the file's column, for every column recognised."""
    return _map(columns, _HISTORY_LOOKUP)


_CAMEL = re.compile(r"(?<=[a-z0-9])(?=[A-Z])")
_WORD_SPLIT = re.compile(r"[^A-Za-z0-9]+")


def _words(name: object) -> list[str]:
    text = _CAMEL.sub(" ", str(name).strip())
    return [w.lower() for w in _WORD_SPLIT.split(text) if w]


def side_of(name: object) -> tuple[str, str] | None:
    """For a wide-layout header, ``(side, field)`` with side ``"call"``/``"put"``.

    The side word may lead or trail: ``Call Bid``, ``bid_call``, ``CallBid``,
    ``C_Bid``, ``Puts OI``. Returns ``None`` when the header is not one side's field.

    >>> side_of("Call Bid")
    ('call', 'bid')
    >>> side_of("OpenInterest_P")
    ('put', 'open_interest')
    >>> side_of("Strike") is None
    True
    """
    words = _words(name)
    if len(words) < 2:
        return None
    for side, vocab in (("call", CALL_WORDS), ("put", PUT_WORDS)):
        for rest in ((words[1:] if words[0] in vocab else None),
                     (words[:-1] if words[-1] in vocab else None)):
            if rest:
                field = _CHAIN_LOOKUP.get("".join(rest))
                if field in SIDE_FIELDS:
                    return side, field
    return None
