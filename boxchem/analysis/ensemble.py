"""``boxchem.ensemble(scenario, members)``: many runs of one scenario, one engine.

The member table (:mod:`.members`) is grouped by setup (members that
differ only in ``scale.*`` and ``initial.*`` of integrated species share
one), each group is cut into batches of at most ``batch_size`` members in
table order, and the batches run on a back-end (:mod:`.backends`: this
process, ``workers`` local processes, or a dask.distributed cluster).  Each
finished batch is stored in the member file (:mod:`boxchem.io.memberfile`)
at once, so the parent holds at most a few batches' outputs whatever the
number of members.

Faults: a batch whose worker dies, which overruns its time limit, or which
cannot run as a whole is re-run as batches of one; a single member that
faults is retried once, then recorded as failed with its message.
Integration failures of a member are data (status failed, message, time),
not faults.  Ctrl-C (SIGINT) stops the workers, keeps every finished member
in the file and raises :class:`EnsembleInterrupted`; ``resume=True`` runs
only the members still pending.

Numbers: the solver advances every member with its own step-size control
on the group's shared k(t) tables, so a member's values do not depend on
which members share its batch, on the back-end or on the worker count
(tested identical to 1e-12 relative, measured bit-identical); they match a
single ``boxchem.run`` of the same values within the solver tolerance
(DEVELOPERS.md, "Ensemble engine", has the measured bound).
"""
from __future__ import annotations

import collections
import math
import shutil
import sys
import tempfile
import time as _time
from pathlib import Path
from typing import Any, Callable, Mapping, Sequence

import numpy as np
import xarray as xr

from ..errors import BoxchemError
from ..io import memberfile as mf
from .batches import DEFAULT_SAVE, SAVEABLE, BatchOutput, BatchTask, transferable_scenario
from .members import (LABEL_COLUMN, MemberTable, MemberTableError, apply_setup_overrides,
                      member_table, validate_table)

__all__ = ["ensemble", "EnsembleError", "EnsembleInterrupted", "MemberProgress", "DEFAULT_BATCH_SIZE", "plan_batches"]

#: members per batch when not given (a batch's outputs are what the parent holds per worker)
DEFAULT_BATCH_SIZE = 32


class EnsembleError(BoxchemError):
    """An ensemble that cannot run at all (e.g. no member has a valid setup)."""


class EnsembleInterrupted(KeyboardInterrupt):
    """Ctrl-C (or SIGTERM in the command) stopped an ensemble; finished members are on disk."""

    def __init__(self, message: str, *, done: int = 0, total: int = 0, output: str | None = None):
        super().__init__(message)
        self.message, self.done, self.total, self.output = message, done, total, output

    def __str__(self) -> str:
        return self.message


class MemberProgress:
    """Progress over members: a bar on a terminal, a line every ``interval_s`` otherwise.

    ``update(success, failed)`` after each batch; shows members done/total,
    failures, members per second and the time left.
    """

    def __init__(self, total: int, *, done: int = 0, stream=None, interval_s: float = 10.0,
                 label: str = "members", enabled: bool = True):
        self.total, self.done0 = int(total), int(done)
        self.success = self.failed = 0
        self.stream = stream if stream is not None else sys.stderr
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.enabled = enabled
        self.interval_s = interval_s if not self.tty else 0.1
        self.label = label
        self.t0 = _time.perf_counter()
        self._last = -math.inf
        self._drawn = False

    @property
    def finished(self) -> int:
        return self.done0 + self.success + self.failed

    def rate(self) -> float:
        elapsed = _time.perf_counter() - self.t0
        return (self.success + self.failed) / elapsed if elapsed > 0 else 0.0

    def render(self) -> str:
        frac = self.finished / self.total if self.total else 1.0
        width = 30
        bar = "#" * int(round(frac * width)) + "-" * (width - int(round(frac * width)))
        rate = self.rate()
        left = (self.total - self.finished) / rate if rate > 0 else math.inf
        eta = f", {left:.0f} s left" if math.isfinite(left) and self.finished < self.total else ""
        failed = f", {self.failed} failed" if self.failed else ""
        return (f"[{bar}] {self.finished}/{self.total} {self.label}{failed}, "
                f"{rate:.2f} members/s{eta}")

    def update(self, success: int = 0, failed: int = 0) -> None:
        self.success += success
        self.failed += failed
        if not self.enabled:
            return
        now = _time.perf_counter()
        if now - self._last < self.interval_s and self.finished < self.total:
            return
        self._last = now
        if self.tty:
            self.stream.write("\r" + self.render())
        else:
            self.stream.write(self.render().split("] ", 1)[1] + "\n")
        self.stream.flush()
        self._drawn = True

    def close(self) -> None:
        if self.enabled and self.tty and self._drawn:
            self.stream.write("\n")
            self.stream.flush()


