"""``boxchem ensemble SCENARIO --members TABLE.csv``: run a member table on the ensemble engine."""
from __future__ import annotations

import argparse

EXAMPLE = """examples:
  boxchem ensemble polar-spring --members mc.csv -o mc.nc --workers 2
  boxchem ensemble polar-spring --members mc.csv -o mc.nc --resume
  boxchem ensemble polar-spring --members mc.csv --scheduler tcp://10.0.0.5:8786
  boxchem ensemble polar-spring --members mc.csv --save mole_fraction,cycle_rate

TABLE.csv: a header line of column names, then one line per member; lines
starting with # are skipped.  Columns:
  scale.<reaction id>             factor on that reaction's k (J, gamma), times the scenario's [scale]
  initial.<species>               initial amount: a number is a mole fraction, or "2 ppbv", "1e9 cm-3"
  environment.temperature_offset  kelvin (replaces the scenario's offset)
  section.key                     any other scenario key, e.g. location.latitude, run.start
  member_label                    optional name of the member

e.g.
  member_label,scale.clo_clo_m,scale.j_cl2o2,initial.HNO3
  low,0.8,1.0,2e-9
  high,1.2,1.1,"3 ppbv"

The output is the member file (docs/ensembles.md): finished members are
written as they finish, so an interrupted run keeps them; --resume runs the
rest.  Every member gets the conservation check of boxchem run (element totals,
fixed mixing ratios): the summary says how many failed it, and --strict records
those members as failed.  Exit status 0 when every member succeeded, 1 when any
failed, 2 for input errors, 130 when interrupted."""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "ensemble", help="run a member table (CSV): many runs of one scenario on one engine",
        description="Run every member (row) of a CSV member table on the batched ensemble engine "
                    "and stream the results to one netCDF member file.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("scenario", metavar="SCENARIO", help="shipped scenario name or path to a .toml file")
    p.add_argument("--members", required=True, metavar="TABLE.csv", help="the member table (CSV)")
    add_engine_options(p, default_output="SCENARIO-STEM-members.nc")
    p.set_defaults(func=run)


def add_engine_options(p, *, default_output: str) -> None:
    """Options shared by ``ensemble`` and ``sweep`` (one engine, one set of options)."""
    p.add_argument("-o", "--output", default=None, metavar="OUT.nc",
                   help=f"member file to write (default {default_output} in the current folder)")
    p.add_argument("--workers", type=int, default=None, metavar="N",
                   help="local worker processes (default: run in this process)")
    p.add_argument("--scheduler", default=None, metavar="tcp://HOST:PORT",
                   help="run the batches on this dask.distributed scheduler")
    p.add_argument("--resume", action="store_true",
                   help="continue OUT.nc: run only its members that are still pending")
    p.add_argument("--save", default=None, metavar="VAR,VAR",
                   help="variables to keep per member (default mole_fraction, "
                        "family_number_density, cycle_rate and the T, p, [M], SZA series)")
    p.add_argument("--batch-size", type=int, default=None, metavar="N",
                   help="members integrated together (default 32)")
    p.add_argument("--step-policy", choices=("auto", "lock-step", "per-member"), default="auto",
                   help="step-size control of a batch: lock-step groups share one step size "
                        "(faster), per-member gives each member its own (results independent of "
                        "the batch); auto (default): lock-step for batches of 8 or more (docs/ensembles.md)")
    p.add_argument("--member-time-limit", type=float, default=None, metavar="SECONDS",
                   help="wall-clock limit per member; a member over it is stopped and recorded failed")
    p.add_argument("--set", metavar="SECTION.KEY=VALUE", action="append", default=[],
                   dest="overrides",
                   help='override a scenario value for every member, e.g. run.duration="10 d" '
                        '(repeatable; a member-table column of the same key wins)')
    add_strict_option(p)
    p.add_argument("-q", "--quiet", action="store_true", help="no progress and no summary")


