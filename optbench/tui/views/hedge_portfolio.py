"""The hedge planner's portfolio section: beta with its error, the simulated loss
distribution, the hedge's greeks and the protection menu.

The numbers are :func:`optbench.analysis.portfolio.plan.portfolio_hedge` on the
comparison on screen, with the planner's simulation settings — the same call
``optbench hedge --holdings ... --menu`` makes, so the two agree for the same inputs.
This module only finds the holdings, runs that call and draws its result.
"""
from __future__ import annotations

from pathlib import Path

from rich.console import Group
from rich.table import Table
from rich.text import Text

from optbench.tui import fmt

#: the planner's portfolio choices
SOURCES = (("typed value and beta", "typed"), ("holdings beside the chain", "holdings"))
MENU_CHOICES = (("off", "off"), ("on (efficient rows)", "on"))

_FITS: dict = {}


def find_holdings(chain: Path) -> Path | None:
    """``holdings.csv`` in the scenario folder (or beside the chain file), or None."""
    chain = Path(chain)
    folder = chain if chain.is_dir() else chain.parent
    path = folder / "holdings.csv"
    return path if path.is_file() else None


def portfolio_fit(comparison, holdings: Path):
    """The holdings' beta and basis risk (cached per file and comparison)."""
    key = (str(holdings), id(comparison))
    if key not in _FITS:
        from optbench.analysis.portfolio.fit import fit_portfolio
        from optbench.data.holdings import load_holdings, load_price_panel
        h = load_holdings(holdings)
        folder = holdings.parent
        hist = folder / "holdings_history.csv"
        panel = load_price_panel(hist if hist.is_file() else folder / "histories", h.symbols)
        _FITS.clear()
        _FITS[key] = fit_portfolio(comparison.history["date"].to_numpy(),
                                   comparison.history["ret"].to_numpy(), holdings=h,
                                   panel=panel)
    return _FITS[key]


def compute(comparison, kwargs: dict, *, holdings: Path | None, menu: bool,
            n_paths: int, seed: int | None):
    """The planner's :class:`~optbench.analysis.portfolio.plan.PortfolioHedge`."""
    from optbench.analysis.portfolio.plan import portfolio_hedge
    from optbench.analysis.results import HedgeRequest
    portfolio = portfolio_fit(comparison, holdings) if holdings is not None else None
    args = dict(kwargs)
    if portfolio is not None:
        args.pop("beta", None)
    return portfolio_hedge(comparison, HedgeRequest(**args), portfolio=portfolio, menu=menu,
                           n_paths=n_paths, seed=seed)


def _bars(counts, width: int = 24) -> list[str]:
    top = max(max(counts), 1)
    return ["█" * round(width * c / top) for c in counts]


def loss_table(ph) -> Table:
    L = ph.loss
    t = Table(expand=True, header_style="bold", title=f"P&L at expiry {fmt.date(L.expiry)}, "
              f"{L.n_paths:,} joint paths (VaR/ES as losses)", title_justify="left")
    for c in ("", "Unhedged", "Hedged"):
        t.add_column(c, justify="left" if not c else "right", no_wrap=True)
    for key, label in (("mean", "Mean"), ("var_95", "VaR 95%"), ("es_95", "ES 95%"),
                       ("var_99", "VaR 99%"), ("es_99", "ES 99%")):
        t.add_row(label, fmt.money(L.unhedged[key], key == "mean"),
                  fmt.money(L.hedged[key], key == "mean"))
    t.add_row(f"P(loss > {fmt.money(L.loss_level)})",
              fmt.pct_sign(L.unhedged["prob_loss_over"], 1),
              fmt.pct_sign(L.hedged["prob_loss_over"], 1))
    return t


def histogram(ph) -> Table:
    h = ph.loss.histogram
    step = max(1, len(h["unhedged"]) // 16)
    cu = [sum(h["unhedged"][i:i + step]) for i in range(0, len(h["unhedged"]), step)]
    ch = [sum(h["hedged"][i:i + step]) for i in range(0, len(h["hedged"]), step)]
    t = Table(expand=True, header_style="bold", title="Distribution of P&L", box=None,
              title_justify="left")
    t.add_column("from", justify="right", no_wrap=True)
    t.add_column("unhedged", no_wrap=True)
    t.add_column("hedged", no_wrap=True)
    for edge, u, g in zip(h["edges"][::step], _bars(cu), _bars(ch)):
        t.add_row(fmt.money(edge, True), Text(u, style="red"), Text(g, style="green"))
    return t


def greeks_table(ph) -> Table:
    t = Table(expand=True, header_style="bold", title="Greeks of the hedge (money)",
              title_justify="left")
    for c in ("Position", "Δ units", "Δ money", "Δ as portfolio", "Γ per 1%", "Vega/pt",
              "Theta/day"):
        t.add_column(c, justify="left" if c == "Position" else "right", no_wrap=True)
    for r in ph.greeks.to_dict(orient="records"):
        t.add_row(r["position"], fmt.num(r["delta_units"], 0, True), fmt.money(r["delta_money"], True),
                  fmt.money(r["delta_portfolio_value"], True),
                  fmt.money(r["gamma_money_per_pct"], True),
                  fmt.money(r["vega_per_vol_point"], True), fmt.money(r["theta_per_day"], True))
    return t


def menu_table(ph) -> Table:
    m = ph.menu
    t = Table(expand=True, header_style="bold", title_justify="left",
              title=f"Protection menu: {int(m.frame['efficient'].sum())} efficient of "
                    f"{len(m.frame)} (cost = overpay, protection = cut in 99% ES)")
    for c in ("Expiry", "Structure", "Floor", "Strikes", "Paid", "Overpay", "ES99 cut",
              "Cost/cut"):
        t.add_column(c, justify="left" if c in ("Expiry", "Structure", "Strikes") else "right",
                     no_wrap=True)
    for r in m.efficient_frame().to_dict(orient="records"):
        other = "" if r["other_strike"] != r["other_strike"] else f" / {r['other_strike']:g}"
        t.add_row(fmt.date(r["expiry"]), r["structure"].replace("_", " "),
                  fmt.pct(r["floor"], 1) + "%", f"{r['put_strike']:g}{other}",
                  fmt.money(r["premium_paid"], True), fmt.money(r["overpay"], True),
                  fmt.money(r["es99_reduction"]), fmt.num(r["cost_per_reduction"], 3))
    return t


def portfolio_view(ph) -> Group:
    """Everything the section shows, in reading order."""
    parts = []
    p = ph.portfolio
    if p is not None:
        b = p.beta
        parts.append(Text(f"Portfolio {fmt.money(p.value)}: beta {b.beta:.3f} ± {b.beta_se:.3f} "
                          f"(s.e.), R² {b.r_squared:.2f}, residual vol "
                          f"{fmt.pct_sign(b.residual_vol, 1)} over {b.n_obs} returns; "
                          f"hedge ratio {p.hedge_ratio:.3f} ({p.ratio_source})", style="bold"))
        left = p.holdings[p.holdings["status"] != "used"]["symbol"].tolist()
        if left:
            parts.append(Text(f"left out of the estimate: {', '.join(left)}", style="dim"))
    if ph.loss is not None:
        parts += [loss_table(ph), histogram(ph)]
    parts.append(greeks_table(ph))
    if ph.menu is not None:
        parts.append(menu_table(ph))
    parts.append(Text(ph.basis_note, style="dim"))
    return Group(*parts)
