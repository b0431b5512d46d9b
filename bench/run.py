#!/usr/bin/env python3
"""Speed and size of emend, measured against what users would use instead.

    python3 bench/run.py [--sizes 100k,1m,5m] [--runs 3] [--quick] [--out FILE.md] [--keep]

Standard library only (pandas is installed into a virtual env inside the work folder, for the
profile comparison). See bench/README.md for what each row measures.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import random
import shlex
import shutil
import statistics
import sqlite3
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
EMEND_NOW = "2026-10-01T09:00:00Z"
GIT = "git -c user.name=b -c user.email=b@example.org"
TIME = "/usr/bin/time"
FIXES_PER_ROUND = 1000
WHY_COMMITS = 20
WHY_FIXES = 50
MONTHS = 12

PANDAS_SCRIPT = """\
import sys
import pandas as pd

df = pd.read_csv(sys.argv[1])
df.describe(include="all")
[df[c].value_counts() for c in df.columns]
df.isna().sum()
"""


class BenchError(Exception):
    pass


def log(msg: str) -> None:
    print(msg, file=sys.stderr, flush=True)


# ---------------------------------------------------------------------------------------------
# Running and timing commands


@dataclass
class Sample:
    secs: float
    peak_mib: float


@dataclass
class Series:
    """The runs of one command: medians and ranges for the table."""

    label: str
    samples: list[Sample] = field(default_factory=list)
    note: str = ""

    def add(self, s: Sample) -> None:
        self.samples.append(s)

    @property
    def median(self) -> float:
        return statistics.median(s.secs for s in self.samples)

    @property
    def lo(self) -> float:
        return min(s.secs for s in self.samples)

    @property
    def hi(self) -> float:
        return max(s.secs for s in self.samples)

    @property
    def peak(self) -> float:
        return max(s.peak_mib for s in self.samples)


class Runner:
    def __init__(self, work: Path, emend: Path):
        self.work = work
        self.emend = emend
        self.log_path = work / "commands.log"
        self.time_path = work / "time.out"
        env = dict(os.environ)
        env.update(
            EMEND_HOME=str(work / "emend-home"),
            EMEND_NOW=EMEND_NOW,
            NO_COLOR="1",
            # Git as shipped: no user or system configuration, no pager, no prompts.
            GIT_CONFIG_NOSYSTEM="1",
            GIT_CONFIG_GLOBAL=os.devnull,
            GIT_PAGER="cat",
            PAGER="cat",
            GIT_TERMINAL_PROMPT="0",
            LC_ALL="C",
        )
        self.env = env

    def _tail(self, n: int = 15) -> str:
        try:
            lines = self.log_path.read_text(errors="replace").splitlines()
        except OSError:
            return ""
        return "\n".join(lines[-n:])

    def sh(self, cmd: str, cwd: Path, ok_codes: tuple[int, ...] = (0,)) -> str:
        """Run an untimed setup command; return its standard output."""
        with open(self.log_path, "a") as lg:
            lg.write(f"$ (cd {cwd}) {cmd}\n")
            lg.flush()
            p = subprocess.run(
                ["sh", "-c", cmd], cwd=cwd, env=self.env, stdout=subprocess.PIPE, stderr=lg
            )
            out = p.stdout.decode(errors="replace")
            lg.write(out[-4000:])
        if p.returncode not in ok_codes:
            raise BenchError(f"command failed (exit {p.returncode}): {cmd}\n{self._tail()}")
        return out

    def timed(self, cmd: str, cwd: Path) -> Sample:
        """Run one command under /usr/bin/time: wall time from a monotonic clock around the
        process (finer than %e's 10 ms), peak RSS (largest process in the command) from %M."""
        argv = [TIME, "-f", "%e %M", "-o", str(self.time_path), "sh", "-c", cmd]
        with open(self.log_path, "a") as lg:
            lg.write(f"$ (cd {cwd}) [timed] {cmd}\n")
            lg.flush()
            t0 = time.perf_counter()
            p = subprocess.run(argv, cwd=cwd, env=self.env, stdout=lg, stderr=lg)
            secs = time.perf_counter() - t0
        if p.returncode != 0:
            raise BenchError(f"command failed (exit {p.returncode}): {cmd}\n{self._tail()}")
        last = self.time_path.read_text().strip().splitlines()[-1].split()
        return Sample(secs=secs, peak_mib=int(last[1]) / 1024.0)

    def e(self, args: str) -> str:
        return f"{shlex.quote(str(self.emend))} {args}"


def q(p: Path | str) -> str:
    return shlex.quote(str(p))


def fresh_dir(p: Path) -> Path:
    if p.exists():
        shutil.rmtree(p)
    p.mkdir(parents=True)
    return p


def restore(snapshot: Path, dest: Path) -> None:
    if dest.exists():
        shutil.rmtree(dest)
    subprocess.run(["cp", "-a", str(snapshot), str(dest)], check=True)


def tree_bytes(p: Path) -> int:
    total = 0
    for root, _dirs, files in os.walk(p):
        for f in files:
            fp = os.path.join(root, f)
            if not os.path.islink(fp):
                total += os.path.getsize(fp)
    return total


# ---------------------------------------------------------------------------------------------
# Data: the generated extract and the text edits that mirror emend's fixes in git


class Extract:
    """One generated extract, its chosen rows and the edited versions written for git."""

    def __init__(self, path: Path, rows: int):
        self.path = path
        self.rows = rows
        self.data = path.read_bytes()
        self.edits: dict[int, bytes] = {}  # byte offset in the original -> suffix inserted there
        rng = random.Random(20261001 + rows)
        needed = 2 * FIXES_PER_ROUND + WHY_COMMITS * WHY_FIXES
        if rows < needed:
            raise BenchError(f"--sizes: at least {needed} rows are needed, got {rows}")
        want = rng.sample(range(1, rows + 1), needed)  # 1-based data-row positions
        self.positions = want
        wanted = set(want)
        self.id_of: dict[int, bytes] = {}
        self.id_end: dict[int, int] = {}
        # One pass over the lines: the sample_id of each chosen row and where it ends.
        # The generator never writes a newline inside a field, so line n+1 is data row n.
        off = self.data.index(b"\n") + 1
        header = self.data[:off].rstrip(b"\r\n").split(b",")
        if header[0] != b"sample_id":
            raise BenchError(f"{path}: first column is {header[0]!r}, expected sample_id")
        pos = 0
        n = len(self.data)
        while off < n:
            nl = self.data.find(b"\n", off)
            if nl < 0:
                nl = n
            pos += 1
            if pos in wanted:
                comma = self.data.index(b",", off, nl)
                self.id_of[pos] = self.data[off:comma]
                self.id_end[pos] = comma
            off = nl + 1
        if pos != rows:
            raise BenchError(f"{path}: {pos} data rows, expected {rows}")

    def round(self, k: int) -> list[int]:
        """Rows of fix round k: 0 and 1 are the two 1,000-fix rounds, 2.. the why commits."""
        if k < 2:
            return self.positions[k * FIXES_PER_ROUND : (k + 1) * FIXES_PER_ROUND]
        start = 2 * FIXES_PER_ROUND + (k - 2) * WHY_FIXES
        return self.positions[start : start + WHY_FIXES]

    @staticmethod
    def suffix(k: int) -> bytes:
        return b"x" if k == 0 else b"y" if k == 1 else b"w%d" % (k - 1)

    def write_map(self, k: int, out: Path) -> None:
        suf = self.suffix(k)
        with open(out, "wb") as f:
            f.write(b"from,to\n")
            for pos in self.round(k):
                f.write(self.id_of[pos] + b"," + self.id_of[pos] + suf + b"\n")

    def apply(self, k: int) -> None:
        for pos in self.round(k):
            self.edits[self.id_end[pos]] = self.suffix(k)

    def write_current(self, out: Path) -> None:
        """The extract with every edit applied so far (the same cells emend's fixes change)."""
        with open(out, "wb") as f:
            prev = 0
            for off in sorted(self.edits):
                f.write(self.data[prev:off])
                f.write(self.edits[off])
                prev = off
            f.write(self.data[prev:])


# ---------------------------------------------------------------------------------------------
# Formatting


def fmt_s(x: float) -> str:
    return f"{x:.2f} s" if x >= 1 else f"{x:.3f} s"


def fmt_mib(b: int) -> str:
    return f"{b / 1048576:.1f} MiB"


def size_label(n: int) -> str:
    if n % 1_000_000 == 0:
        return f"{n // 1_000_000}M"
    if n % 1_000 == 0:
        return f"{n // 1_000}k"
    return str(n)


def faster(emend: Series, alt: Series, alt_name: str, target: float | None) -> str:
    """'emend X s vs git Y s = Z× faster (target ≥ T×: met/not met)'."""
    r = alt.median / emend.median if emend.median > 0 else float("inf")
    how = f"{r:.1f}× faster" if r >= 1 else f"{1 / r:.1f}× slower"
    s = f"emend {fmt_s(emend.median)} vs {alt_name} {fmt_s(alt.median)} = {how}"
    if target is None:
        return s + " (no target)"
    return s + f" (target ≥ {target:g}× faster: {'met' if r >= target else 'not met'})"


def within(emend: Series, ref: Series, emend_name: str, ref_name: str, limit: float) -> str:
    """'X s vs Y s = Z× the time (target ≤ L×: met/not met)'."""
    r = emend.median / ref.median if ref.median > 0 else float("inf")
    return (
        f"{emend_name} {fmt_s(emend.median)} vs {ref_name} {fmt_s(ref.median)} = {r:.2f}× the time"
        f" (target ≤ {limit:g}×: {'met' if r <= limit else 'not met'})"
    )


def memory(emend: Series, alt: Series, alt_name: str, limit: float) -> str:
    r = emend.peak / alt.peak if alt.peak > 0 else float("inf")
    return (
        f"emend {emend.peak:.0f} MiB vs {alt_name} {alt.peak:.0f} MiB = {r:.2f}× the peak memory"
        f" (target ≤ {limit:.2f}×: {'met' if r <= limit else 'not met'})"
    )


class Table:
    HEAD = (
        "| # | measurement | command | median | min–max | peak RSS | runs | result |\n"
        "|---|---|---|---:|---:|---:|---:|---|"
    )

    def __init__(self) -> None:
        self.lines: list[str] = []

    def row(self, num: str, what: str, s: Series, result: str = "") -> None:
        label = s.label + (f" ({s.note})" if s.note else "")
        self.lines.append(
            f"| {num} | {what} | {label} | {fmt_s(s.median)} | "
            f"{s.lo:.3f}–{s.hi:.3f} s | {s.peak:.0f} MiB | {len(s.samples)} | {result} |"
        )

    def skip(self, num: str, what: str, why: str) -> None:
        self.lines.append(f"| {num} | {what} | skipped | | | | | {why} |")

    def text(self) -> str:
        return "\n".join([self.HEAD, *self.lines])


# ---------------------------------------------------------------------------------------------
# The benchmark for one size


class Bench:
    def __init__(self, args, run: Runner, tools: dict, pandas_python: Path | None, pandas_why: str):
        self.args = args
        self.run = run
        self.tools = tools
        self.pandas_python = pandas_python
        self.pandas_why = pandas_why
        self.flat: dict[str, dict[int, Series]] = {"diff": {}, "why": {}}

    def series(self, label: str, count: int, setup, cmd: str, cwd: Path, note: str = "") -> Series:
        s = Series(label, note=note)
        for i in range(count):
            if setup:
                setup()
            sample = self.run.timed(cmd, cwd)
            log(f"    {label}: run {i + 1}/{count}: {sample.secs:.3f} s, {sample.peak_mib:.0f} MiB")
            s.add(sample)
        return s

    def interleaved(self, count: int, contenders: list) -> list[Series]:
        """Alternate the contenders run by run, so drift on a shared machine hits all alike.
        Each contender is (label, setup or None, command, cwd, note)."""
        out = [Series(c[0], note=c[4]) for c in contenders]
        for i in range(count):
            for c, s in zip(contenders, out):
                label, setup, cmd, cwd, _note = c
                if setup:
                    setup()
                sample = self.run.timed(cmd, cwd)
                log(f"    {label}: run {i + 1}/{count}: {sample.secs:.3f} s, {sample.peak_mib:.0f} MiB")
                s.add(sample)
        return out

    def size(self, rows: int) -> str:
        run, e, runs = self.run, self.run.e, self.args.runs
        w = fresh_dir(run.work / f"n{rows}")
        lab = size_label(rows)
        gen = self.tools["generate"]
        src = w / f"samples_{lab}.csv"
        log(f"[{lab}] generating {rows} rows")
        run.sh(f"{q(gen)} --rows {rows} > {q(src)}", w)
        ext = Extract(src, rows)
        t = Table()

        # 1. ingest --------------------------------------------------------------------------
        log(f"[{lab}] 1 ingest")
        ing = w / "ingest"
        ing_git = w / "ingest-git"

        def setup_emend_ingest():
            fresh_dir(ing)
            run.sh(e("init"), ing)

        def setup_git_ingest():
            fresh_dir(ing_git)
            run.sh(f"{GIT} init -q", ing_git)
            shutil.copyfile(src, ing_git / "data.csv")

        hasher = self.tools["hasher"]
        s_ing, s_git, s_hash = self.interleaved(
            runs,
            [
                ("emend ingest --key sample_id", setup_emend_ingest,
                 e(f"ingest {q(src)} --table s --key sample_id"), ing, ""),
                ("git add + commit", setup_git_ingest,
                 f"{GIT} add data.csv && {GIT} commit -q -m x", ing_git, ""),
                (f"cat + {hasher}", None,
                 f"cat {q(src)} > /dev/null && {hasher} {q(src)} > /dev/null", w, ""),
            ],
        )
        t.row("1", "ingest", s_ing)
        t.row("1", "ingest", s_git, faster(s_ing, s_git, "git", 5))
        t.row("1", "ingest", s_hash,
              within(s_ing, s_hash, "emend", f"read+hash ({hasher})", 2))
        shutil.rmtree(ing_git)

        # 2. one commit of 1,000 cell fixes --------------------------------------------------
        log(f"[{lab}] 2 commit of {FIXES_PER_ROUND} fixes")
        snap = fresh_dir(w / "snap")
        se, sg = snap / "emend", snap / "git"
        se.mkdir()
        sg.mkdir()
        run.sh(e("init"), se)
        run.sh(e(f"ingest {q(src)} --table s"), se)  # no key: sample_id is an ordinary column
        run.sh(f"{GIT} init -q", sg)
        shutil.copyfile(src, sg / "data.csv")
        run.sh(f"{GIT} add data.csv && {GIT} commit -q -m raw", sg)
        he, hg = w / "hist-emend", w / "hist-git"
        maps = [w / f"map{k}.csv" for k in range(2 + WHY_COMMITS)]
        for k, m in enumerate(maps):
            ext.write_map(k, m)
        ext.apply(0)

        def setup_git_commit():
            restore(sg, hg)
            ext.write_current(hg / "data.csv")  # the text edit, untimed

        s_fix, s_gfix = self.interleaved(
            runs,
            [
                (f"emend recode --map ({FIXES_PER_ROUND} pairs) + commit",
                 lambda: restore(se, he),
                 e(f"recode s sample_id --map {q(maps[0])} --why bench") + " && " + e("commit -m c"),
                 he, ""),
                ("git add + commit", setup_git_commit,
                 f"{GIT} add data.csv && {GIT} commit -q -m c", hg, ""),
            ],
        )
        t.row("2", f"commit of {FIXES_PER_ROUND:,} cell fixes", s_fix)
        t.row("2", f"commit of {FIXES_PER_ROUND:,} cell fixes", s_gfix,
              faster(s_fix, s_gfix, "git", None))
        shutil.rmtree(snap)

        # 3. diff of two fix versions --------------------------------------------------------
        log(f"[{lab}] 3 diff")
        run.sh(e(f"recode s sample_id --map {q(maps[1])} --why bench") + " && " + e("commit -m c3"), he)
        ext.apply(1)
        ext.write_current(hg / "data.csv")
        run.sh(f"{GIT} add data.csv && {GIT} commit -q -m c3", hg)
        s_diff, s_gdiff = self.interleaved(
            runs,
            [
                ("emend diff s 2 3 --json", None, e("diff s 2 3 --json") + " > /dev/null", he, ""),
                ("git diff HEAD~1 HEAD", None, f"{GIT} diff HEAD~1 HEAD > /dev/null", hg, ""),
            ],
        )
        t.row("3", "diff of two fix versions", s_diff)
        t.row("3", "diff of two fix versions", s_gdiff, faster(s_diff, s_gdiff, "git", 100))
        self.flat["diff"][rows] = s_diff

        # 4. why of one cell vs git blame ----------------------------------------------------
        log(f"[{lab}] 4 why: making {WHY_COMMITS} commits of {WHY_FIXES} fixes each")
        for j in range(WHY_COMMITS):
            k = 2 + j
            run.sh(e(f"recode s sample_id --map {q(maps[k])} --why bench") + " && " + e(f"commit -m w{j}"), he)
            ext.apply(k)
            ext.write_current(hg / "data.csv")
            run.sh(f"{GIT} add data.csv && {GIT} commit -q -m w{j}", hg)
        pos = ext.round(2)[0]  # changed in the first of the 20 commits
        blame_runs = runs
        blame_note = ""
        if self.args.quick or rows >= 5_000_000:
            blame_runs = 1
            blame_note = "1 run only: git blame is slow"
        s_why = self.series("emend why s ROW sample_id", runs, None,
                            e(f"why s {pos} sample_id") + " > /dev/null", he)
        s_blame = self.series(f"git blame -L {pos + 1},{pos + 1}", blame_runs, None,
                              f"{GIT} blame -L {pos + 1},{pos + 1} data.csv > /dev/null", hg,
                              note=blame_note)
        what = f"why of a cell last changed {WHY_COMMITS} commits back (row {pos})"
        t.row("4", what, s_why)
        t.row("4", what, s_blame, faster(s_why, s_blame, "git blame", 100))
        self.flat["why"][rows] = s_why
        shutil.rmtree(hg)

        # 5. export of a cleaned version -----------------------------------------------------
        log(f"[{lab}] 5 export")
        nfix = 2 * FIXES_PER_ROUND + WHY_COMMITS * WHY_FIXES
        s_exp, s_raw, s_floor = self.interleaved(
            runs,
            [
                (f"emend export s (latest, {nfix:,} fixes)", None,
                 e(f"export s -o {q(w / 'out.csv')}"), he, ""),
                ("emend export s --at raw", None,
                 e(f"export s --at raw -o {q(w / 'raw.csv')}"), he, ""),
                ("plain CSV parse + write in Rust (csv crate: examples/csv_floor.rs)", None,
                 f"{q(self.tools['csv_floor'])} {q(src)} {q(w / 'floor.csv')}", w, ""),
            ],
        )
        t.row("5", "export of a cleaned version", s_exp)
        t.row("5", "export of a cleaned version", s_raw,
              within(s_exp, s_raw, "latest", "raw", 1.5))
        floor_r = s_exp.median / s_floor.median if s_floor.median > 0 else float("inf")
        t.row("5", "export of a cleaned version", s_floor,
              f"latest {fmt_s(s_exp.median)} vs the parse-and-write floor {fmt_s(s_floor.median)} "
              f"= {floor_r:.2f}× the time (no target: the floor bounds what export can reach)")
        for f in ("out.csv", "raw.csv", "floor.csv"):
            (w / f).unlink(missing_ok=True)
        shutil.rmtree(he)

        # 6. profile vs pandas ---------------------------------------------------------------
        log(f"[{lab}] 6 profile")
        if self.pandas_python is None:
            s_prof = self.series("emend profile s --json", runs, None,
                                 e("profile s --json") + " > /dev/null", ing)
            t.row("6", "profile", s_prof)
            t.skip("6", "profile", f"pandas: {self.pandas_why}")
        else:
            script = run.work / "pandas_profile.py"
            s_prof, s_pd = self.interleaved(
                runs,
                [
                    ("emend profile s --json", None, e("profile s --json") + " > /dev/null", ing, ""),
                    ("pandas read_csv + describe + value_counts + isna", None,
                     f"{q(self.pandas_python)} {q(script)} {q(src)}", w, ""),
                ],
            )
            t.row("6", "profile", s_prof)
            t.row("6", "profile", s_pd,
                  faster(s_prof, s_pd, "pandas", 3) + "; " + memory(s_prof, s_pd, "pandas", 1 / 3))
        self.cores(t, lab, ing)
        shutil.rmtree(ing)

        # 7. store size for twelve monthly extracts ------------------------------------------
        del ext
        src_bytes = src.stat().st_size
        months = self.months(rows, w, src, lab)
        shutil.rmtree(w)

        head = f"### {lab} rows ({rows:,} rows, extract {fmt_mib(src_bytes)})"
        return "\n".join([head, "", t.text(), "", months])

    # Issue 17, both cores: rows "cores" ------------------------------------------------------
    def cores(self, t: Table, lab: str, ing: Path) -> None:
        """profile and check with one thread (EMEND_THREADS=1) and with the default (one per
        core), alternating, on the keyed store of row 6; check runs demo/rules.toml adopted."""
        run, e, runs = self.run, self.run.e, self.args.runs
        log(f"[{lab}] cores: profile and check on one thread and on every core")
        run.sh(e(f"rules s {q(REPO / 'demo' / 'rules.toml')} --why bench"), ing)
        # check exits 1 when a rule is broken, which the generated data does on purpose.
        chk = e("check s --json") + " > /dev/null; [ $? -le 1 ]"
        prof = e("profile s --json") + " > /dev/null"
        one = "EMEND_THREADS=1 "
        p1, p2, c1, c2 = self.interleaved(
            runs,
            [
                ("EMEND_THREADS=1 emend profile s --json", None, one + prof, ing, ""),
                ("emend profile s --json (every core)", None, prof, ing, ""),
                ("EMEND_THREADS=1 emend check s --json", None, one + chk, ing, ""),
                ("emend check s --json (every core)", None, chk, ing, ""),
            ],
        )
        t.row("cores", "profile, one thread vs every core", p1)
        t.row("cores", "profile, one thread vs every core", p2,
              faster(p2, p1, "one thread", 1.6))
        t.row("cores", "check (demo/rules.toml), one thread vs every core", c1)
        t.row("cores", "check (demo/rules.toml), one thread vs every core", c2,
              faster(c2, c1, "one thread", 1.6))
        t.row("cores", "check vs profile, every core", c2,
              within(c2, p2, "check", "profile", 1.0))

    def months(self, rows: int, w: Path, src: Path, lab: str) -> str:
        run, e = self.run, self.run.e
        log(f"[{lab}] 7 twelve monthly extracts")
        st = fresh_dir(w / "months-emend")
        gr = fresh_dir(w / "months-git")
        run.sh(e("init"), st)
        run.sh(f"{GIT} init -q", gr)
        total_files = 0
        s_ming = Series("emend ingest (months 1–11)")
        s_carry = Series("emend carry s (months 1–11)")
        s_ccommit = Series("emend commit of the carried fixes (months 1–11)")
        s_gm = Series("git add + commit (months 0–11)")
        after_m0 = 0
        trace: list[int] = []
        for k in range(MONTHS):
            f = w / f"month{k:02}.csv"
            if k == 0:
                shutil.copyfile(src, f)  # month 0 is the extract generated above
            else:
                run.sh(f"{q(self.tools['generate'])} --rows {rows} --month {k} > {q(f)}", w)
            total_files += f.stat().st_size
            if k == 0:
                run.sh(e(f"ingest {q(f)} --table s --key sample_id"), st)
                after_m0 = tree_bytes(st / ".emend")
                # One small fix commit, so later months have something to carry.
                run.sh(e("recode s site --from 'mill creek' --to 'Mill Creek' --why bench"), st)
                run.sh(e("missing s turbidity_ntu --code -999 --why bench"), st)
                run.sh(e("commit -m fixes"), st)
            else:
                s_ming.add(run.timed(e(f"ingest {q(f)} --table s"), st))
                s_carry.add(run.timed(e("carry s"), st))
                pending = json.loads(run.sh(e("status --json"), st)).get("pending") or []
                if pending:
                    s_ccommit.add(run.timed(e(f"commit -m 'carry month {k}'"), st))
                log(f"    month {k}: ingest {s_ming.samples[-1].secs:.3f} s, "
                    f"carry {s_carry.samples[-1].secs:.3f} s, {len(pending)} fixes pending")
            trace.append(tree_bytes(st / ".emend"))
            os.replace(f, gr / "data.csv")
            s_gm.add(run.timed(f"{GIT} add data.csv && {GIT} commit -q -m m{k}", gr))
        emend_bytes = tree_bytes(st / ".emend")
        git_before = tree_bytes(gr / ".git")
        s_gc = Series("git gc", note="1 run")
        s_gc.add(run.timed(f"{GIT} gc -q", gr))
        git_after = tree_bytes(gr / ".git")
        shutil.rmtree(st)
        shutil.rmtree(gr)

        t = Table()
        t.row("7", "monthly extract", s_ming)
        t.row("7", "monthly extract", s_carry)
        if s_ccommit.samples:
            t.row("7", "monthly extract", s_ccommit)
        t.row("7", "monthly extract", s_gm)
        t.row("7", "maintenance", s_gc)

        def ratio(a: int, b: int) -> str:
            return f"{a / b:.2f}×" if b else "n/a"

        lim = 1.3
        r0 = emend_bytes / after_m0 if after_m0 else float("inf")
        lines = [
            "| 7. store for twelve monthly extracts | bytes | size | emend store vs this |",
            "|---|---:|---:|---|",
            f"| emend store after month 11 (`.emend/`, no maintenance step) | {emend_bytes:,} | "
            f"{fmt_mib(emend_bytes)} | |",
            f"| one compressed extract (emend store after month 0) | {after_m0:,} | {fmt_mib(after_m0)} | "
            f"{r0:.2f}× (target ≤ {lim:g}×: {'met' if r0 <= lim else 'not met'}) |",
            f"| the twelve extract files | {total_files:,} | {fmt_mib(total_files)} | "
            f"{ratio(emend_bytes, total_files)} |",
            f"| git `.git` before `git gc` | {git_before:,} | {fmt_mib(git_before)} | "
            f"{ratio(emend_bytes, git_before)} |",
            f"| git `.git` after `git gc` ({fmt_s(s_gc.median)}, {s_gc.peak:.0f} MiB) | {git_after:,} | "
            f"{fmt_mib(git_after)} | {ratio(emend_bytes, git_after)} "
            f"(target < 1×: {'met' if emend_bytes < git_after else 'not met'}) |",
        ]
        lines.append("")
        lines.append("emend store after the last command of each month, 0 to 11 (MiB): "
                     + ", ".join(f"{b / 1048576:.1f}" for b in trace))
        return t.text() + "\n\n" + "\n".join(lines)

    # Lookups by key and position (issue 17) ---------------------------------------------------
    def lookups(self, rows: int) -> str:
        """Latency of the everyday one-row commands through the row map, against the same store
        with its row map removed (how every command found a row before: reading the table)."""
        run, e, runs = self.run, self.run.e, self.args.runs
        w = fresh_dir(run.work / f"look{rows}")
        lab = size_label(rows)
        src = w / f"samples_{lab}.csv"
        log(f"[lookups {lab}] generating {rows} rows")
        run.sh(f"{q(self.tools['generate'])} --rows {rows} > {q(src)}", w)
        mapped, scan = w / "mapped", w / "scan"
        mapped.mkdir()
        run.sh(e("init"), mapped)
        s_ing = self.series("emend ingest --key sample_id", 1, None,
                            e(f"ingest {q(src)} --table s --key sample_id"), mapped)
        shutil.copytree(mapped, scan)
        store = scan / ".emend" / "store.sqlite"
        con = sqlite3.connect(store)
        map_bytes = con.execute("SELECT COALESCE(SUM(LENGTH(data)), 0) FROM row_map").fetchone()[0]
        chunk_bytes = con.execute("SELECT SUM(LENGTH(data)) FROM chunk").fetchone()[0]
        con.execute("DELETE FROM row_map")
        con.commit()
        con.close()
        src.unlink()
        near_end = rows - 10
        key = f"S-{near_end:05}"
        commands = [
            (f"show s {key}", f"show s {key}"),
            (f"show s #{near_end}", f"show s '#{near_end}'"),
            (f"show s --rows {near_end}-{near_end + 9}", f"show s --rows {near_end}-{near_end + 9}"),
            (f"why s {key} ph", f"why s {key} ph"),
            (f"set s {key} ph 7.1", f"set s {key} ph 7.1 --why bench"),
            (f"exclude s {key}", f"exclude s {key} --why bench"),
        ]

        def discard(d: Path):
            # The fix a timed run recorded is dropped before the next run, untimed.
            return lambda: run.sh(e("discard"), d, ok_codes=(0, 1, 2))
        t = Table()
        t.row("L", "ingest (the row map is built here)", s_ing)
        for label, args in commands:
            cmd = e(args) + " > /dev/null"
            s_map, s_scan = self.interleaved(
                runs,
                [
                    (f"emend {label}, row map", discard(mapped), cmd, mapped, ""),
                    (f"emend {label}, whole-table read", discard(scan), cmd, scan, ""),
                ],
            )
            t.row("L", label, s_map)
            ok = "met" if s_map.median <= 0.05 else "not met"
            t.row("L", label, s_scan,
                  f"row map {fmt_s(s_map.median)} vs read {fmt_s(s_scan.median)} = "
                  f"{s_scan.median / max(s_map.median, 1e-9):.0f}× faster (target ≤ 50 ms: {ok})")
        shutil.rmtree(w)
        head = f"### lookups at {lab} rows"
        share = map_bytes / chunk_bytes if chunk_bytes else 0
        size = (f"Row map: {map_bytes:,} bytes against {chunk_bytes:,} compressed bytes of the extract "
                f"({100 * share:.1f}%; target ≤ 25%: {'met' if share <= 0.25 else 'not met'}).")
        return "\n".join([head, "", t.text(), "", size])

    def flat_summary(self) -> str:
        out = []
        for key, name in (("diff", "3. emend diff"), ("why", "4. emend why")):
            d = self.flat[key]
            if len(d) < 2:
                continue
            lo, hi = min(d), max(d)
            r = d[hi].median / d[lo].median if d[lo].median else float("inf")
            cells = ", ".join(f"{size_label(n)}: {fmt_s(d[n].median)}" for n in sorted(d))
            out.append(
                f"- {name}: {cells}; {size_label(hi)} takes {r:.2f}× the time of {size_label(lo)} "
                f"for {hi / lo:g}× the rows (flat means ≤ 2×: {'met' if r <= 2 else 'not met'})"
            )
        if not out:
            return ""
        return "Flat in size (targets of rows 3 and 4):\n\n" + "\n".join(out)


# ---------------------------------------------------------------------------------------------
# Set-up: build, tools, machine


def parse_sizes(text: str) -> list[int]:
    out = []
    for part in text.split(","):
        p = part.strip().lower().replace("_", "")
        mult = 1
        if p.endswith("k"):
            mult, p = 1_000, p[:-1]
        elif p.endswith("m"):
            mult, p = 1_000_000, p[:-1]
        try:
            n = int(float(p) * mult)
        except ValueError:
            raise argparse.ArgumentTypeError(f"bad size {part!r}; use e.g. 100k,1m,5m")
        if n <= 0:
            raise argparse.ArgumentTypeError(f"bad size {part!r}")
        out.append(n)
    return out


def build() -> dict:
    log("building: cargo build --release --bins --examples")
    p = subprocess.run(["cargo", "build", "--release", "--bins", "--examples"], cwd=REPO)
    if p.returncode != 0:
        raise BenchError("cargo build --release --bins --examples failed (see above)")
    meta = subprocess.run(
        ["cargo", "metadata", "--format-version", "1", "--no-deps"],
        cwd=REPO, stdout=subprocess.PIPE, check=True,
    )
    target = Path(json.loads(meta.stdout)["target_directory"]) / "release"
    tools = {"emend": target / "emend", "generate": target / "examples" / "generate",
             "csv_floor": target / "examples" / "csv_floor"}
    for k, v in tools.items():
        if not v.exists():
            raise BenchError(f"{k}: {v} not found after the build")
    return tools


def machine(tools: dict) -> list[str]:
    def cmd(argv: list[str], cwd: Path = REPO) -> str:
        try:
            p = subprocess.run(argv, cwd=cwd, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL)
            return p.stdout.decode().strip()
        except OSError:
            return "?"

    cpu = "?"
    mem = "?"
    try:
        for line in open("/proc/cpuinfo"):
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
        for line in open("/proc/meminfo"):
            if line.startswith("MemTotal"):
                mem = f"{int(line.split()[1]) / 1048576:.1f} GiB"
                break
    except OSError:
        pass
    rev = cmd(["git", "rev-parse", "--short", "HEAD"])
    if cmd(["git", "status", "--porcelain", "--untracked-files=no"]):
        rev += " (with uncommitted changes in the working tree)"
    return [
        f"- emend commit: {rev}",
        f"- machine: {cmd(['nproc'])} CPUs ({cpu}), {mem} memory, {platform.system()} {platform.release()}",
        f"- {cmd(['git', '--version'])}; Python {platform.python_version()}; "
        f"hash for read+hash: {tools['hasher']}",
    ]


def setup_pandas(work: Path) -> tuple[Path | None, str]:
    venv = work / "venv"
    log("making a virtual env with pandas (python3 -m venv; pip install -q pandas)")
    try:
        subprocess.run([sys.executable, "-m", "venv", str(venv)], check=True,
                       stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    except (subprocess.CalledProcessError, OSError) as err:
        return None, f"python3 -m venv failed ({err})"
    p = subprocess.run([str(venv / "bin" / "pip"), "install", "-q", "pandas"],
                       stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    if p.returncode != 0:
        lines = p.stderr.decode(errors="replace").strip().splitlines()
        return None, "pip install pandas failed: " + (lines[-1] if lines else f"exit {p.returncode}")
    (work / "pandas_profile.py").write_text(PANDAS_SCRIPT)
    py = venv / "bin" / "python"
    v = subprocess.run([str(py), "-c", "import pandas; print(pandas.__version__)"],
                       stdout=subprocess.PIPE, text=True)
    return py, f"pandas {v.stdout.strip()}"


def main() -> int:
    ap = argparse.ArgumentParser(
        description="Speed and size of emend against git, read+hash and pandas; prints a markdown table."
    )
    ap.add_argument("--sizes", type=parse_sizes, default=None,
                    help="rows per extract, comma-separated (default 100k,1m,5m; --quick: 100k)")
    ap.add_argument("--runs", type=int, default=None,
                    help="runs per measurement; the table shows the median (default 3; --quick: 1)")
    ap.add_argument("--quick", action="store_true",
                    help="smoke test: 100k rows, 1 run, git blame once (a few minutes)")
    ap.add_argument("--lookups", type=lambda t: [] if t == "none" else parse_sizes(t), default=None,
                    help="sizes for the one-row lookup rows (default 1m,10m; --quick: 100k; 'none')")
    ap.add_argument("--out", type=Path, help="also write the markdown report to this file")
    ap.add_argument("--keep", action="store_true", help="keep the work folder")
    ap.add_argument("--tmp", type=Path, default=None,
                    help="folder in which to make the work folder (default: the system temp dir)")
    args = ap.parse_args()
    if args.sizes is None:
        args.sizes = [100_000] if args.quick else [100_000, 1_000_000, 5_000_000]
    if args.lookups is None:
        args.lookups = [100_000] if args.quick else [1_000_000, 10_000_000]
    if args.runs is None:
        args.runs = 1 if args.quick else 3
    if args.runs < 1:
        ap.error("--runs must be at least 1")
    if not os.access(TIME, os.X_OK):
        print(f"error: {TIME} (GNU time) is needed; install it (Debian/Ubuntu: apt-get install time)",
              file=sys.stderr)
        return 2
    for tool in ("git", "cargo", "cat"):
        if shutil.which(tool) is None:
            print(f"error: {tool} is not on PATH", file=sys.stderr)
            return 2

    work = Path(tempfile.mkdtemp(prefix="emend-bench-", dir=args.tmp))
    started = time.time()
    try:
        tools = build()
        tools["hasher"] = "b3sum" if shutil.which("b3sum") else "sha256sum"
        run = Runner(work, tools["emend"])
        (work / "emend-home").mkdir()
        run.sh(run.e("id new --name Bench"), work)
        py, pandas_info = setup_pandas(work)
        header = [
            "## emend benchmark",
            "",
            *machine(tools),
            f"- profile comparison: {pandas_info}",
            f"- runs per measurement: {args.runs}"
            + (" (--quick: a smoke test, single runs, not a measurement)" if args.quick else "")
            + "; median shown, min–max beside it; peak RSS is the largest over the runs",
            "- times: wall clock around each process; peak RSS from /usr/bin/time %M "
            "(largest single process of the command)",
            "",
        ]
        bench = Bench(args, run, tools, py, pandas_info)
        parts = []
        for n in args.sizes:
            parts.append(bench.size(n))
            # Keep what is measured so far, so an interrupted long run still leaves its tables.
            if args.out:
                args.out.write_text("\n".join(header) + "\n" + "\n\n".join(parts) + "\n\n(partial)\n")
        for n in args.lookups:
            parts.append(bench.lookups(n))
            if args.out:
                args.out.write_text("\n".join(header) + "\n" + "\n\n".join(parts) + "\n\n(partial)\n")
        flat = bench.flat_summary()
        report = "\n".join(header) + "\n" + "\n\n".join(parts) + ("\n\n" + flat if flat else "")
        report += f"\n\n(whole run: {(time.time() - started) / 60:.1f} min)\n"
        print(report)
        if args.out:
            args.out.write_text(report)
            log(f"wrote {args.out}")
        return 0
    except BenchError as err:
        print(f"error: {err}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    finally:
        if args.keep:
            log(f"kept the work folder {work}")
        else:
            shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
