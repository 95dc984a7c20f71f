"""``calib run SPEC``: run (or resume) the campaign a sweep spec describes."""

from __future__ import annotations

import argparse
import signal
import sys
from typing import Optional


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "run", help="run or resume the campaign of a sweep spec",
        description="Run every trial of a TOML sweep spec (schema: docs/spec.md) that its store does not hold "
                    "yet, on a local pool of worker processes (default), in this process, or on a Dask "
                    "scheduler. Re-running the same spec resumes; a different spec under the same campaign "
                    "name is refused unless --new-campaign is given.")
    parser.add_argument("spec", help="path to the TOML sweep spec (see instances/quickstart.toml)")
    parser.add_argument("--out", default="results", metavar="DIR",
                        help="output folder; the store is DIR/<campaign name>.sqlite (default: results)")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int, metavar="N",
                       help="worker processes of the local pool, one solver thread each (default: the cores)")
    where.add_argument("--scheduler", metavar="tcp://HOST:PORT",
                       help="run on this existing Dask scheduler instead (see docs/distributed.md)")
    where.add_argument("--in-process", action="store_true",
                       help="run every task in this process, one after the other (debugging; "
                            "trial_timeout_s is not enforced and a crash ends the run)")
    parser.add_argument("--new-campaign", action="store_true",
                        help="when the store of this campaign name holds a different spec, start a new store "
                             "beside it (<name>-2.sqlite, ...) instead of refusing")
    parser.add_argument("--dry-run", action="store_true",
                        help="print the trial and instance counts and an estimate of the work, run nothing")
    parser.add_argument("--no-probe", action="store_true",
                        help="with --dry-run: skip the timing probe (counts only)")
    parser.add_argument("--quiet", action="store_true", help="no progress bar")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from calib.sweep.spec import load_spec

    check_workers(args.workers)
    if args.scheduler:
        from calib.sweep.executors import check_scheduler_address

        check_scheduler_address(args.scheduler)
    spec = load_spec(args.spec)
    if args.dry_run:
        print(dry_run(spec, out=args.out, new_campaign=args.new_campaign, scheduler=args.scheduler,
                      probe=not args.no_probe, in_process=args.in_process, workers=args.workers))
        return 0
    from calib.store.reading import count_solver_errors
    from calib.sweep.estimate import check_memory, design_warning, search_warning, size_plans, skipped_lines
    from calib.sweep.runner import run_campaign
    from calib.wording import counted

    plans = size_plans(spec)
    if not args.scheduler:  # a cluster's workers have memory of their own
        check_memory(plans)
    short_cap = search_warning(spec, plans)
    if short_cap:
        print(short_cap, file=sys.stderr)

    previous = signal.signal(signal.SIGTERM, _interrupt)  # `kill PID` stops as cleanly as Ctrl-C
    # a shell starts a background job (`calib run ... &`) with SIGINT ignored: `kill -INT` must still stop it cleanly
    previous_int = signal.signal(signal.SIGINT, signal.default_int_handler)
    bar = None if args.quiet else _ProgressBar(spec.name)
    try:
        summary = run_campaign(spec, args.out, workers=args.workers, scheduler=args.scheduler,
                               inline=args.in_process, new_campaign=args.new_campaign,
                               progress=bar.update if bar is not None else None)
    finally:
        signal.signal(signal.SIGTERM, previous)
        signal.signal(signal.SIGINT, previous_int)
        if bar is not None:
            bar.close()
    print(f"store: {summary.store_path}")
    statuses = ", ".join(f"{count} {status}" for status, count in sorted(summary.statuses.items()) if status != "ok")
    print(f"trials: {summary.planned} planned, {summary.skipped} already stored, {summary.ran} run"
          f" ({statuses or 'none failed'}) in {summary.seconds:.1f} s on {summary.executor}")
    for line in skipped_lines(plans):
        print(line)
    warning = design_warning(spec, plans)
    if warning:
        print(warning)
    solver_errors = count_solver_errors(summary.store_path)
    if solver_errors:
        print(f"{counted(solver_errors, 'projected solve')} ended in a solver error: counted apart and left out of the success "
              f"rates by `calib tables` (--solver-errors fail counts them as failures)")
    if summary.searches:
        from calib.commands.searches import search_report

        print(search_report(spec, summary.searches))
    if summary.lost:
        print(f"warning: {summary.lost} trials were lost by the executor and not stored; run the same command again to retry them",
              file=sys.stderr)
        return 1
    return 0


