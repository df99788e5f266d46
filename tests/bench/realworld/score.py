"""Score figproof's JSON reports on the real-world benchmark against the hand labels in ``labels.toml``.

    python tests/bench/realworld/score.py RUN_DIR [OTHER_RUN_DIR] [--unjudged] [--missed]

A run folder holds one ``MEMBER.json`` per member (what ``render.py`` writes). With two folders the totals are
compared side by side. The measures (see README.md here for the labelling conventions):

- findings per drawn figure: every finding not accepted, over the figures the scripts drew;
- clean scripts with findings: of the scripts whose every labelled figure is clean, the share with any finding;
- precision: findings judged ``wanted`` over all judged findings (``wanted``, ``repeat``, ``false-alarm``);
  a finding is judged by an explicit ``judged`` entry, else by a labelled problem it matches (the first
  finding of a problem is wanted, later ones repeat it), else as a false alarm when its figure is labelled
  clean; anything else is unjudged and listed with ``--unjudged``, ready to label;
- recall: labelled problems that some finding matches (same script, figure, rule, axes when given).
"""

from __future__ import annotations

import argparse
import fnmatch
import json
import sys
import tomllib
from collections import defaultdict
from dataclasses import dataclass, field
from pathlib import Path

HERE = Path(__file__).resolve().parent
LABELS = HERE / "labels.toml"
VERDICTS = ("wanted", "repeat", "false-alarm")
# rules about running the scripts rather than about a drawn figure
RENAMED = {"errorbars-sem": "errorbars-ambiguous"}  # old rule ids, as older reports name them
MECHANICAL = ("script-fails", "input-missing", "input-outside-repo", "figure-orphan")


@dataclass(slots=True)
class Finding:
    member: str
    script: str
    figure: int  # the N of "<script>#<N>", 0 for findings about the script
    rule: str
    axes: int | None
    message: str
    line: int | None
    verdict: str | None = None
    source: str = ""  # judged | problem | clean | ""
    # every (script, figure, axes) the finding stands for: its instances (schema 2 reports group the
    # occurrences of one cause into one finding), or the finding itself
    places: tuple[tuple[str, int, int | None], ...] = ()

    def describe(self) -> str:
        where = f"figure {self.figure}" if self.figure else "script"
        axes = f" axes {self.axes}" if self.axes is not None else ""
        return f"{self.member} {self.script} {where}{axes} [{self.rule}] {self.message[:160]}"


@dataclass(slots=True)
class Tally:
    scripts: int = 0
    figures: int = 0
    findings: int = 0
    clean_scripts: int = 0
    clean_with_findings: int = 0
    verdicts: dict[str, int] = field(default_factory=lambda: dict.fromkeys(VERDICTS, 0))
    verdicts_figure_rules: dict[str, int] = field(default_factory=lambda: dict.fromkeys(VERDICTS, 0))
    unjudged: int = 0
    problems: int = 0
    found: int = 0
    labelled_figures: int = 0

    def add(self, other: Tally) -> None:
        for name in ("scripts", "figures", "findings", "clean_scripts", "clean_with_findings", "unjudged",
                     "problems", "found", "labelled_figures"):
            setattr(self, name, getattr(self, name) + getattr(other, name))
        for v in VERDICTS:
            self.verdicts[v] += other.verdicts[v]
            self.verdicts_figure_rules[v] += other.verdicts_figure_rules[v]


def figure_number(figure_id: str | None) -> int:
    if not figure_id:
        return 0
    return int(figure_id.rpartition("#")[2])


Labels = dict[tuple[str, str, int], dict]


def load_labels(path: Path = LABELS) -> Labels:
    """Figure labels keyed by (member, script, figure number); figure 0 holds script-level labels.

    ``[[run]]`` entries (findings about files rather than scripts, such as committed figures no script
    writes) are kept under the key (member, "", -1) as a list in ``"run"``.
    """
    with open(path, "rb") as fh:
        data = tomllib.load(fh)
    labels: Labels = {}
    for entry in data.get("run", []):
        if entry.get("verdict") not in VERDICTS:
            raise SystemExit(f"{path}: run label {entry}: verdict must be one of {VERDICTS}")
        labels.setdefault((entry["member"], "", -1), {"run": []})["run"].append(entry)
    for entry in data.get("figure", []):
        key = (entry["member"], entry["script"], int(entry.get("figure", 0)))
        if key in labels:
            raise SystemExit(f"{path}: figure {key} is labelled twice")
        for item in entry.get("judged", []):
            if item.get("verdict") not in VERDICTS or item.get("rest", item["verdict"]) not in VERDICTS:
                raise SystemExit(f"{path}: {key}: verdict must be one of {VERDICTS} (got {item})")
        labels[key] = entry
    return labels