# ---------------------------------------------------------------------------
# planning: groups, time axis, batches
# ---------------------------------------------------------------------------
class _Plan:
    def __init__(self):
        self.groups: list = []            # (SetupGroup, Scenario or None, error message)
        self.times_s: np.ndarray = np.zeros(0)
        self.same_start = True
        self.start = None


def _origins(table: MemberTable, rows: np.ndarray, keys) -> dict[str, str]:
    row = int(rows[0])
    return {key: table.origin_of(row, key) for key in keys}


def _plan(scenario, table: MemberTable) -> _Plan:
    plan = _Plan()
    variable = [s.name for s in scenario.mechanism.species if not s.fixed]
    for group in table.groups(variable):
        overrides = dict(group.overrides)
        try:
            scn = (apply_setup_overrides(scenario, overrides, _origins(table, group.members, overrides))
                   if overrides else scenario)
            times = scn.output_times_s()
        except BoxchemError as exc:
            plan.groups.append((group, None, str(exc)))
            continue
        plan.groups.append((group, scn, ""))
    valid = [(g, s) for g, s, e in plan.groups if s is not None]
    if valid:
        plan.times_s = np.unique(np.concatenate([s.output_times_s() for _, s in valid]))
        starts = {np.datetime64(s.start, "ns") for _, s in valid}
        plan.same_start = len(starts) == 1
        plan.start = valid[0][1].start
    return plan


def plan_batches(groups, batch_size: int) -> list[tuple[int, np.ndarray]]:
    """(group index, member rows) of every batch: each group's members in table order, cut
    into consecutive batches of at most ``batch_size``."""
    out = []
    for gi, (group, scn, _) in enumerate(groups):
        if scn is None:
            continue
        rows = group.members
        for a in range(0, len(rows), batch_size):
            out.append((gi, rows[a:a + batch_size]))
    return out