def add_strict_option(p) -> None:
    """--strict of the commands that run members (ensemble, sweep, uncertainty, sensitivity)."""
    p.add_argument("--strict", action="store_true",
                   help="a member that fails the conservation check (element totals, fixed mixing "
                        "ratios, as boxchem run checks) is recorded as a failed member; the others "
                        "are kept (docs/guards.md)")


def scenario_of(args):
    """The command's scenario with its --set overrides applied (input errors: exit status 2)."""
    from .sensitivity import load_with_overrides
    return load_with_overrides(args.scenario, args.overrides)


def run(args) -> int:
    from pathlib import Path

    from ..analysis.members import read_member_csv
    table = read_member_csv(args.members)
    out = Path(args.output) if args.output else Path(f"{Path(str(args.scenario)).stem}-members.nc")
    return run_engine(args, table, out)


def run_engine(args, table, out) -> int:
    """Run ``table`` with the command's engine options; print the summary; the exit status."""
    import signal
    import sys
    import time

    from ..analysis.ensemble import EnsembleInterrupted, ensemble

    def terminate(signum, frame):
        raise KeyboardInterrupt
    previous = signal.signal(signal.SIGTERM, terminate)
    t0 = time.perf_counter()
    try:
        ds = ensemble(scenario_of(args), table, output=out, save=args.save, workers=args.workers,
                      scheduler=args.scheduler, batch_size=args.batch_size, resume=args.resume,
                      progress=not args.quiet, member_time_limit_s=args.member_time_limit,
                      step_policy=getattr(args, "step_policy", "auto"), strict=args.strict)
    except EnsembleInterrupted as exc:
        where = (f"kept in {exc.output}; continue with: boxchem {args.command} ... -o {out} --resume"
                 if exc.output is not None else "discarded (no output file)")
        print(f"boxchem {args.command}: interrupted: {exc.done} of {exc.total} members finished, "
              f"{where}", file=sys.stderr)
        return 130
    finally:
        signal.signal(signal.SIGTERM, previous)
    wall = time.perf_counter() - t0
    try:
        failed = print_summary(ds, out, wall, quiet=args.quiet)
    finally:
        ds.close()
    return 1 if failed else 0


def print_summary(ds, out, wall_s: float, *, quiet: bool = False) -> int:
    """A short table of the member file; returns the number of failed members."""
    import sys

    import numpy as np
    status = ds["member_status"].values
    n, ok, failed = status.size, int(np.sum(status == 1)), int(np.sum(status == 2))
    pending = n - ok - failed
    print_conservation(ds, quiet=quiet)
    if quiet:
        return failed
    print(f"{out}: {n} members: {ok} succeeded, {failed} failed, {pending} pending "
          f"({wall_s:.1f} s, {n / wall_s if wall_s > 0 else 0:.2f} members/s)")
    print(f"  {'variable':<24} {'dimensions':<30} shape")
    for name, var in ds.data_vars.items():
        if var.dims[:1] == ("member",) and var.ndim >= 2 and name not in ("member_table", "member_table_text"):
            print(f"  {name:<24} {'(' + ', '.join(var.dims) + ')':<30} {' x '.join(map(str, var.shape))}")
    if failed:
        labels = ds["member_label"].values
        messages = ds["member_message"].values
        shown = np.nonzero(status == 2)[0]
        for i in shown[:10]:
            print(f"  failed member {i} ({labels[i]}): {messages[i]}", file=sys.stderr)
        if shown.size > 10:
            print(f"  ... and {shown.size - 10} more failed members (member_message in {out})",
                  file=sys.stderr)
    return failed


def print_conservation(ds_or_text, *, quiet: bool = False) -> None:
    """The conservation guard over a member file's members (the file, or its
    ``member_summary`` text): a warning (stderr, also when ``quiet``) when some failed,
    else one line (stdout)."""
    import sys

    from ..diagnostics.conservation import member_summary
    text = ds_or_text if isinstance(ds_or_text, str) or ds_or_text is None else member_summary(ds_or_text)
    if not text:
        return
    failed = not text.startswith("conservation: all")
    if quiet and not failed:
        return
    print(f"warning: {text}" if failed else text, file=sys.stderr if failed else sys.stdout)