#: local worker processes allowed per core: each runs one solver thread, more only adds memory
WORKERS_PER_CORE = 4


def check_workers(workers) -> None:
    """``--workers`` must lie in 1 .. max(8, 4 x the cores): a typo must not fork thousands of processes."""
    from calib.errors import InputError
    from calib.sweep.executors import default_workers

    limit = max(8, WORKERS_PER_CORE * default_workers())
    if workers is not None and not 1 <= workers <= limit:
        raise InputError("--workers", f"must lie in 1..{limit} on this machine, got {workers}",
                         f"e.g. --workers {default_workers()} (one per core)")


def _interrupt(signum, frame):
    raise KeyboardInterrupt


class _ProgressBar:
    """tqdm bar over the trials to run, with rate, ETA and the count of failed trials."""

    def __init__(self, name: str):
        self.name = name
        self.bar = None
        self.failed = 0

    def update(self, progress) -> None:
        if self.bar is None:
            if not progress.total:
                return
            from tqdm import tqdm

            self.bar = tqdm(total=progress.total, unit="trial", file=sys.stderr, dynamic_ncols=True, desc=self.name,
                            mininterval=0.5, smoothing=0.05)
        if progress.total != self.bar.total:  # a k search learns its trials as it goes
            self.bar.total = progress.total
            self.bar.refresh()
        self.bar.update(progress.done - self.bar.n)
        if progress.failed != self.failed:
            self.failed = progress.failed
            self.bar.set_postfix(failed=self.failed, refresh=False)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()


def _stored_in_plan(spec, done: set, planned: int) -> int:
    """Stored trials this spec would run: for a grid the planned trial ids found in the store (a
    store can hold trials of an earlier, different spec); for a search, at most its planned count."""
    from calib.sweep.expansion import expand

    if spec.k_grid.is_search:
        return min(len(done), planned)
    return sum(trial.trial_id in done for _, trials in expand(spec) for trial in trials)


def dry_run(spec, *, out: str, new_campaign: bool = False, scheduler: Optional[str] = None, probe: bool = True,
            in_process: bool = False, workers: Optional[int] = None) -> str:
    """The --dry-run report of ``spec`` (creates nothing): the store it would write under ``out``, the
    trial counts and the work estimate, with a timing probe unless ``probe`` is False; ``workers``
    (default: the cores), ``in_process`` and ``scheduler`` as the options of ``calib run``."""
    from calib.store.database import Store
    from calib.store.resume import locate
    from calib.sweep.estimate import check_memory, probe_sizes, render_plan, size_plans
    from calib.sweep.executors import default_workers

    path, exists = locate(spec, out, new_campaign)
    stored = 0
    plans = size_plans(spec)
    if exists:
        store = Store.open_existing(path)
        try:
            stored = _stored_in_plan(spec, store.done_trial_ids(), sum(plan.trials for plan in plans))
        finally:
            store.close()
    note = f"{path} ({'resumes: ' + str(stored) + ' of its trials stored' if exists else 'new'})"
    if not scheduler:  # a cluster's workers have memory of their own
        check_memory(plans)
    probes = probe_sizes(spec, plans) if probe else None
    workers = 1 if in_process else (workers or default_workers())
    if scheduler:
        note += "; the estimate below assumes local workers, divide the CPU time by your Dask threads"
    return render_plan(spec, plans, probes, stored, note, workers)
