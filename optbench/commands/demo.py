"""``optbench demo``: regenerate the bundled, invented demo scenario (ZPHX).

Writes ``chain.csv``, ``history.csv`` and ``meta.toml`` from a fixed seed, byte for
byte the same on every run. By default it writes the repository's ``chains/ZPHX``
when optbench runs from a checkout; an installed copy needs ``--out FOLDER``.
"""
from __future__ import annotations

import argparse
from pathlib import Path

from optbench.commands.common import add_output_options, whole_number, write_output
from optbench.errors import InputError


def checkout_folder() -> Path | None:
    """``chains/ZPHX`` of the source checkout optbench runs from, or None."""
    root = Path(__file__).resolve().parents[2]
    if (root / "pyproject.toml").is_file() and (root / "optbench").is_dir():
        return root / "chains" / "ZPHX"
    return None




def add_parser(subparsers) -> argparse.ArgumentParser:
    from optbench.demo import SEED
    parser = subparsers.add_parser(
        "demo", help="regenerate the bundled demo scenario (invented data)",
        description=("Regenerate the invented Zephyr Composite Index scenario (ZPHX): "
                     "six years of daily prices, an option chain on the last day and "
                     "meta.toml, reproducibly from a fixed seed."))
    parser.add_argument("--out", metavar="FOLDER", default=None,
                        help="scenario folder to write (default: chains/ZPHX of the "
                             "checkout optbench runs from)")
    parser.add_argument("--seed", type=whole_number(0), default=SEED,
                        help=f"random seed (default: {SEED}, the bundled scenario)")
    add_output_options(parser, formats=("table", "json"))
    parser.set_defaults(run=run)
    return parser


def run(args: argparse.Namespace) -> int:
    from optbench import demo

    if args.out is not None:
        folder = Path(args.out)
    else:
        folder = checkout_folder()
        if folder is None:
            raise InputError("--out", "not running from a checkout: give --out FOLDER")
    if folder.exists() and not folder.is_dir():
        raise InputError(folder, "exists and is not a folder")
    try:
        written = demo.write_scenario(folder, seed=args.seed)
        written.update(demo.write_portfolio(folder, seed=args.seed))
    except OSError as err:
        raise InputError(folder, f"cannot write: {err.strerror or err}") from None

    rows = {name: (folder / name).read_bytes().count(b"\n") - 1
            for name in written if name.endswith(".csv")}
    if args.format == "json":
        import json
        files = [{"name": name, "bytes": size, **({"rows": rows[name]} if name in rows else {})}
                 for name, size in written.items()]
        payload = json.dumps({"folder": str(folder), "seed": args.seed, "code": demo.CODE,
                              "files": files, "invented": True}, indent=2)
    else:
        lines = [f"wrote the invented {demo.NAME} ({demo.CODE}) scenario, seed {args.seed}:"]
        for name, size in written.items():
            what = f"{rows[name]:,} rows, " if name in rows else ""
            lines.append(f"  {folder / name}  ({what}{size:,} bytes)")
        lines.append("the data are invented: no real index, company or market event")
        payload = "\n".join(lines)
    write_output(args, payload)
    return 0
