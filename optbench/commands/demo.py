"""``optbench demo``: write the invented demo data.

Without ``--universe``: the Zephyr Composite Index scenario (ZPHX) — ``chain.csv``,
``history.csv`` and ``meta.toml`` from a fixed seed, byte for byte the same on every
run. With ``--universe N``: N invented underlyings of different characters, one
scenario folder each, for ``optbench screen``.

Where it writes: ``--out FOLDER``; else, from a source checkout, the repository's
``chains/ZPHX`` (the bundled scenario); else (an installed copy) the user's data
folder (a universe in a sub-folder named by its size and seed). A ``--out`` folder that already holds files needs ``--force``; then only the
files optbench writes are replaced, everything else in the folder stays.
"""
from __future__ import annotations

import argparse
from pathlib import Path

from optbench.commands.common import add_output_options, whole_number, write_output
from optbench.errors import InputError

#: largest sample universe ``--universe`` writes
MAX_UNIVERSE = 500


def checkout_folder() -> Path | None:
    """``chains/ZPHX`` of the source checkout optbench runs from, or None."""
    from optbench.data.scenario import DEMO_CODE, checkout_root
    root = checkout_root()
    return None if root is None else root / "chains" / DEMO_CODE


def default_folder(universe: int | None, seed: int | None) -> Path:
    """Where ``optbench demo`` writes without ``--out``: the checkout's
    ``chains/ZPHX`` (scenario), else the user's data folder; a universe goes to
    ``universes/<N>-seed<seed>`` there, so universes of other sizes never mix."""
    from optbench.data.scenario import DEMO_CODE, user_data_folder
    if universe is None:
        folder = checkout_folder()
        if folder is not None:
            return folder
        return user_data_folder() / "scenarios" / DEMO_CODE
    from optbench.demo_universe import UNIVERSE_SEED
    seed = UNIVERSE_SEED if seed is None else seed
    return user_data_folder() / "universes" / f"{universe}-seed{seed}"


def add_parser(subparsers) -> argparse.ArgumentParser:
    from optbench.demo import SEED
    from optbench.demo_universe import UNIVERSE_SEED
    parser = subparsers.add_parser(
        "demo", help="write the invented demo scenario (or a sample universe)",
        description=("Write the invented Zephyr Composite Index scenario (ZPHX): six "
                     "years of daily prices, an option chain on the last day and "
                     "meta.toml, reproducibly from a fixed seed. With --universe N, write "
                     "N invented underlyings of different characters instead, one "
                     "scenario folder each, ready for `optbench screen`."))
    parser.add_argument("--out", metavar="FOLDER", default=None,
                        help="folder to write (default: chains/ZPHX of the checkout "
                             "optbench runs from, else the user's data folder)")
    parser.add_argument("--force", action="store_true",
                        help="write into a --out folder that already holds files "
                             "(optbench's files are replaced, others left alone)")
    parser.add_argument("--universe", metavar="N", type=whole_number(1), default=None,
                        help=f"write a sample universe of N invented underlyings "
                             f"(at most {MAX_UNIVERSE})")
    parser.add_argument("--seed", type=whole_number(0), default=None,
                        help=f"random seed (default: {SEED} for the scenario, "
                             f"{UNIVERSE_SEED} for a universe)")
    add_output_options(parser, formats=("table", "json"))
    parser.set_defaults(run=run)
    return parser


def check_target(folder: Path, *, given: bool, force: bool) -> None:
    """Refuse a target that is a file, or a non-empty ``--out`` folder without
    ``--force`` (the user's files are never overwritten silently)."""
    if folder.exists() and not folder.is_dir():
        raise InputError(folder, "exists and is not a folder")
    if given and not force and folder.is_dir() and any(folder.iterdir()):
        raise InputError(folder, "is not empty: give --force to write the demo files into "
                                 "it, or choose an empty or new folder")


def run(args: argparse.Namespace) -> int:
    if args.universe is not None and args.universe > MAX_UNIVERSE:
        raise InputError("--universe", f"at most {MAX_UNIVERSE} underlyings, not "
                                       f"{args.universe}")
    universe = args.universe is not None
    folder = Path(args.out) if args.out is not None else default_folder(args.universe,
                                                                         args.seed)
    check_target(folder, given=args.out is not None, force=args.force)
    try:
        payload = (_write_universe(folder, args) if universe
                   else _write_scenario(folder, args))
    except OSError as err:
        raise InputError(folder, f"cannot write: {err.strerror or err}") from None
    write_output(args, payload)
    return 0


def _write_scenario(folder: Path, args: argparse.Namespace) -> str:
    from optbench import demo
    seed = demo.SEED if args.seed is None else args.seed
    written = demo.write_scenario(folder, seed=seed)
    written.update(demo.write_iv_history(folder, seed=seed))
    written.update(demo.write_portfolio(folder, seed=seed))
    rows = {name: (folder / name).read_bytes().count(b"\n") - 1
            for name in written if name.endswith(".csv")}
    if args.format == "json":
        import json
        files = [{"name": name, "bytes": size, **({"rows": rows[name]} if name in rows else {})}
                 for name, size in written.items()]
        return json.dumps({"folder": str(folder), "seed": seed, "code": demo.CODE,
                           "files": files, "invented": True}, indent=2)
    lines = [f"wrote the invented {demo.NAME} ({demo.CODE}) scenario, seed {seed}:"]
    for name, size in written.items():
        what = f"{rows[name]:,} rows, " if name in rows else ""
        lines.append(f"  {folder / name}  ({what}{size:,} bytes)")
    lines.append("the data are invented: no real index, company or market event")
    return "\n".join(lines)


def _write_universe(folder: Path, args: argparse.Namespace) -> str:
    from optbench import demo_universe
    seed = demo_universe.UNIVERSE_SEED if args.seed is None else args.seed
    from optbench.screening.universe import is_scenario
    members = demo_universe.write_universe(folder, args.universe, seed=seed)
    codes = {m.code for m in members}
    # scenario folders already there (a --force over an earlier universe) stay, and
    # `optbench screen` would include them: say so
    others = sorted(p.name for p in folder.iterdir() if p.name not in codes and is_scenario(p))
    if args.format == "json":
        import json
        return json.dumps({"folder": str(folder), "seed": seed, "invented": True,
                           "members": [m.to_dict() for m in members],
                           "other_scenarios": others}, indent=2)
    width = max(len(m.name) for m in members)
    lines = [f"wrote a sample universe of {len(members)} invented underlyings, seed {seed}, "
             f"into {folder}:"]
    for m in members:
        lines.append(f"  {m.code:<6} {m.name:<{width}}  {m.character:<10} {m.note}")
    if others:
        lines.append(f"note: {folder} also holds {len(others)} other scenario folder(s) "
                     f"that a screen includes: {', '.join(others[:10])}"
                     f"{' …' if len(others) > 10 else ''}")
    lines += [f"screen it with: optbench screen {folder}",
              "the data are invented: no real company, ticker or market event"]
    return "\n".join(lines)
