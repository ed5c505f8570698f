"""Rules and the registry that runs them in a fixed, visible order.

A rule is a small named unit: a stable id (``CP`` and three digits, the hundreds
giving its phase), a dotted name, the practice it encodes as the first line of
its docstring, and its source. Rules run phase by phase, and by id within a phase.
"""

from __future__ import annotations

import inspect
import re
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from enum import IntEnum
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from chargeplan.engine.context import Context

__all__ = ["RULES", "Phase", "Rule", "RuleSet", "rule"]


class Phase(IntEnum):
    """The order rules run in (DEVELOPERS.md, "Adding a rule"): derive → set → compensate → fit →
    exclude → interlock."""

    DERIVE = 1
    SET = 2
    COMPENSATE = 3
    FIT = 4
    EXCLUDE = 5
    INTERLOCK = 6


_ID = re.compile(r"^CP([1-6])\d\d$")
_NAME = re.compile(r"^[a-z]+(\.[a-z_]+)+$")


@dataclass(frozen=True, slots=True)
class Rule:
    id: str
    name: str
    phase: Phase
    statement: str  # the practice it encodes, one line
    detail: str  # what it does when it fires
    source: str
    apply: Callable[[Context], None]


class RuleSet:
    """A registry of rules; refuses duplicate ids and names."""

    def __init__(self) -> None:
        self._rules: dict[str, Rule] = {}

    def register(self, new: Rule) -> Rule:
        match = _ID.match(new.id)
        if not match:
            raise ValueError(f"rule id {new.id!r} must be CP and three digits")
        if int(match.group(1)) != int(new.phase):
            raise ValueError(f"rule {new.id}: its hundreds must be its phase ({new.phase.name})")
        if not _NAME.match(new.name):
            raise ValueError(f"rule name {new.name!r} must be dotted lower-case words")
        if new.id in self._rules:
            raise ValueError(f"duplicate rule id {new.id}")
        if any(r.name == new.name for r in self._rules.values()):
            raise ValueError(f"duplicate rule name {new.name}")
        if not new.statement or not new.source:
            raise ValueError(f"rule {new.id} needs a statement and a source")
        self._rules[new.id] = new
        return new

    def __iter__(self) -> Iterator[Rule]:
        return iter(sorted(self._rules.values(), key=lambda r: (r.phase, r.id)))

    def __len__(self) -> int:
        return len(self._rules)

    def get(self, key: str) -> Rule:
        """A rule by id or name; an unknown key is an InputError that says where to look."""
        for candidate in self._rules.values():
            if key in (candidate.id, candidate.name):
                return candidate
        from chargeplan.errors import InputError

        raise InputError(f"no rule '{key}'", field="rule",
                         fix="run 'chargeplan rules' for the list")

    @staticmethod
    def entry(r: Rule) -> dict[str, str]:
        """One rule as a plain dict."""
        return {
            "id": r.id,
            "name": r.name,
            "phase": r.phase.name.lower(),
            "statement": r.statement,
            "detail": r.detail,
            "source": r.source,
        }

    def manifest(self) -> list[dict[str, str]]:
        """Every rule as a plain dict, in run order: feeds the docs and ``chargeplan rules``."""
        return [self.entry(r) for r in self]


RULES = RuleSet()


def rule(
    rule_id: str, name: str, *, source: str, registry: RuleSet | None = None
) -> Callable[[Callable[[Context], None]], Rule]:
    """Register a function as a rule. Its docstring's first line is the statement."""

    def decorate(function: Callable[[Context], None]) -> Rule:
        doc = inspect.getdoc(function) or ""
        statement, _, detail = doc.partition("\n")
        match = _ID.match(rule_id)
        phase = Phase(int(match.group(1))) if match else Phase.DERIVE
        return (registry or RULES).register(
            Rule(
                id=rule_id,
                name=name,
                phase=phase,
                statement=statement.strip(),
                detail=" ".join(detail.split()),
                source=source,
                apply=function,
            )
        )

    return decorate
