"""The workbench's link to the core: open a scenario, run the comparison, price a
hedge, write an export. No textual here; each function is one step a worker runs.

Nothing is computed in this module: it calls :func:`optbench.compare`,
:func:`optbench.hedge` and the report writers with the user's inputs.
"""
from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field, replace
from pathlib import Path

from optbench.errors import InputError
from optbench.tui.dialogs.requests import OpenRequest, Settings

#: the simulation behind the hedge's expected payoff and probability; the same as
#: ``optbench hedge`` uses, so the planner shows the command's numbers.
N_PATHS = 20000
SEED = 7

#: the default headline protection on the overview (until the planner is changed):
#: a put struck at 90 % of spot, the expiry nearest 91 days, on 10,000,000
HEADLINE = {"days": 91, "floor": 0.90, "structure": "put", "portfolio_value": 10_000_000.0,
            "beta": 1.0}


def demo_scenario() -> Path:
    """The bundled demo scenario folder: the checkout's ``chains/ZPHX``, or the copy
    shipped inside an installed package."""
    from optbench.data.scenario import bundled_demo
    return bundled_demo()


@dataclass(frozen=True)
class Inputs:
    """Everything a comparison depends on; a change of any field means recompute."""

    source: OpenRequest
    settings: Settings = field(default_factory=Settings)

    def with_settings(self, settings: Settings) -> "Inputs":
        return replace(self, settings=settings)

    @property
    def label(self) -> str:
        return str(self.source.chain)


def check_source(source: OpenRequest) -> None:
    """Fail early, in one line, on paths that do not exist."""
    if not source.chain.exists():
        raise InputError(source.chain, "no such file or folder")
    if source.history is not None and not source.history.exists():
        raise InputError(source.history, "no such file")


def load(inputs: Inputs):
    """Load and validate the scenario (step 1): a :class:`~optbench.data.Scenario`
    with the chain (quality, rejected rows) and the price history."""
    from optbench.data import load_scenario
    check_source(inputs.source)
    overrides = dict(inputs.settings.overrides())
    if inputs.source.history is not None:
        overrides["history"] = inputs.source.history
    return load_scenario(inputs.source.chain, **overrides)


def run_compare(inputs: Inputs, scenario, progress=None):
    """The comparison (step 2) on the loaded scenario: a
    :class:`~optbench.analysis.results.Comparison` (its out-of-sample check follows
    separately, :func:`run_backtest`, so the first screen does not wait for it).

    ``progress`` is called with a short text before each long step.
    """
    from optbench import compare
    s = inputs.settings
    return compare(scenario, None, model=s.model, dist=s.dist, mean=s.mean,
                   seed=s.seed, progress=progress, drift=s.drift,
                   excess_return=s.excess_return)


#: out-of-sample days of the model check: the last year of returns, as
#: ``optbench compare --backtest`` without a split date
OUT_OF_SAMPLE_DAYS = 252


def run_backtest(scenario, comparison):
    """The out-of-sample check of the comparison's fitted model (same model name,
    distribution and mean) over the last :data:`OUT_OF_SAMPLE_DAYS` returns; returns
    the comparison with its ``backtest`` summary filled in."""
    from dataclasses import replace as _replace

    from optbench.volatility.backtest import backtest
    dates = scenario.history.dates
    split = str(dates[max(len(dates) - OUT_OF_SAMPLE_DAYS - 1, 1)])[:10]
    m = comparison.model
    result = backtest(scenario.history, split, model=m.name, dist=m.dist, mean=m.mean)
    return _replace(comparison, backtest=result.to_dict())


def run_hedge(comparison, *, n_paths: int = N_PATHS, seed: int | None = SEED, **request):
    """A hedge estimate on a finished comparison (the planner and the headline), as
    ``optbench hedge`` computes it for the same inputs."""
    from optbench import hedge
    return hedge(None, comparison=comparison, n_paths=n_paths, seed=seed, **request)


def headline_hedge(comparison, settings: Settings | None = None, planner=None):
    """The overview's headline protection on the hedge planner's inputs (a
    :class:`~optbench.tui.prefs.PlannerState`; default: a put at 90 % of spot nearest
    91 days on 10,000,000), or None when the chain cannot give it."""
    from optbench.tui.prefs import PlannerState
    s = settings or Settings()
    planner = planner or PlannerState()
    listed = [r.expiry.isoformat() for r in comparison.expiries]
    try:
        return run_hedge(comparison, n_paths=s.hedge_paths, seed=s.seed,
                         **planner.hedge_kwargs(listed))
    except InputError:
        return None


def quality_dict(quality) -> dict:
    """The loader's Quality (a frozen dataclass) as the comparison's quality dict."""
    if isinstance(quality, dict):
        return quality
    from dataclasses import asdict, is_dataclass
    if is_dataclass(quality):
        return asdict(quality)
    return dict(quality)


def record_store_path() -> Path:
    """The record store the workbench appends to (ctrl+r): ``$OPTBENCH_RECORD_STORE``,
    else ``records.sqlite`` in optbench's folder of the user's data directory — the
    file ``optbench track --store`` reads."""
    import os
    given = os.environ.get("OPTBENCH_RECORD_STORE")
    if given:
        return Path(given).expanduser()
    from optbench.data.scenario import user_data_folder
    return user_data_folder() / "records.sqlite"


def export_stem(comparison) -> str:
    asof = comparison.asof.isoformat() if isinstance(comparison.asof, _dt.date) else "asof"
    return f"optbench-{comparison.underlying}-{asof}"
