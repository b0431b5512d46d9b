#!/usr/bin/env python3
"""Score `emend profile` findings against hand-written labels on real tables.

For each table under bench/findings/corpus/: make a scratch store, ingest data.csv, run
`emend profile t --json`, match every finding to the labels in labels.toml, then apply every
offered fix command in the scratch store, commit, export, and compare with the raw export cell
by cell. Standard-library Python 3.11 only. The matching rules are in bench/findings/README.md.

    python3 bench/findings/run.py --emend target/release/emend [--table NAME] [--json] [--keep]
"""

from __future__ import annotations

import argparse
import csv
import json
import os
import shutil
import subprocess
import sys
import tempfile
import tomllib
from pathlib import Path

HERE = Path(__file__).resolve().parent
CORPUS = HERE / "corpus"
REPO = HERE.parent.parent
NOW = "2026-10-01T09:00:00Z"

# Which label kinds a finding kind can be evidence for. A finding of kind K matches a problem
# label only when the label's kind is in COMPATIBLE[K].
COMPATIBLE = {
    "suspected_missing_code": {"missing_code", "placeholder", "out_of_range"},
    "write_ins": {"free_text", "foreign_code", "missing_code", "placeholder", "spelling_variant",
                  "case_variant", "whitespace", "inconsistent_code"},
    "near_duplicate_levels": {"spelling_variant", "case_variant", "whitespace", "inconsistent_code"},
    "magnitude_error": {"magnitude_error", "out_of_range"},
    "outliers": {"out_of_range", "magnitude_error", "sign_flip", "missing_code", "placeholder",
                 "contradiction"},
    "mostly_missing": {"mostly_missing", "untrustworthy_column"},
    "near_constant": {"constant_column", "untrustworthy_column", "zero_inflated", "mostly_missing"},
    "constant": {"constant_column", "untrustworthy_column", "mostly_missing"},
    "contradiction": {"contradiction"},
    "date_order": {"date_format"},
    "duplicate_rows": {"duplicate_row"},
    "empty_rows": {"empty_row"},
    "whitespace": {"whitespace", "spelling_variant", "case_variant"},
    "case_variants": {"case_variant", "spelling_variant"},
    "title_case": {"case_variant", "spelling_variant"},
    "word_forms": {"spelling_variant", "inconsistent_code"},
    "short_codes": {"inconsistent_code", "foreign_code", "spelling_variant", "placeholder"},
    "placeholder": {"placeholder", "missing_code", "untrustworthy_column"},
}
PROBLEM_KINDS = {k for ks in COMPATIBLE.values() for k in ks} | {
    "duplicate_row", "duplicate_key", "empty_row", "out_of_scope_row"}
SPECIAL_KINDS = {"trap", "benign"}


# ---------------------------------------------------------------------------------------------
# values


def as_number(v):
    try:
        x = float(str(v).strip())
    except (TypeError, ValueError):
        return None
    return x if x == x else None  # NaN is not a number here


def same_value(a, b) -> bool:
    """Two cell values are the same when equal as strings, or equal as numbers."""
    if str(a) == str(b):
        return True
    x, y = as_number(a), as_number(b)
    return x is not None and y is not None and x == y


def in_ranges(v, ranges) -> bool:
    x = as_number(v)
    return x is not None and any(lo <= x <= hi for lo, hi in ranges)


def unwrap_detail(detail):
    """(variant, body) of a finding's detail: {"outliers": {...}} -> ("outliers", {...})."""
    if isinstance(detail, dict) and len(detail) == 1:
        (k, v), = detail.items()
        if isinstance(v, dict):
            return k, v
    return None, detail if isinstance(detail, dict) else {}