# ---------------------------------------------------------------------------
# the member file's template
# ---------------------------------------------------------------------------
def _template(setup, plan: _Plan, table: MemberTable, save: Sequence[str], scenario,
              check=None) -> tuple[xr.Dataset, dict, dict]:
    from ..diagnostics.conservation import member_check_layout
    from ..runner import assemble_dataset
    times = plan.times_s
    mech = setup.mechanism
    n_t, n_s, n_r = times.size, len(mech.species), len(mech.reactions)
    state = setup.environment.at(times)
    single = assemble_dataset(
        mechanism=mech, scenario=scenario, times_s=times, number_density=np.zeros((n_t, n_s)),
        rate_coefficient=np.zeros((n_t, n_r)), reaction_rate=np.zeros((n_t, n_r)),
        environment_state=state, counters={}, status="pending", message="", wall_time_s=0.0,
        photolysis_sources=getattr(setup.photolysis, "source", None))
    variables = {}
    for name in save:
        var = single[name]
        variables[name] = (("member",) + var.dims, dict(var.attrs))
    static = single.drop_vars([n for n, v in single.data_vars.items() if "time" in v.dims])
    for name in ("integration_status", "integration_message", "wall_time_s", "history"):
        static.attrs.pop(name, None)
    if not plan.same_start:
        static = static.assign_coords(time=("time", (times * 1e9).astype("timedelta64[ns]"),
                                            {"long_name": "time since each member's start "
                                                          "(see member_start_time)", "axis": "T"}))
    m = len(table)
    coords = {
        "member": ("member", np.arange(m, dtype=np.int32), {"long_name": "member index (row of the "
                                                                           "member table)"}),
        "member_label": ("member", np.asarray(table.labels, dtype=object),
                         {"long_name": "member name"}),
    }
    data = {}
    check_coords, checks = member_check_layout(check) if check is not None else ({}, {})
    coords.update(check_coords)
    if table.factors:
        coords["factor"] = ("factor", np.array(table.factors, dtype=object),
                            {"long_name": "member table column"})
        data["member_table"] = (("member", "factor"), table.numeric,
                                {"long_name": "numeric values of the member table (scale.<reaction "
                                              "id>: factor on k; initial.<species>: mole fraction; "
                                              "other section.key: scenario value in its file units)"})
    if table.text_factors:
        coords["text_factor"] = ("text_factor", np.array(table.text_factors, dtype=object),
                                 {"long_name": "member table column holding text"})
        data["member_table_text"] = (("member", "text_factor"), table.text.astype(str).astype(object),
                                     {"long_name": "text values of the member table"})
    if not plan.same_start:
        starts = np.full(m, np.datetime64("NaT", "ns"))
        for group, scn, _ in plan.groups:
            if scn is not None:
                starts[group.members] = np.datetime64(scn.start, "ns")
        data["member_start_time"] = ("member", starts, {"long_name": "start time of each member (UTC)"})
    template = static.assign_coords(coords).assign(data)
    template.attrs.update({
        "title": f"boxchem members of {scenario.source}",
        "boxchem_result_kind": mf.RESULT_KIND,
        "ensemble_members": m,
        "ensemble_columns": " ".join(table.columns),
        "ensemble_saved_variables": " ".join(save),
        "ensemble_setup_groups": len(plan.groups),
        "history": f"{template.attrs.get('date_created', '')}: created by boxchem ensemble",
    })
    template.attrs.update(table.attrs or {})
    return template, variables, checks


def _file_checks(outcome: BatchOutput, names: tuple) -> dict[str, np.ndarray]:
    """A batch's conservation columns in the member file's order (by element / species name;
    NaN where a group checks another set, e.g. a member with its own mechanism)."""
    if not outcome.checks:
        return {}
    out = {"member_conservation": outcome.checks["member_conservation"]}
    for key, own, file_names in (("member_element_drift", outcome.check_names[0], names[0]),
                                 ("member_fixed_drift", outcome.check_names[1], names[1])):
        values = np.asarray(outcome.checks[key], dtype=float)
        if tuple(own) == tuple(file_names):
            out[key] = values
            continue
        column = {n: j for j, n in enumerate(own)}
        out[key] = np.stack([values[:, column[n]] if n in column else np.full(values.shape[0], np.nan)
                             for n in file_names], axis=-1).reshape(values.shape[0], len(file_names))
    return out


# ---------------------------------------------------------------------------
# the run
# ---------------------------------------------------------------------------
def _validated_save(save) -> tuple[str, ...]:
    if save is None:
        return DEFAULT_SAVE
    names = [s.strip() for s in (save.split(",") if isinstance(save, str) else save) if s.strip()]
    if not names:
        raise BoxchemError(f"save: give at least one variable; valid: {', '.join(SAVEABLE)}")
    for name in names:
        if name not in SAVEABLE:
            import difflib
            close = difflib.get_close_matches(name, list(SAVEABLE), n=1)
            hint = f" - did you mean {close[0]!r}?" if close else ""
            raise BoxchemError(f"save: unknown variable {name!r}{hint}; valid: {', '.join(SAVEABLE)}")
    return tuple(dict.fromkeys(names))


def _load_scenario(scenario):
    from ..scenario import Scenario, load_scenario
    return scenario if isinstance(scenario, Scenario) else load_scenario(scenario)


