"""Fix sentences that hold when followed.

For a finding the advice can move, the fix is the advice's own changes that move that rule (each change knows
which rules it improves on its own, engine.advice), narrowed to the changes at the finding's place. Those
changes are applied to the plan and the rules they touch are run again (engine.ruleset.DESIGN_RULES); when the
result moves another rule and leaves it worse than the advised plan has it (say, terminators that drain a weak
bias, or a weaker bias the old terminators drain), the change that repairs it is added and the check repeats.
The sentence names every change kept, so a fix that needs a second change says so. The simulated signal rules
keep their re-simulated fixes; where one of those fixes changes the terminators and the re-check shows the bias
must change with them, the sentence says that too. A rule the advised plan still breaks gets the advice's plain
statement of why and what can.
"""

import dataclasses
from collections.abc import Sequence

from pairline.engine.advice import Advice, badness_by_rule
from pairline.engine.design import COVERED_RULES, PlanChange, apply_changes, with_plan
from pairline.engine.findings import Finding, Verdict
from pairline.engine.ruleset import SIGNAL_RULE_IDS, RuleRun, run_design_rules


def _badness(findings: Sequence[Finding], like: Finding) -> int:
    """How badly the rule of a finding fares (sum of verdict ranks), at the finding's node when it has one."""
    return sum(f.verdict.rank for f in findings if f.rule_id == like.rule_id and f.node == like.node)


def sentence(changes: Sequence[PlanChange]) -> str:
    """Changes as one instruction: "Fit 120 Ω terminators at ... and ... and change the bias resistors ...".
    The same change made at several places reads as one step naming the places."""
    groups: dict[str, list[str]] = {}
    for c in changes:
        template = c.text.replace(c.where, "{where}") if c.part == "terminator" else c.text
        groups.setdefault(template, []).append(c.where)
    steps = []
    for template, places in groups.items():
        where = " and ".join(places)
        if len(places) > 1 and template.startswith("fit a ") and template.endswith(" terminator at {where}"):
            template = "fit " + template[len("fit a ") : -len(" terminator at {where}")] + " terminators at {where}"
        steps.append(template.replace("{where}", where))
    text = " and ".join(steps)
    return text[:1].upper() + text[1:] + "."


def _by_rule(findings: Sequence[Finding]) -> dict[str, tuple[tuple[object, ...], ...]]:
    """Each rule's findings by what they say (node, title, verdict, value), fix texts aside."""
    out: dict[str, list[tuple[object, ...]]] = {}
    for f in findings:
        out.setdefault(f.rule_id, []).append((f.node, f.title, f.verdict, f.value))
    return {r: tuple(v) for r, v in out.items()}


class _Checker:
    """Applies subsets of the advice's changes to the plan and re-runs the design rules, once per subset."""

    def __init__(self, run: RuleRun, advice: Advice) -> None:
        self.run = run
        self.changes = advice.changes
        self.cache: dict[frozenset[int], tuple[Finding, ...]] = {}
        self.original = _by_rule(self.state(frozenset()) if advice.changes else ())
        self.advised = badness_by_rule(self.state(frozenset(range(len(self.changes))))) if advice.changes else {}

    def state(self, chosen: frozenset[int]) -> tuple[Finding, ...]:
        if chosen not in self.cache:
            plan = apply_changes(self.run.bus.plan, [self.changes[i] for i in sorted(chosen)])
            self.cache[chosen] = run_design_rules(with_plan(self.run.bus, plan))
        return self.cache[chosen]

    def regressions(self, chosen: frozenset[int]) -> set[str]:
        """Rules the chosen changes move and leave worse than the advised plan has them."""
        state = self.state(chosen)
        now = badness_by_rule(state)
        moved = _by_rule(state)
        return {r for r, b in now.items() if b > self.advised.get(r, 0) and moved[r] != self.original.get(r)}

    def closure(self, start: set[int]) -> frozenset[int]:
        """The start changes plus whatever the re-check shows they need."""
        chosen = frozenset(start)
        for _ in range(len(self.changes)):
            if not self.regressions(chosen):
                break
            rest = [i for i in range(len(self.changes)) if i not in chosen]
            if not rest:
                break
            best = min(rest, key=lambda i: (len(self.regressions(chosen | {i})), i))
            chosen = chosen | {best}
        return chosen


def _at_place(finding: Finding, changes: Sequence[PlanChange], picked: list[int]) -> list[int]:
    """Of the picked changes, those made where the finding is, when any are; else all picked."""
    here = [i for i in picked if changes[i].part == "terminator" and f"at {changes[i].where}" in finding.title]
    return here or picked


def _together(finding: Finding, checker: _Checker) -> set[int]:
    """When no change moves a rule on its own: the fewest changes, added greedily, that together do."""
    before = _badness(checker.run.findings, finding)
    chosen: frozenset[int] = frozenset()
    for _ in range(len(checker.changes)):
        rest = [i for i in range(len(checker.changes)) if i not in chosen]
        if not rest:
            break
        chosen = chosen | {min(rest, key=lambda i: (_badness(checker.state(chosen | {i}), finding), i))}
        if _badness(checker.state(chosen), finding) < before:
            return set(chosen)
    return set()


def _fix_for(finding: Finding, checker: _Checker, advice: Advice) -> str:
    changes = advice.changes
    picked = [i for i, c in enumerate(changes) if finding.rule_id in c.rule_ids]
    picked = _at_place(finding, changes, picked) if picked else sorted(_together(finding, checker))
    unmet = next((u for u in advice.unmet if u.rule_id == finding.rule_id), None)
    if picked:
        chosen = checker.closure(set(picked))
        before = _badness(checker.run.findings, finding)
        if _badness(checker.state(chosen), finding) < before:
            return sentence([changes[i] for i in sorted(chosen)])
    if unmet is not None and finding.verdict is Verdict.BREAKS:
        return unmet.text
    return finding.fix


def _signal_fix(finding: Finding, checker: _Checker, advice: Advice) -> str:
    """A simulated rule's fix, with the bias change its terminator change needs named beside it."""
    terminators = {i for i, c in enumerate(advice.changes) if c.part == "terminator"}
    if finding.title.startswith("Unterminated-line rule") and terminators:
        return sentence([advice.changes[i] for i in sorted(checker.closure(terminators))])
    if not terminators or "terminator" not in finding.fix:
        return finding.fix
    needed = checker.closure(terminators) - terminators
    if not needed:
        return finding.fix
    extra = " and ".join(advice.changes[i].text for i in sorted(needed))
    return f"{finding.fix} Changing the terminators also needs: {extra}."


def verified_findings(run: RuleRun, advice: Advice) -> tuple[Finding, ...]:
    """The plan's findings with the fix of every finding the advice can move replaced by a verified one."""
    checker = _Checker(run, advice)
    out = []
    for f in run.findings:
        if f.verdict is Verdict.HOLDS or f.rule_id not in COVERED_RULES:
            out.append(f)
        elif f.rule_id in SIGNAL_RULE_IDS:
            out.append(dataclasses.replace(f, fix=_signal_fix(f, checker, advice)))
        else:
            out.append(dataclasses.replace(f, fix=_fix_for(f, checker, advice)))
    return tuple(out)
