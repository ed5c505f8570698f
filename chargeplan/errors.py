"""The one exceptions module.

Every error the library raises on purpose derives from :class:`ChargeplanError`;
the command line maps each branch to an exit code (DEVELOPERS.md, "Errors and exit
codes")::

    ChargeplanError
    ├── InputError            exit 2  bad input: the file, the field and the fix
    ├── PlanRefused           exit 1  the battery must not be charged as asked
    └── InternalError         exit 3  a bug: the library caught itself out
        └── EnvelopeViolation         a finished plan failed safety.verify
"""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from chargeplan.plan import Finding, TraceEntry

__all__ = [
    "ChargeplanError",
    "EnvelopeViolation",
    "InputError",
    "InternalError",
    "PlanRefused",
]


class ChargeplanError(Exception):
    """Base of every error chargeplan raises on purpose."""

    exit_code = 3


class InputError(ChargeplanError):
    """Bad input. The message names the file, the field and the fix in one line."""

    exit_code = 2

    def __init__(
        self,
        message: str,
        *,
        file: str | None = None,
        field: str | None = None,
        fix: str | None = None,
    ) -> None:
        self.file = file
        self.field = field
        self.problem = message
        self.fix = fix
        super().__init__(self._line())

    def _line(self) -> str:
        where = ": ".join(part for part in (self.file, self.field) if part)
        text = f"{where}: {self.problem}" if where else self.problem
        if self.fix:
            text = f"{text}; {self.fix}"
        return text

    def in_file(self, file: str) -> InputError:
        """The same error, now naming the file it came from."""
        return InputError(self.problem, file=file, field=self.field, fix=self.fix)


class PlanRefused(ChargeplanError):
    """The battery must not be charged as asked; ``reason`` says why and what to do."""

    exit_code = 1

    def __init__(
        self,
        reason: str,
        *,
        rule_id: str,
        findings: list[Finding] | None = None,
        trace: list[TraceEntry] | None = None,
    ) -> None:
        self.reason = reason
        self.rule_id = rule_id
        self.findings = list(findings or [])
        self.trace = list(trace or [])
        super().__init__(f"refused ({rule_id}): {reason}")


class InternalError(ChargeplanError):
    """A bug in chargeplan. Please report it with the input that caused it."""

    exit_code = 3


class EnvelopeViolation(InternalError):
    """A finished plan broke its chemistry's hard envelope; it is never output."""

    def __init__(self, violations: list[str]) -> None:
        self.violations = list(violations)
        super().__init__(
            "the plan failed the independent safety check and was not output: "
            + "; ".join(self.violations)
        )