def flagged(finding):
    """What a finding points at: (values, rows, members, other_column).

    values: the cell values it calls suspect; rows: 1-based positions it names; members: for
    near-duplicate groups, every spelling in the group (canonical included)."""
    variant, d = unwrap_detail(finding.get("detail"))
    values, rows, members, other = [], [], [], None
    if variant == "suspected_missing" or "values" in d and finding["kind"] == "suspected_missing_code":
        values = [v["value"] for v in d.get("values", [])]
    elif variant == "write_ins":
        for v in d.get("values", []):
            values.append(v["value"])
            rows.extend(v.get("rows", []))
    elif variant == "near_duplicates":
        members = [m["value"] for m in d.get("members", [])]
        values = [m for m in members if m != d.get("canonical")] or members
    elif variant == "outliers":
        values = [v["value"] for v in d.get("values", [])] + [v["value"] for v in d.get("modified_z", [])]
    elif variant == "magnitudes":
        for m in d.get("values", []):
            values.extend(m.get("written", []) or [m["error"].get("value")])
    elif variant == "magnitude":
        values = list(d.get("written", []))
        if not values and "error" in d:
            values = [d["error"].get("value")]
    elif variant == "dominant":
        values = [d.get("value")]
    elif variant == "contradiction":
        rows = list(d.get("rows", []))
        other = d.get("other")
    elif variant == "dependency":
        rows = list(d.get("rows", []))
        values = list(d.get("found", [])) + [d.get("expected")]
        other = d.get("determinant")
    elif variant == "respellings":
        values = [v["from"] for v in d.get("values", [])]
    elif variant == "placeholders":
        values = [v["value"] for v in d.get("values", [])]
    elif variant == "rows":
        rows = list(d.get("rows", [])) + list(d.get("originals", []))
    return values, [int(r) for r in rows], members, other


# ---------------------------------------------------------------------------------------------
# corpus


class Table:
    def __init__(self, folder: Path):
        self.folder = folder
        self.name = folder.name
        meta = tomllib.loads((folder / "labels.toml").read_text(encoding="utf-8"))
        self.meta = meta
        self.key = meta.get("key", [])
        self.labels = meta.get("label", [])
        with open(folder / "data.csv", newline="", encoding="utf-8-sig") as f:
            rd = csv.reader(f)
            self.header = next(rd)
            self.rows = [r for r in rd]
        ki = [self.header.index(k) for k in self.key]
        self.pos_of = {}
        for i, r in enumerate(self.rows, start=1):
            name = ",".join(r[j] for j in ki) if ki else str(i)
            self.pos_of[name] = i
        for lab in self.labels:
            kind = lab.get("kind")
            if kind not in PROBLEM_KINDS | SPECIAL_KINDS:
                raise SystemExit(f"{folder}/labels.toml: label {lab.get('id')}: unknown kind {kind!r}")
            lab["_rows"] = set()
            for r in lab.get("rows", []):
                p = self.pos_of.get(str(r))
                if p is None:
                    raise SystemExit(f"{folder}/labels.toml: label {lab['id']}: row {r!r} not in data.csv")
                lab["_rows"].add(p)

    def problems(self):
        return [l for l in self.labels if l["kind"] not in SPECIAL_KINDS]

    def traps(self):
        return [l for l in self.labels if l["kind"] == "trap"]


def label_columns(lab, finding_col, other):
    cols = lab.get("columns", [])
    if not cols and not finding_col:
        return True  # a whole-row label and a whole-row finding
    return finding_col in cols or (other is not None and other in cols)


def matches_problem(lab, finding) -> bool:
    kind = finding["kind"]
    if lab["kind"] not in COMPATIBLE.get(kind, set()):
        return False
    values, rows, members, other = flagged(finding)
    if not label_columns(lab, finding["column"], other):
        return False
    has_spec = bool(lab.get("values") or lab.get("numeric_ranges") or lab["_rows"])
    if not has_spec or not (values or rows or members):
        return True
    pool = values + members
    if any(same_value(v, lv) for v in pool for lv in lab.get("values", [])):
        return True
    if lab.get("numeric_ranges") and any(in_ranges(v, lab["numeric_ranges"]) for v in pool):
        return True
    return bool(lab["_rows"] and set(rows) & lab["_rows"])