class _TaskQueue:
    """An iterator over a deque that faults can add to while the back-end runs."""

    def __init__(self, tasks):
        self.queue = collections.deque(tasks)

    def __iter__(self):
        return self

    def __next__(self):
        if not self.queue:
            raise StopIteration
        return self.queue.popleft()


def _backend(workers, scheduler, client):
    from . import backends
    if client is not None or scheduler:
        return backends.DaskBackend(scheduler=scheduler, client=client).run, "dask", None
    if workers is not None and int(workers) > 1:
        pool = backends.LocalWorkers(int(workers))
        return pool.run, f"{int(workers)} local workers", pool.close
    if workers is not None and int(workers) < 1:
        raise BoxchemError(f"workers: expected at least 1, got {workers}")
    return backends.in_process, "in-process", None


def _check_resume(path: Path, table: MemberTable, save, scenario, strict: bool = False) -> np.ndarray:
    """Status of an existing member file that matches this ensemble; refuses one that does not."""
    try:
        state = mf.read_member_state(path)
    except (OSError, ValueError, KeyError) as exc:
        raise BoxchemError(f"--resume {path}: cannot read it as a member file ({exc}); "
                           f"remove it or run without --resume") from None
    old = MemberTable(state["factors"], np.asarray(state["numeric"], dtype=float),
                      state["text_factors"], np.asarray(state["text"], dtype=object),
                      np.asarray(state["labels"], dtype=object))
    problems = []
    if not old.equals(table):
        problems.append("the member table differs")
    if tuple(state["variables"]) != tuple(save):
        problems.append(f"the saved variables differ ({' '.join(state['variables'])} in the file)")
    attrs = state["attrs"]
    if attrs.get("mechanism_sha256") != scenario.mechanism.text_sha256:
        problems.append("the mechanism differs")
    if attrs.get("scenario") != scenario.text:
        problems.append("the scenario text differs")
    if attrs.get("conservation_strict", "yes" if strict else "no") != ("yes" if strict else "no"):
        problems.append(f"--strict differs (conservation_strict = {attrs['conservation_strict']} "
                        f"in the file)")
    if problems:
        raise BoxchemError(f"--resume {path}: the file was made by another ensemble "
                           f"({'; '.join(problems)}); give the same scenario, member table and "
                           f"--save (and --strict), or run without --resume to start again")
    return np.asarray(state["status"], dtype=int)


def ensemble(scenario, members, *, output=None, save=None, workers=None, scheduler=None, client=None,
             batch_size=None, resume=False, progress=None,
             member_time_limit_s=None, step_policy="auto", strict=False) -> xr.Dataset:
    """Run every member of a member table and return the member-file Dataset.

    Parameters
    ----------
    scenario : shipped name, path or :class:`~boxchem.scenario.Scenario`
    members : pandas DataFrame, dict of equal-length arrays, or a MemberTable
        (``boxchem.analysis.members.read_member_csv``); columns as in :mod:`.members`
    output : path of the member file, written as batches finish (default: none;
        the Dataset is then returned in memory)
    save : variables to keep per member (names or "a,b"); default DEFAULT_SAVE
    workers : local worker processes (None or 1: this process)
    scheduler, client : a dask.distributed scheduler address or Client
    batch_size : members per batch (default DEFAULT_BATCH_SIZE)
    resume : continue ``output``: run only its pending members (the file must
        have been made from the same scenario, table and ``save``)
    progress : True for progress over members on stderr, or a callable
        ``progress(done, total, failed)``; default none
    member_time_limit_s : wall-clock limit per member [s]; a batch of n members
        gets n times it
    step_policy : the solver's step-size policy for each batch ("auto", "per-member",
        "lock-step"; ``integrate_batch``); recorded as the file's ``boxchem_step_policy``
    strict : a member that fails the conservation guard (element totals, fixed mixing
        ratios; docs/guards.md) is recorded as failed; every member's check is stored
        (``member_conservation``, ``member_element_drift``, ``member_fixed_drift``)

    Returns the member file as an xarray Dataset (lazy when ``output`` is given).
    Raises :class:`EnsembleInterrupted` on Ctrl-C (finished members kept).
    """
    scn = _load_scenario(scenario)
    table = member_table(members)
    validate_table(table, scn)
    save = _validated_save(save)
    if batch_size is None:
        batch_size = DEFAULT_BATCH_SIZE
    if int(batch_size) < 1:
        raise BoxchemError(f"batch_size: expected at least 1, got {batch_size}")
    if member_time_limit_s is not None and not float(member_time_limit_s) > 0:
        raise BoxchemError(f"member_time_limit_s: expected a time > 0 s, got {member_time_limit_s!r}")
    from ..solver.timeloop import STEP_POLICIES
    if step_policy not in STEP_POLICIES:
        raise BoxchemError(f"step_policy: expected one of {', '.join(STEP_POLICIES)}, got {step_policy!r}")
    plan = _plan(scn, table)
    run_backend, backend_name, close_backend = _backend(workers, scheduler, client)
    valid = [(gi, s) for gi, (_, s, _) in enumerate(plan.groups) if s is not None]
    temporary = None
    if output is None:
        temporary = Path(tempfile.mkdtemp(prefix="boxchem-ensemble-"))
        path = temporary / "members.nc"
    else:
        path = Path(output)
    try:
        return _run(scn, table, plan, valid, save, path, int(batch_size), resume and output is not None,
                    run_backend, backend_name, progress, member_time_limit_s, keep=temporary is None,
                    step_policy=step_policy, strict=bool(strict))
    finally:
        if close_backend is not None:
            close_backend()
        if temporary is not None:
            shutil.rmtree(temporary, ignore_errors=True)


