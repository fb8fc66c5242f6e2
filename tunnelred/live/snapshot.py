"""One look at the campaign folder (`Watcher.cycle`): which runs are complete, their inputs copied
into the snapshot ``OUT/.live/campaign``, the snapshot reduced, the status of every run.
"""

from __future__ import annotations

import math
import os
import shutil
import stat
from dataclasses import replace
from datetime import datetime
from pathlib import Path

from tunnelred.common.errors import InputError, OutputFolderError, Problem
from tunnelred.engine import quality
from tunnelred.inputs.config import load_config
from tunnelred.inputs.readers import run_closure
from tunnelred.live.figure import live_figure_into
from tunnelred.live.folder import (
    NEWLINE,
    Changed,
    FileState,
    RunsRow,
    Seen,
    bad_file,
    read_runs_rows,
    whole_lines,
)
from tunnelred.live.status import (
    COMPLETE,
    FAILED,
    FLAGGED,
    LIVE_DIR,
    REDUCED,
    SNAPSHOT_DIR,
    TRUNCATED,
    WAITING,
    RunLine,
    Status,
    internal_text,
)
from tunnelred.products import store

_INPUT_FILES = ("campaign.toml", "runs.csv")


class Watcher:
    """One poll after another of a campaign folder; see :func:`watch` for the rule."""

    def __init__(self, campaign_dir, out_dir, *, settle: float, workers: int, clock):
        self.root = Path(campaign_dir).resolve()
        self.out = Path(out_dir).resolve()
        self.snapshot = self.out / LIVE_DIR / SNAPSHOT_DIR
        self.folder = None  # the ResultsFolder the watch holds (locked) for the engine
        self.settle = float(settle)
        self.workers = workers
        self.clock = clock
        self.seen: dict[str, Seen] = {}
        self.copied: dict[str, tuple[int, int]] = {}
        self.rows: list[RunsRow] = []
        self.lines: list[str] = []
        self.runs_key: tuple[int, int] | None = None
        self.snapshot_runs: bytes | None = None  # runs.csv as last written into the snapshot
        self.named_files: tuple[str, ...] = ()  # files campaign.toml names, copied with it
        self.signatures: dict[str, tuple] = {}
        self.pending: dict[str, str] = {}  # data run -> the closing zero it is reduced without
        self.results = None
        self.title = ""
        self.problems: tuple[str, ...] = ()
        self.fresh: tuple[str, ...] = ()
        self.reductions = 0

    # -- one file
    def _look(self, rel: str, *, whole_lines: bool) -> FileState:
        path = self.root / rel
        try:
            st = path.stat()
        except OSError:
            self.seen.pop(rel, None)
            return FileState("missing")
        key = (st.st_size, st.st_mtime_ns)
        if not stat.S_ISREG(st.st_mode):  # a folder, a FIFO, a device: never opened
            what = "a folder" if stat.S_ISDIR(st.st_mode) else "not a regular file"
            return FileState("bad", key, bad_file(rel, what))
        now = self.clock()
        seen = self.seen.get(rel)
        if seen is None or seen.key != key:
            self.seen[rel] = seen = Seen(key, now)
        if st.st_size == 0:
            return FileState("empty", key)
        if now - seen.since < self.settle:
            return FileState("growing", key)
        if seen.tail is None:
            seen.tail = self._verdict(rel, key) if whole_lines else FileState("ready", key)
        return seen.tail

    def _verdict(self, rel: str, key: tuple[int, int]) -> FileState:
        """A settled log: ready, cut off mid-line (its last line has no line break), or bad."""
        try:
            with open(self.root / rel, "rb") as f:
                f.seek(-1, os.SEEK_END)
                if f.read(1) in b"\r\n":
                    return FileState("ready", key)
                f.seek(0)
                data = f.read()
        except OSError as exc:
            unreadable = f"a file that cannot be read ({exc.strerror or exc})"
            return FileState("bad", key, bad_file(rel, unreadable))
        number = len(NEWLINE.findall(data)) + 1
        last = data[data.rfind(b"\n") + 1 :].decode("utf-8", errors="replace")
        problem = Problem(
            rel,
            number,
            None,
            "a line break at the end of the last line",
            f"line {number} cut off mid-line: {last[:40]!r}, unchanged for {self.settle:g} s",
            "The logger stopped while writing; complete the line or delete it.",
        )
        return FileState("cut", key, problem)

    def _copy_named_files(self) -> None:
        for rel in self.named_files:
            state = self._look(rel, whole_lines=False)
            if state.state == "ready":
                self._copy(rel, state.key)

    def _copy(self, rel: str, key: tuple[int, int]) -> bool:
        """Copy a settled file into the snapshot; False when it changed meanwhile."""
        if self.copied.get(rel) == key:
            return False
        source = self.root / rel
        try:
            # A log path that passed inside_folder (no `..`) or a file campaign.toml names; the
            # copy's path is checked, resolved, to stay inside OUT, as every write into OUT is.
            dest = store.contained(self.out, self.snapshot / rel)
        except OutputFolderError:
            return False
        try:
            st = dest.stat()
            if (st.st_size, st.st_mtime_ns) == key:
                # Left by an earlier watch of the same folder into the same OUT.
                self.copied[rel] = key
                return True
        except OSError:
            pass
        try:
            with store.atomic_path(dest) as tmp:
                shutil.copyfile(source, tmp)
                after = source.stat()
                if (after.st_size, after.st_mtime_ns) != key:
                    raise Changed(rel)
                os.utime(tmp, ns=(after.st_atime_ns, after.st_mtime_ns))
        except (Changed, OSError):
            self.seen.pop(rel, None)
            return False
        self.copied[rel] = key
        return True

    # -- one poll
    def cycle(self, publish) -> Status:
        inputs = {rel: self._look(rel, whole_lines=False) for rel in _INPUT_FILES}
        waiting_inputs = [rel for rel, s in inputs.items() if s.state != "ready"]
        if "campaign.toml" not in waiting_inputs:
            if self._copy("campaign.toml", inputs["campaign.toml"].key):
                # The files it names (model photo, calibration) go into the snapshot with it.
                source, _ = load_config(self.root / "campaign.toml")
                self.named_files = source.campaign_files() if source is not None else ()
                self._copy_named_files()
                config, _ = load_config(self.snapshot / "campaign.toml")
                self.title = config.campaign.title if config else ""
            else:
                self._copy_named_files()
        if "runs.csv" not in waiting_inputs and inputs["runs.csv"].key != self.runs_key:
            try:
                data = (self.root / "runs.csv").read_bytes()
            except OSError as exc:
                inputs["runs.csv"] = FileState("bad", None, bad_file("runs.csv", str(exc)))
                return self._status({}, set(), note=self._note(inputs))
            text = whole_lines(data).decode("utf-8-sig", errors="replace")
            self.lines, self.rows = read_runs_rows(self.root, text)
            self.runs_key = inputs["runs.csv"].key
        by_id = {r.run: r for r in self.rows}
        files = {rel for r in self.rows for rel in r.logs if rel is not None}
        states = {rel: self._look(rel, whole_lines=True) for rel in sorted(files)}
        for rel, s in states.items():
            if s.state == "ready":
                self._copy(rel, s.key)

        verdicts: dict[str, tuple[str, str]] = {}
        self.pending = {}
        for row in self.rows:
            self._judge(row.run, by_id, states, verdicts, ())
        available = {
            r.run for r in self.rows if self._available(r.run, by_id, skip=self.pending.get(r.run))
        }
        snapshot_text = self._snapshot_runs(available)
        named_copied = all(rel in self.copied for rel in self.named_files)
        if snapshot_text != self.snapshot_runs and "campaign.toml" in self.copied and named_copied:
            store.atomic_write_bytes(
                store.contained(self.out, self.snapshot / "runs.csv"), snapshot_text
            )
            self.snapshot_runs = snapshot_text

        data_runs = [r for r in self.rows if r.kind == "data"]
        signatures = {
            r.run: self._signature(r.run, by_id, skip=self.pending.get(r.run))
            for r in data_runs
            if r.run in available
        }
        fresh = tuple(rid for rid, sig in signatures.items() if self.signatures.get(rid) != sig)
        # The engine runs when a data run is new, changed or gone, and once at the start so that
        # OUT matches a snapshot an earlier watch left.
        first = self.reductions == 0 and not self.problems and bool(signatures)
        due = fresh or signatures.keys() != self.signatures.keys() or first
        if due and self.snapshot_runs is not None:
            self.fresh = fresh
            busy = self._status(verdicts, available, note=f"reducing {_list(fresh)}")
            publish(replace(busy, busy=True))
            if self._reduce():
                self.signatures = signatures
        return self._status(verdicts, available, note=self._note(inputs))

    def _judge(self, rid, by_id, states, verdicts, chain) -> tuple[str, str]:
        """(state, reason) of a run from its own logs and its zero and tare runs."""
        if rid in verdicts:
            return verdicts[rid]
        row = by_id.get(rid)
        if row is None:
            return WAITING, f"{rid}: no row in runs.csv yet"
        if row.problem:
            verdicts[rid] = (FAILED, row.problem)
            return verdicts[rid]
        if rid in chain:
            return COMPLETE, ""  # a loop of references is the readers' problem to report
        verdict = (COMPLETE, "")
        for rel in row.logs:
            s = states.get(rel) if rel is not None else None
            if s is None or s.state == "ready":
                continue
            if s.state == "cut":
                verdict = (TRUNCATED, str(s.problem))
                break
            if s.state == "bad":
                verdict = (FAILED, str(s.problem))
                break
            text = {"missing": "not written yet", "empty": "empty so far"}.get(
                s.state, "still being written"
            )
            verdict = (WAITING, f"{rel}: {text}")
            break
        if verdict[0] == COMPLETE:
            closing, pending = self._closing_zero(row, by_id), None
            for need in row.needs:
                state, reason = self._judge(need, by_id, states, verdicts, (*chain, rid))
                if state == WAITING and need == closing:
                    # Not taken yet: reduced provisionally from the opening zero meanwhile. A
                    # closing zero cut off or unusable is shown on the run, as any other need.
                    pending = closing
                elif state != COMPLETE:
                    prefix = f"{need}: " if not reason.startswith(f"{need}:") else ""
                    verdict = (state, f"{prefix}{reason}")
                    break
            else:
                if pending is not None:
                    self.pending[rid] = pending
        verdicts[rid] = verdict
        return verdict

    @staticmethod
    def _closing_zero(row: RunsRow, by_id) -> str | None:
        """The zero a data run names after it (its row absent or further down runs.csv), when
        the other zero it names comes before it: the one a provisional result may go without.
        The readers check the same pair by start time (open_campaign, closing_zero_pending)."""
        if row.kind != "data" or len(row.zeros) != 2:
            return None
        after = [z for z in row.zeros if z not in by_id or by_id[z].lines[0] > row.lines[0]]
        before = [z for z in row.zeros if z not in after]
        return after[0] if len(after) == 1 and len(before) == 1 else None

    def _available(self, rid, by_id, skip: str | None = None) -> bool:
        """Every log of the run and of the runs it reads, transitively (the readers'
        run_closure; but ``skip``, a closing zero still pending, as the run's own need), has a
        copy in the snapshot."""

        def needs(other: str) -> tuple[str, ...]:
            row = by_id.get(other)
            if row is None:
                return ()
            return tuple(n for n in row.needs if not (other == rid and n == skip))

        return all(
            (row := by_id.get(other)) is not None
            and not row.problem
            and all(rel is None or rel in self.copied for rel in row.logs)
            for other in run_closure(rid, needs)
        )

    def _signature(self, rid, by_id, visiting=frozenset(), skip: str | None = None) -> tuple:
        """What the run's reduction reads, as the watch knows it: rows and copied versions
        (without ``skip``, the closing zero a provisional result goes without)."""
        row = by_id.get(rid)
        if row is None or rid in visiting:
            return (rid,)
        own = (row.text, tuple((rel, self.copied.get(rel)) for rel in row.logs))
        deps = tuple(self._signature(n, by_id, visiting | {rid}) for n in row.needs if n != skip)
        named = tuple(self.copied.get(rel) for rel in self.named_files)
        return (self.copied.get("campaign.toml"), named, self.lines[0], own, deps, skip)

    def _snapshot_runs(self, available: set[str]) -> bytes:
        """runs.csv of the snapshot: the rows of available runs; the others blanked, so that
        every row keeps its line number (the readers skip blank lines)."""
        lines = list(self.lines)
        for row in self.rows:
            if row.run not in available:
                for i in range(*row.lines):
                    lines[i] = lines[i][len(lines[i].rstrip("\r\n")) :]
        return "".join(lines).encode("utf-8")

    def _reduce(self) -> bool:
        """Reduce the snapshot into OUT; False when OUT could not take the results (a full
        disk, say: tried again at the next poll). Nothing here ends the watch."""
        from tunnelred.pipeline.campaign import reduce_campaign

        try:
            self.results = reduce_campaign(
                self.snapshot,
                self.folder if self.folder is not None else self.out,
                workers=self.workers,
                progress=False,
                figures=False,
                extras=live_figure_into,
                provisional=True,
            )
        except InputError as exc:
            self.problems = tuple(str(p) for p in exc.problems)
            return True
        except OutputFolderError as exc:
            self.problems = (str(exc),)
            return False
        except Exception as exc:  # a fault of ours must not end a watch mid-test
            self.problems = (internal_text("reducing", exc),)
            return True
        self.problems = ()
        self.reductions += 1
        return True

    def _status(self, verdicts, available, *, note: str) -> Status:
        values, reasons, failed = {}, {}, {}
        if self.results is not None:
            ds = self.results.dataset
            if ds.sizes.get("run", 0):
                table = store.run_table(ds)
                reasons = _flag_reasons(table)
                for rec in table.to_dict("records"):
                    values[str(rec["run"])] = rec
            for rec in self.results.failures.to_dict("records"):
                failed.setdefault(str(rec["run"]), _failure_text(rec))
        lines = []
        listed = set()
        for row in self.rows:
            if row.kind != "data" and not row.problem:  # a row too broken to say its kind
                continue
            listed.add(row.run)
            state, reason = verdicts.get(row.run, (WAITING, ""))
            rec = values.get(row.run) if row.run in available else None
            if row.run in available and row.run in failed:
                lines.append(RunLine(row.run, FAILED, row.config, reason=failed[row.run]))
                continue
            if rec is not None:
                provisional = bool(rec.get("provisional", False))
                if state == COMPLETE:
                    flags = str(rec.get("flags") or "")
                    state = FLAGGED if flags else REDUCED
                    reason = reasons.get(row.run, "")
                    if provisional:
                        closing = self.pending.get(row.run, "the closing zero")
                        wait = f"provisional until {closing} is in (opening zero only)"
                        reason = f"{reason}; {wait}" if reason else wait
                else:
                    reason = f"{reason} (results of the previous version)"
                lines.append(
                    RunLine(
                        row.run,
                        state,
                        str(rec.get("config", row.config)),
                        *(float(rec.get(k, math.nan)) for k in ("alpha", "CL", "CD", "u_CL")),
                        reason=reason,
                        provisional=provisional,
                    )
                )
                continue
            lines.append(RunLine(row.run, state, row.config, reason=reason))
        lines += [
            RunLine(rid, FAILED, reason=why) for rid, why in failed.items() if rid not in listed
        ]
        return Status(
            title=self.title,
            campaign=str(self.root),
            out=str(self.out),
            runs=tuple(lines),
            fresh=self.fresh,
            reductions=self.reductions,
            problems=self.problems,
            note=note,
            updated=datetime.now().isoformat(timespec="seconds"),
        )

    def _note(self, inputs: dict[str, FileState]) -> str:
        bad = [str(s.problem) for s in inputs.values() if s.state == "bad"]
        if bad:
            return "; ".join(bad)
        waiting_inputs = [rel for rel, s in inputs.items() if s.state != "ready"]
        if waiting_inputs:
            return f"waiting for {' and '.join(waiting_inputs)} to settle"
        return f"watching {self.root} (a file counts once unchanged for {self.settle:g} s)"


def _list(runs) -> str:
    runs = list(runs)
    return ", ".join(runs) if len(runs) <= 6 else f"{', '.join(runs[:5])} and {len(runs) - 5} more"


def _failure_text(rec: dict) -> str:
    where = str(rec.get("file") or "")
    line = rec.get("line")
    if where and line is not None and not (isinstance(line, float) and math.isnan(line)):
        try:
            where += f":{int(line)}"
        except (TypeError, ValueError):
            pass
    return f"{where}: {rec['reason']}" if where else str(rec["reason"])


def _flag_reasons(table) -> dict[str, str]:
    """Each flagged run's flags with their reasons, as the results record them."""
    reasons = {}
    for run, flags, text in zip(table["run"], table["flags"], table["flag_reasons"], strict=True):
        if flags:
            worded = quality.parse_flag_reasons(text)
            reasons[str(run)] = "; ".join(f"{n}: {r}" for n, r in worded.items())
    return reasons