def matches_special(lab, finding) -> bool:
    """Traps and benign labels: same column, finding kind allowed, and the finding points at a
    listed value, a value in a listed range, a listed row, or two or more 'distinct' values."""
    kinds = lab.get("finding_kinds")
    if kinds and finding["kind"] not in kinds:
        return False
    values, rows, members, other = flagged(finding)
    if not label_columns(lab, finding["column"], other):
        return False
    has_spec = bool(lab.get("values") or lab.get("numeric_ranges") or lab["_rows"] or lab.get("distinct"))
    if not has_spec:
        return True
    if lab.get("distinct"):
        group = members or []
        if sum(1 for m in set(group) if m in set(lab["distinct"])) >= 2:
            return True
    pool = values + ([] if lab.get("distinct") else members)
    if any(same_value(v, lv) for v in pool for lv in lab.get("values", [])):
        return True
    if lab.get("numeric_ranges") and any(in_ranges(v, lab["numeric_ranges"]) for v in pool):
        return True
    return bool(lab["_rows"] and set(rows) & lab["_rows"])


# ---------------------------------------------------------------------------------------------
# fixes


def commands_of(sug):
    """The fix commands the CLI prints for a suggestion: one per recode source, one otherwise."""
    if not sug:
        return []
    a = sug.get("action")
    if a == "recode":
        return [{"action": "recode", "column": sug["column"], "from": [f], "to": sug["to"]} for f in sug["from"]]
    if a == "recode_each":
        return [{"action": "recode", "column": sug["column"], "from": [f], "to": t} for f, t in sug["pairs"]]
    if a == "missing":
        return [{"action": "missing", "column": sug["column"], "codes": list(sug["codes"])}]
    if a == "distrust":
        return [{"action": "distrust", "column": sug["column"]}]
    return [dict(sug)]


def touches_trap(cmd, traps) -> str | None:
    col = cmd["column"]
    vals = cmd.get("from", []) + cmd.get("codes", [])
    for t in traps:
        if col not in t.get("columns", []):
            continue
        if any(same_value(v, tv) for v in vals for tv in t.get("values", [])):
            return t["id"]
        if t.get("numeric_ranges") and any(in_ranges(v, t["numeric_ranges"]) for v in vals):
            return t["id"]
        if cmd["action"] == "recode" and t.get("distinct"):
            ds = set(t["distinct"])
            if cmd["from"][0] in ds and cmd["to"] in ds:
                return t["id"]
    return None


def command_right(cmd, table: Table):
    """(right, label id or trap id, reason)."""
    trap = touches_trap(cmd, table.traps())
    if trap:
        return False, trap, "touches a trap"
    col = cmd["column"]
    for lab in table.labels:
        if lab["kind"] == "trap" or col not in lab.get("columns", []):
            continue
        for fx in lab.get("fix", []):
            if fx.get("action") != cmd["action"]:
                continue
            if cmd["action"] == "recode":
                if cmd["from"][0] in fx.get("from", []) and cmd["to"] in fx.get("to", []) and cmd["from"][0] != cmd["to"]:
                    return True, lab["id"], "matches the label's fix"
            elif cmd["action"] == "missing":
                if set(cmd["codes"]) <= set(fx.get("codes", [])):
                    return True, lab["id"], "matches the label's fix"
            elif cmd["action"] == "distrust":
                return True, lab["id"], "matches the label's fix"
    return False, None, "no label offers this fix"


def licensed(col, pos, old, new, table: Table) -> str | None:
    """The id of a problem label that allows changing this cell from old to new, if any."""
    for lab in table.problems():
        if col not in lab.get("columns", []):
            continue
        for fx in lab.get("fix", []):
            a = fx.get("action")
            if a == "recode" and old in fx.get("from", []) and new in fx.get("to", []):
                if not lab["_rows"] or pos in lab["_rows"]:
                    return lab["id"]
            elif a == "missing" and new == "" and any(same_value(old, c) for c in fx.get("codes", [])):
                if not lab["_rows"] or pos in lab["_rows"]:
                    return lab["id"]
            elif a == "set":
                rows = {table.pos_of[str(r)] for r in fx.get("rows", [])} or lab["_rows"]
                if pos in rows and ("to" not in fx or new in fx["to"]):
                    return lab["id"]
    return None


# ---------------------------------------------------------------------------------------------
# running emend


class Emend:
    def __init__(self, binary: str, work: Path):
        self.binary = binary
        self.work = work
        self.env = dict(os.environ, EMEND_HOME=str(work / "home"), EMEND_NOW=NOW, NO_COLOR="1")

    def run(self, *args, check=True):
        p = subprocess.run([self.binary, *args], cwd=self.work / "store", env=self.env,
                           capture_output=True, text=True)
        if check and p.returncode != 0:
            raise RuntimeError(f"emend {' '.join(args)} exited {p.returncode}: {p.stderr.strip()[:500]}")
        return p


