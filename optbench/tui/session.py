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


#: progress steps of one run: loading, the comparison's own steps (forwards and vols,
#: fit, simulation, smiles, ...), the headline hedge, the out-of-sample check
STEPS = 8


class Cancelled(Exception):
    """Raised inside the core's progress callback to stop a stale run early."""


def describe(err: BaseException) -> str:
    """An error in one line: a user error as it is, anything else with its type."""
    if isinstance(err, InputError):
        return str(err)
    return f"{type(err).__name__}: {err}"


def run_steps(inputs: Inputs, planner, emit, cancelled=lambda: False) -> None:
    """One run of the workbench, step by step, each result handed to ``emit`` as soon
    as it exists, in the order the screen needs them (the overview's numbers first):

    ``("progress", step, text)``, ``("loaded", chain)``,
    ``("computed", comparison, seconds)``, ``("headline", estimate or None)``,
    ``("checked", comparison with its backtest)``; on an error
    ``("failed", stage, message)`` (stage ``open``, ``headline`` or ``check``) ends
    the run. ``cancelled()`` is asked between steps (and inside the comparison's
    progress callback); a cancelled run stops without a word.
    """
    import time
    started = time.perf_counter()
    stage = "open"
    try:
        emit(("progress", 0, "loading and validating the chain"))
        scenario = load(inputs)
        if cancelled():
            return
        emit(("loaded", scenario.chain))
        step = [1]

        def progress(text: str) -> None:
            if cancelled():
                raise Cancelled()
            step[0] += 1
            emit(("progress", min(step[0], STEPS - 3), text))

        comparison = run_compare(inputs, scenario, progress)
        if cancelled():
            return
        emit(("computed", comparison, time.perf_counter() - started))
        stage = "headline"
        headline = headline_hedge(comparison, inputs.settings, planner)
        if cancelled():
            return
        emit(("headline", headline))
        stage = "check"
        checked = run_backtest(scenario, comparison)
        if not cancelled():
            emit(("checked", checked))
    except Cancelled:
        return
    except Exception as err:  # shown to the user; the app keeps running
        if not cancelled():
            emit(("failed", stage, describe(err)))


def build_inputs(scenario_path=None, history=None, *, model=None, dist=None, mean=None,
                 spot=None, asof=None, rate=None, div_yield=None, max_spread=None,
                 hedge_paths=None, seed=7, style=None, multiplier=None):
    """The workbench's :class:`Inputs` and the user's saved settings
    (:class:`optbench.tui.prefs.Saved`) for :func:`optbench.tui.app.make_app`'s
    arguments (see there); None for ``scenario_path`` is the bundled demo."""
    from optbench.tui import prefs
    chain = Path(scenario_path) if scenario_path is not None else demo_scenario()
    source = OpenRequest(chain=chain, history=Path(history) if history is not None else None)
    saved = prefs.load()
    m = prefs.with_model(saved, model, dist, mean)
    settings = Settings(model=m.model, dist=m.dist, mean=m.mean, spot=spot, asof=asof, rate=rate,
                        div_yield=div_yield, max_spread=max_spread,
                        hedge_paths=int(hedge_paths or N_PATHS), seed=seed,
                        style=style, multiplier=multiplier)
    return Inputs(source=source, settings=settings), saved


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