def _run(scn, table, plan, valid, save, path, batch_size, resume, run_backend, backend_name,
         progress, time_limit, keep, step_policy="auto", strict=False):
    from .batches import _group
    status = None
    if resume and path.exists():
        status = _check_resume(path, table, save, scn, strict)
        mf.remove_stale_temporaries(path)
    in_process = backend_name == "in-process"

    def task_for(gi: int, rows: np.ndarray, batch_id: int, attempt: int = 0) -> BatchTask:
        group, gscn, _ = plan.groups[gi]
        variable = [s.name for s in scn.mechanism.species if not s.fixed]
        initial_columns = tuple(table.initial_columns(variable))
        return BatchTask(
            batch_id=batch_id, group=gi,
            scenario=scn if in_process else transferable_scenario(scn),
            overrides=group.overrides, origins=_origins(table, group.members, dict(group.overrides)),
            rows=rows, scale=table.scale_factors(rows, scn.mechanism.reaction_ids),
            initial_columns=initial_columns,
            initial_values=[[table.value(int(r), c) for r in rows] for c in initial_columns],
            save=save, time_limit_s=time_limit, attempt=attempt, step_policy=step_policy,
            strict=strict,
            mechanism_sha256=scn.mechanism.text_sha256, table_source=table.source,
            table_where=[table.where(int(r), initial_columns[0]) if initial_columns else ""
                         for r in rows])

    batches = plan_batches(plan.groups, batch_size)
    tasks = [task_for(gi, rows, i) for i, (gi, rows) in enumerate(batches)]
    if status is None:
        if not valid:
            messages = "; ".join(e for _, _, e in plan.groups)
            raise EnsembleError(f"no member can run: {messages}")
        # the template needs one setup: built here (and kept for in-process batches)
        first, _ = _group(tasks[0])
        template, variables, checks = _template(first.setup, plan, table, save,
                                                plan.groups[valid[0][0]][1], first.check)
        check_names = (first.check.elements, first.check.fixed)
        template.attrs["conservation_elements_not_checked"] = " ".join(first.check.not_conserved)
        if not in_process:        # the workers build their own; do not hold it here
            from .batches import _SETUPS
            _SETUPS.clear()
            del first
        template.attrs["boxchem_step_policy"] = _policy_note(step_policy, batch_size)
        template.attrs["conservation_strict"] = "yes" if strict else "no"
        mf.create_member_file(path, template, variables, checks)
        status = np.zeros(len(table), dtype=int)
        for group, gscn, error in plan.groups:
            if gscn is None:
                rows = group.members
                mf.write_members(path, rows, {}, status=np.full(len(rows), mf.STATUS_FAILED),
                                 message=[f"setup: {error}"] * len(rows),
                                 failure_time_s=np.full(len(rows), np.nan))
                status[rows] = mf.STATUS_FAILED
    else:
        # resume: only members still pending
        keep_tasks = []
        for task in tasks:
            rows = task.rows[status[task.rows] == mf.STATUS_PENDING]
            if rows.size:
                keep_tasks.append(task_for(task.group, rows, task.batch_id))
        tasks = keep_tasks
        from ..diagnostics.conservation import ELEMENT_DIM, FIXED_DIM
        with xr.open_dataset(path, engine="netcdf4") as old:
            check_names = tuple(tuple(str(v) for v in old[d].values) if d in old.coords else ()
                                for d in (ELEMENT_DIM, FIXED_DIM))
    file_times = plan.times_s
    done0 = int(np.sum(status != mf.STATUS_PENDING))
    bar = _progress(progress, len(table), done0)
    queue = _TaskQueue(tasks)
    next_id = len(batches)
    try:
        for task, outcome in run_backend(queue):
            if isinstance(outcome, BatchOutput):
                gscn = plan.groups[task.group][1]
                times = gscn.output_times_s()
                index = None if times.size == file_times.size else np.searchsorted(file_times, times)
                mf.write_members(path, outcome.rows, outcome.arrays, status=outcome.status,
                                 message=outcome.message, failure_time_s=outcome.failure_time_s,
                                 time_index=index, checks=_file_checks(outcome, check_names))
                ok = int(np.sum(outcome.status == mf.STATUS_SUCCESS))
                bar.update(ok, len(outcome.rows) - ok)
                continue
            # a fault: re-run a batch's members one by one; retry a single member once
            if len(task.rows) > 1:
                for row in task.rows:
                    queue.queue.append(task_for(task.group, np.array([row]), next_id, attempt=1))
                    next_id += 1
            elif task.attempt == 0:
                queue.queue.append(task_for(task.group, task.rows, next_id, attempt=1))
                next_id += 1
            else:
                mf.write_members(path, task.rows, {}, status=[mf.STATUS_FAILED],
                                 message=[f"{outcome.message} (retried once)"],
                                 failure_time_s=[np.nan])
                bar.update(0, 1)
    except KeyboardInterrupt:
        bar.close()
        done = int(np.sum(mf.read_member_state(path)["status"] != mf.STATUS_PENDING)) \
            if path.exists() else 0
        where = f"kept in {path} (resume=True runs the rest)" if keep else "discarded (no output file)"
        raise EnsembleInterrupted(f"interrupted: {done} of {len(table)} members finished, {where}",
                                  done=done, total=len(table), output=str(path) if keep else None) \
            from None
    bar.close()
    if keep:
        return mf.open_member_file(path)
    return mf.open_member_file(path, load=True)


def _policy_note(step_policy: str, batch_size: int) -> str:
    from ..solver.timeloop import LOCKSTEP_GROUP, LOCKSTEP_MIN_MEMBERS
    lock = (f"lock-step: members of a batch (at most {batch_size}) in groups of at most "
            f"{LOCKSTEP_GROUP} share one step size")
    return {"per-member": "per-member: each member its own step size",
            "lock-step": lock,
            "auto": f"auto: {lock} (batches of at least {LOCKSTEP_MIN_MEMBERS} members), else "
                    f"per-member"}[step_policy] + (
        "; members whose surfaces or J follow their own state batch (per-member ln offsets on the shared tables)")


def _progress(progress, total: int, done: int):
    if progress is True:
        return MemberProgress(total, done=done)
    if callable(progress):
        class _Callback(MemberProgress):
            def update(self, success=0, failed=0):
                super().update(success, failed)
                progress(self.finished, self.total, self.failed)
        return _Callback(total, done=done, enabled=False)
    return MemberProgress(total, done=done, enabled=False)