def read_csv(path: Path):
    with open(path, newline="", encoding="utf-8-sig") as f:
        rd = csv.reader(f)
        header = next(rd)
        return header, [r for r in rd]


def score_table(table: Table, binary: str, keep: bool) -> dict:
    work = Path(tempfile.mkdtemp(prefix=f"emend-findings-{table.name}-"))
    (work / "store").mkdir()
    em = Emend(binary, work)
    shutil.copy(table.folder / "data.csv", work / "store" / "data.csv")
    em.run("init")
    em.run("id", "new", "--name", "Findings Bench", "--email", "bench@example.org")
    ingest = ["ingest", "data.csv", "--table", "t", "-m", f"{table.name} extract"]
    if table.key:
        ingest += ["--key", ",".join(table.key)]
    em.run(*ingest)
    prof = json.loads(em.run("profile", "t", "--json").stdout)
    findings = prof["profile"]["findings"]

    # --- match findings to labels
    problems, traps = table.problems(), table.traps()
    benign = [l for l in table.labels if l["kind"] == "benign"]
    rows_out = []
    matched = set()
    for i, f in enumerate(findings):
        hit = [l["id"] for l in problems if matches_problem(l, f)]
        trap = [l["id"] for l in traps if matches_special(l, f)]
        ben = [l["id"] for l in benign if matches_special(l, f)]
        matched.update(hit)
        if trap:
            verdict = "trap" if not hit else "mixed"
        elif hit:
            verdict = "hit"
        elif ben:
            verdict = "benign"
        else:
            verdict = "unlabelled"
        values, rows, members, other = flagged(f)
        rows_out.append({"n": i + 1, "column": f["column"], "kind": f["kind"], "severity": f["severity"],
                         "message": f["message"], "verdict": verdict, "labels": hit, "traps": trap,
                         "benign": ben, "suggestion": f.get("suggestion")})

    # --- fix commands: right or wrong by the labels, then applied
    cmds = []
    for fr, f in zip(rows_out, findings):
        for c in commands_of(f.get("suggestion")):
            right, lab, why = command_right(c, table)
            cmds.append({"finding": fr["n"], **c, "right": right, "label": lab, "reason": why,
                         "error": None, "cells_changed": 0, "cells_wrong": 0})
    for j, c in enumerate(cmds):
        why = f"bench finding {c['finding']} command {j + 1}"
        if c["action"] == "recode":
            args = ["recode", "t", c["column"], f"--from={c['from'][0]}", f"--to={c['to']}", "--why", why]
        elif c["action"] == "missing":
            args = ["missing", "t", c["column"], *[f"--code={x}" for x in c["codes"]], "--why", why]
        elif c["action"] == "distrust":
            args = ["distrust", "t", c["column"], "--why", why]
        else:
            c["error"] = f"unknown action {c['action']}"
            continue
        p = em.run(*args, check=False)
        if p.returncode != 0:
            c["error"] = p.stderr.strip().splitlines()[0] if p.stderr.strip() else f"exit {p.returncode}"
    applied = [c for c in cmds if not c["error"]]
    wrong_by_col: dict[str, int] = {}
    changed_total = wrong_total = 0
    unattributed = 0
    commit_error = None
    if applied:
        p = em.run("commit", "-m", "every offered fix", check=False)
        if p.returncode != 0:
            commit_error = p.stderr.strip()[:300]
    if applied and not commit_error:
        em.run("export", "t", "--at", "raw", "--with-distrusted", "--with-excluded", "-o", str(work / "raw.csv"))
        em.run("export", "t", "--with-distrusted", "--with-excluded", "-o", str(work / "clean.csv"))
        h0, raw = read_csv(work / "raw.csv")
        h1, clean = read_csv(work / "clean.csv")
        if h0 != h1 or len(raw) != len(clean):
            commit_error = "raw and cleaned exports differ in shape"
        else:
            for pos, (r0, r1) in enumerate(zip(raw, clean), start=1):
                for ci, (a, b) in enumerate(zip(r0, r1)):
                    if a == b:
                        continue
                    col = h0[ci]
                    changed_total += 1
                    owner = next((c for c in applied if c["column"] == col and (
                        (c["action"] == "recode" and c["from"][0] == a) or
                        (c["action"] == "missing" and a in c["codes"]))), None)
                    ok = licensed(col, pos, a, b, table)
                    if owner is None:
                        unattributed += 1
                    else:
                        owner["cells_changed"] += 1
                    if not ok:
                        wrong_total += 1
                        wrong_by_col[col] = wrong_by_col.get(col, 0) + 1
                        if owner is not None:
                            owner["cells_wrong"] += 1
    n = len(table.rows)
    max_share = max((w / n for w in wrong_by_col.values()), default=0.0)
    worst_col = max(wrong_by_col, key=wrong_by_col.get) if wrong_by_col else None

    n_f = len(findings)
    n_benign = sum(1 for r in rows_out if r["verdict"] == "benign")
    n_hit = sum(1 for r in rows_out if r["verdict"] == "hit")
    n_mixed = sum(1 for r in rows_out if r["verdict"] == "mixed")
    n_trap = sum(1 for r in rows_out if r["verdict"] == "trap")
    scored = n_f - n_benign
    traps_hit = sorted({t for r in rows_out for t in r["traps"]})
    certain = [l for l in problems if l.get("certain")]
    res = {
        "table": table.name, "rows": n, "work": str(work) if keep else None,
        "labels": len(problems), "certain_labels": len(certain), "traps": len(traps), "benign_labels": len(benign),
        "findings": n_f, "hits": n_hit, "mixed": n_mixed, "trap_findings": n_trap,
        "unlabelled": sum(1 for r in rows_out if r["verdict"] == "unlabelled"), "benign": n_benign,
        "recall": len(matched) / len(problems) if problems else None,
        "recall_certain": (sum(1 for l in certain if l["id"] in matched) / len(certain)) if certain else None,
        "precision": (n_hit / scored) if scored else None,
        "labels_found": sorted(matched), "labels_missed": sorted(l["id"] for l in problems if l["id"] not in matched),
        "traps_hit": traps_hit,
        "commands": len(cmds), "commands_right": sum(1 for c in cmds if c["right"]),
        "commands_failed": sum(1 for c in cmds if c["error"]), "commit_error": commit_error,
        "cells_changed": changed_total, "cells_wrong": wrong_total, "cells_unattributed": unattributed,
        "max_wrong_column_share": max_share, "worst_column": worst_col,
        "finding_rows": rows_out, "command_rows": cmds,
    }
    if not keep:
        shutil.rmtree(work, ignore_errors=True)
    return res