def _matches(item: dict, f: Finding) -> bool:
    if item["rule"] != f.rule:
        return False
    if "axes" in item and item["axes"] != f.axes:
        return False
    about = item.get("about")
    return not about or about.lower() in f.message.lower()


def judge(findings: list[Finding], labels: Labels) -> None:
    """Give each finding its verdict (in place), in report order."""
    used: dict[int, int] = defaultdict(int)  # id(label item) -> findings it has judged
    for f in findings:
        label = labels.get((f.member, f.script, f.figure))
        if label is None:
            for entry in labels.get((f.member, "", -1), {}).get("run", []):
                if entry["rule"] == f.rule and fnmatch.fnmatch(f.script, entry["path"]):
                    f.verdict, f.source = entry["verdict"], "judged"
                    break
            continue
        for item in label.get("judged", []):
            if _matches(item, f):
                first = used[id(item)] == 0
                rest = item.get("rest", "repeat" if item["verdict"] == "wanted" else item["verdict"])
                f.verdict, f.source = (item["verdict"] if first else rest), "judged"
                used[id(item)] += 1
                break
        else:
            for item in label.get("problems", []):
                if _matches(item, f):
                    f.verdict = "wanted" if used[id(item)] == 0 else "repeat"
                    f.source = "problem"
                    used[id(item)] += 1
                    break
            else:
                if label.get("clean"):
                    f.verdict, f.source = "false-alarm", "clean"


def read_run(folder: Path) -> dict[str, dict]:
    """The JSON reports of one run, by member name (file stem)."""
    reports = {p.stem: json.loads(p.read_text(encoding="utf-8")) for p in sorted(folder.glob("*.json"))}
    if not reports:
        raise SystemExit(f"{folder}: no MEMBER.json reports here (run render.py first)")
    return reports


def _places(f: dict) -> tuple[tuple[str, int, int | None], ...]:
    own = (f["path"], figure_number(f.get("figure")), f.get("axes"))
    more = [(i.get("path", f["path"]), figure_number(i.get("figure", f.get("figure"))), i.get("axes"))
            for i in f.get("instances", [])]
    return tuple(dict.fromkeys([own, *more]))


def findings_of(member: str, report: dict) -> list[Finding]:
    return [Finding(member=member, script=f["path"], figure=figure_number(f.get("figure")),
                    rule=RENAMED.get(f["rule"], f["rule"]),
                    axes=f.get("axes"), message=f.get("message", ""), line=f.get("line"), places=_places(f))
            for f in report["findings"] if f.get("accepted") is None]


def _found(item: dict, script: str, number: int, findings: list[Finding]) -> bool:
    """Whether some finding (or one of its instances) is the labelled problem ``item``."""
    for f in findings:
        if f.rule != item["rule"]:
            continue
        about = item.get("about")
        if about and about.lower() not in f.message.lower():
            continue
        for p_script, p_figure, p_axes in f.places:
            if p_script == script and p_figure == number and ("axes" not in item or item["axes"] == p_axes):
                return True
    return False


def score_member(member: str, report: dict, labels: Labels,
                 missed: list[str]) -> tuple[Tally, list[Finding]]:
    t = Tally()
    findings = findings_of(member, report)
    judge(findings, labels)
    t.scripts = len(report["scripts"])
    t.figures = sum(len(s.get("figures", [])) for s in report["scripts"])
    t.findings = len(findings)
    by_script: dict[str, list[Finding]] = defaultdict(list)
    for f in findings:
        by_script[f.script].append(f)
        if f.verdict is None:
            t.unjudged += 1
        else:
            t.verdicts[f.verdict] += 1
            if f.rule not in MECHANICAL:
                t.verdicts_figure_rules[f.verdict] += 1
    for s in report["scripts"]:
        drawn = [figure_number(fig["id"]) for fig in s.get("figures", [])]
        mine = {k[2]: v for k, v in labels.items() if k[0] == member and k[1] == s["path"] and k[2] >= 0}
        t.labelled_figures += sum(1 for n in drawn if n in mine)
        clean = bool(mine) and all(n in mine for n in drawn) and all(
            v.get("clean") and not v.get("problems") for v in mine.values())
        if clean:
            t.clean_scripts += 1
            t.clean_with_findings += bool(by_script.get(s["path"]))
    for (m, script, number), label in sorted(labels.items()):
        if m != member or number < 0:
            continue
        for item in label.get("problems", []):
            t.problems += 1
            if _found(item, script, number, findings):
                t.found += 1
            else:
                missed.append(f"{member} {script} figure {number} [{item['rule']}] {item.get('reason', '')}")
    return t, findings


