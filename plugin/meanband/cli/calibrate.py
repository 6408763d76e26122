"""``meanband history calibrate``: measure and store run-to-run noise floors (A/A runs)."""

from __future__ import annotations

import argparse
from collections.abc import Callable

from meanband import defaults
from meanband.report.tables import format_table
from meanband.store.database import where
from meanband.store.history import HistoryStore, StoreError

__all__ = ["register_calibrate"]

#: A position shift with a p-value below this is reported as a bias.
POSITION_ALPHA = 0.01


def register_calibrate(
    commands: argparse._SubParsersAction[argparse.ArgumentParser],
    store_option: Callable[[argparse.ArgumentParser], None],
    guarded: Callable[[Callable[[argparse.Namespace], int]], Callable[[argparse.Namespace], int]],
) -> None:
    """Add the ``calibrate`` subcommand to ``meanband history``."""
    parser = commands.add_parser(
        "calibrate", help="Measure each check's run-to-run noise floor from runs of the same code",
        description="Read the newest runs under LABEL (the same code recorded several times, "
        "e.g. three runs of 'pytest --meanband-record=aa'), print per check how far whole runs "
        "move against each other and whether position in the run biases the trials, and store "
        "these floors for the baseline label given by --for.",
    )
    parser.add_argument("--label", required=True, help="Label of the A/A runs")
    parser.add_argument("--for", dest="target", default=None, metavar="BASELINE",
                        help="Baseline label to store the floors with (default: --label)")
    parser.add_argument("--runs", type=int, default=defaults.BASELINE_RUNS, metavar="K",
                        help=f"How many of the newest runs to read (default "
                        f"{defaults.BASELINE_RUNS})")
    parser.add_argument("--dry-run", action="store_true",
                        help="Print the floors without storing them")
    store_option(parser)
    parser.set_defaults(handler=guarded(_calibrate))


def _calibrate(args: argparse.Namespace) -> int:
    from meanband.store.calibration import calibrate

    target = args.target or args.label
    with HistoryStore(args.store, create=False, read_only=args.dry_run) as store:
        try:
            found = calibrate(store, args.label, args.runs)
        except ValueError as exc:
            raise StoreError(str(exc)) from None
        if not args.dry_run:
            store.save_noise_floors(target, found.floors)
    ids = ", ".join(str(run.id) for run in found.runs)
    print(f"A/A calibration from runs {ids} '{args.label}'")
    rows: list[list[str]] = []
    biased = 0
    for floor in found.floors:
        bias = "-"
        if floor.position_shift is not None and floor.position_p is not None:
            flagged = floor.position_p < POSITION_ALPHA
            biased += flagged
            bias = (f"{floor.position_shift:+.1%} (p={floor.position_p:.2g})"
                    + (" biased" if flagged else ""))
        rows.append([floor.nodeid + (f" [{floor.series}]" if floor.series else ""),
                     f"{floor.between_sd:.2%}", str(floor.runs), bias])
    print("\n".join(format_table(["test", "run-to-run sd", "runs", "second half vs first"],
                                 rows, rule=True)))
    for words in found.skipped:
        print(f"not calibrated: {words}")
    if biased:
        print(f"{biased} check(s) change from the first to the second half of a run: warm-up "
              "or heating; add warm-up trials (warmup=) or interleave what is compared")
    if args.dry_run:
        print("dry run: nothing stored")
    else:
        print(f"stored {len(found.floors)} floor(s) for baseline '{target}' in {where(args.store)}")
    return 0