# ---------------------------------------------------------------------------------------------
# report


def pct(x):
    return "–" if x is None else f"{100 * x:.0f}%"


def fail(n):
    return f" ({n} failed)" if n else ""


def markdown(results) -> str:
    out = ["| table | rows | labels (certain) | traps | findings | hits | mixed | on traps | unlabelled | benign | recall | recall, certain | precision | fix commands right | cells changed | cells changed wrongly | max wrong share of a column |",
           "|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|"]
    tot = {k: 0 for k in ["rows", "labels", "certain_labels", "traps", "findings", "hits", "mixed", "trap_findings",
                          "unlabelled", "benign", "commands", "commands_right", "commands_failed", "cells_changed",
                          "cells_wrong"]}
    found = found_c = 0
    worst = 0.0
    for r in results:
        for k in tot:
            tot[k] += r[k]
        found += len(r["labels_found"])
        found_c += round((r["recall_certain"] or 0) * r["certain_labels"])
        worst = max(worst, r["max_wrong_column_share"])
        wc = f" ({r['worst_column']})" if r["worst_column"] else ""
        out.append(f"| {r['table']} | {r['rows']} | {r['labels']} ({r['certain_labels']}) | {r['traps']} | {r['findings']} | "
                   f"{r['hits']} | {r['mixed']} | {r['trap_findings']} | {r['unlabelled']} | {r['benign']} | "
                   f"{pct(r['recall'])} | {pct(r['recall_certain'])} | {pct(r['precision'])} | "
                   f"{r['commands_right']}/{r['commands']}{fail(r['commands_failed'])} | {r['cells_changed']} | {r['cells_wrong']} | "
                   f"{pct(r['max_wrong_column_share'])}{wc} |")
    scored = tot["findings"] - tot["benign"]
    out.append(f"| **all** | {tot['rows']} | {tot['labels']} ({tot['certain_labels']}) | {tot['traps']} | {tot['findings']} | "
               f"{tot['hits']} | {tot['mixed']} | {tot['trap_findings']} | {tot['unlabelled']} | {tot['benign']} | "
               f"{pct(found / tot['labels'] if tot['labels'] else None)} | "
               f"{pct(found_c / tot['certain_labels'] if tot['certain_labels'] else None)} | "
               f"{pct(tot['hits'] / scored if scored else None)} | {tot['commands_right']}/{tot['commands']}{fail(tot['commands_failed'])} | "
               f"{tot['cells_changed']} | {tot['cells_wrong']} | {pct(worst)} |")
    return "\n".join(out)