def _ratio(a: int, b: int) -> str:
    return f"{a / b:.2f}" if b else "-"


def row(name: str, t: Tally) -> list[str]:
    judged = sum(t.verdicts.values())
    judged_fig = sum(t.verdicts_figure_rules.values())
    return [name, str(t.scripts), str(t.figures), str(t.findings), _ratio(t.findings, t.figures),
            f"{t.clean_with_findings}/{t.clean_scripts}", _ratio(t.clean_with_findings, t.clean_scripts),
            f"{t.verdicts['wanted']}/{t.verdicts['repeat']}/{t.verdicts['false-alarm']}",
            _ratio(t.verdicts["wanted"], judged), _ratio(t.verdicts_figure_rules["wanted"], judged_fig),
            str(t.unjudged), f"{t.found}/{t.problems}"]


HEADER = ["member", "scripts", "figures", "findings", "per fig", "clean w/ f.", "share", "want/rep/FA",
          "precision", "prec. fig", "unjudged", "recall"]


def table(rows: list[list[str]]) -> str:
    widths = [max(len(r[i]) for r in [HEADER, *rows]) for i in range(len(HEADER))]
    lines = [" | ".join(c.ljust(w) for c, w in zip(HEADER, widths, strict=True)),
             "-|-".join("-" * w for w in widths)]
    lines += [" | ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)) for r in rows]
    return "\n".join(lines)


def score_run(folder: Path, labels: Labels) -> tuple[dict[str, Tally], Tally,
                                                                                list[Finding], list[str]]:
    per: dict[str, Tally] = {}
    total = Tally()
    everything: list[Finding] = []
    missed: list[str] = []
    for member, report in read_run(folder).items():
        t, findings = score_member(member, report, labels, missed)
        per[member] = t
        total.add(t)
        everything += findings
    return per, total, everything, missed


def toml_stub(f: Finding) -> str:
    axes = f", axes = {f.axes}" if f.axes is not None else ""
    return (f'# {f.message[:150]}\n'
            f'{{ rule = "{f.rule}"{axes}, verdict = "?", note = "" }},  '
            f'# {f.member} {f.script} figure {f.figure}')


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("runs", type=Path, nargs="+", help="one run folder, or two to compare")
    parser.add_argument("--labels", type=Path, default=LABELS)
    parser.add_argument("--unjudged", action="store_true", help="list the findings no label judges")
    parser.add_argument("--missed", action="store_true", help="list the labelled problems no finding matches")
    parser.add_argument("--false-alarms", action="store_true", help="list the findings judged false alarms")
    args = parser.parse_args(argv)
    if len(args.runs) > 2:
        parser.error("give one run folder, or two to compare")
    labels = load_labels(args.labels)
    totals = []
    for folder in args.runs:
        per, total, findings, missed = score_run(folder, labels)
        print(f"## {folder}")
        print(table([row(m, t) for m, t in per.items()] + [row("TOTAL", total)]))
        print(f"labelled figures: {total.labelled_figures} of {total.figures}; precision counts every judged "
              f"finding, 'prec. fig' leaves out {', '.join(MECHANICAL)}\n")
        totals.append((folder, total))
        if args.unjudged:
            print("### unjudged findings (one line per member, script, figure, rule and axes)")
            seen: dict[tuple[str, str, int, str, int | None], int] = defaultdict(int)
            first: dict[tuple[str, str, int, str, int | None], Finding] = {}
            for f in findings:
                if f.verdict is None:
                    key = (f.member, f.script, f.figure, f.rule, f.axes)
                    seen[key] += 1
                    first.setdefault(key, f)
            for key, f in first.items():
                print(toml_stub(f) + (f" ({seen[key]} findings)" if seen[key] > 1 else ""))
            print()
        if args.false_alarms:
            print("### false alarms")
            for f in findings:
                if f.verdict == "false-alarm":
                    print(f"({f.source}) {f.describe()}")
            print()
        if args.missed:
            print("### missed problems")
            print("\n".join(missed) or "(none)")
            print()
    if len(totals) == 2:
        print("## comparison (totals)")
        print(table([row(str(folder), t) for folder, t in totals]))
    return 0


if __name__ == "__main__":
    sys.exit(main())