def details(r) -> str:
    lines = [f"### {r['table']}", ""]
    for f in r["finding_rows"]:
        tag = {"hit": "HIT", "mixed": "MIXED", "trap": "TRAP", "benign": "benign", "unlabelled": "false alarm"}[f["verdict"]]
        ids = ", ".join(f["labels"] + f["traps"] + f["benign"])
        lines.append(f"- {tag:11} {f['severity']:6} {f['column']}: {f['message']}" + (f"  [{ids}]" if ids else ""))
    for c in r["command_rows"]:
        what = {"recode": lambda c: f"recode {c['column']} {c['from'][0]!r} -> {c['to']!r}",
                "missing": lambda c: f"missing {c['column']} {c['codes']}",
                "distrust": lambda c: f"distrust {c['column']}"}.get(c["action"], lambda c: str(c))(c)
        state = "right" if c["right"] else "WRONG"
        extra = f" error: {c['error']}" if c["error"] else f" {c['cells_changed']} cells, {c['cells_wrong']} wrongly"
        lines.append(f"  - fix {state:5} {what} ({c['reason']}{', ' + c['label'] if c['label'] else ''});{extra}")
    if r["labels_missed"]:
        lines.append(f"- missed labels: {', '.join(r['labels_missed'])}")
    if r["commit_error"]:
        lines.append(f"- commit/export problem: {r['commit_error']}")
    lines.append("")
    return "\n".join(lines)


def find_binary(given: str | None) -> str:
    for cand in ([given] if given else []) + [str(REPO / "target/release/emend"), str(REPO / "target/debug/emend")]:
        if cand and (shutil.which(cand) or Path(cand).is_file()):
            return str(Path(cand).resolve()) if Path(cand).is_file() else shutil.which(cand)
    raise SystemExit("no emend binary: pass --emend PATH (e.g. target/release/emend)")


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--emend", help="the emend binary (default target/release/emend, then target/debug/emend)")
    ap.add_argument("--table", action="append", help="run only this table (repeatable)")
    ap.add_argument("--json", action="store_true", help="print one JSON document instead of markdown")
    ap.add_argument("--details", action="store_true", help="with markdown: list every finding and fix verdict")
    ap.add_argument("--keep", action="store_true", help="keep the scratch stores")
    ap.add_argument("--corpus", default=str(CORPUS),
                    help="folder of labelled tables (default bench/findings/corpus; bench/findings/demo scores the bundled demo)")
    a = ap.parse_args()
    binary = find_binary(a.emend)
    folders = sorted(p for p in Path(a.corpus).iterdir() if (p / "labels.toml").is_file())
    if a.table:
        unknown = set(a.table) - {p.name for p in folders}
        if unknown:
            raise SystemExit(f"no such table: {', '.join(sorted(unknown))} (have: {', '.join(p.name for p in folders)})")
        folders = [p for p in folders if p.name in a.table]
    results = []
    for folder in folders:
        print(f"scoring {folder.name} ...", file=sys.stderr)
        results.append(score_table(Table(folder), binary, a.keep))
    if a.json:
        json.dump({"emend": binary, "tables": results}, sys.stdout, indent=1)
        print()
        return
    print(markdown(results))
    if a.details:
        print()
        for r in results:
            print(details(r))


if __name__ == "__main__":
    main()
