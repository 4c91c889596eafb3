"""Errors that cross from the use cases to the interfaces (mapped once per interface)."""

from __future__ import annotations

from typing import Any

from qualplan.store.integrity import StoredDataCorrupt

__all__ = ["PlanningError", "NotFound", "Conflict", "VersionMismatch", "ValidationFailed",
           "PermissionDenied", "NotAuthenticated", "StoredDataCorrupt"]


class PlanningError(Exception):
    """Base of every use-case error."""

    code = "error"


class NotFound(PlanningError):
    code = "not-found"

    def __init__(self, entity: str, key: Any) -> None:
        self.entity, self.key = entity, key
        super().__init__(f"{entity} {key!r} not found")


class Conflict(PlanningError):
    """The request contradicts stored state (duplicate key, wrong kind, ...)."""

    code = "conflict"


class VersionMismatch(PlanningError):
    """Optimistic concurrency: the caller edited an older version than the stored one."""

    code = "version-mismatch"

    def __init__(self, entity: str, key: Any, expected: int, actual: int) -> None:
        self.entity, self.key, self.expected, self.actual = entity, key, expected, actual
        super().__init__(
            f"{entity} {key!r} is at version {actual}, not {expected}: "
            "someone else changed it; reload and apply your change again"
        )


class ValidationFailed(PlanningError):
    """Bad input: names the field, the value and the rule."""

    code = "invalid-input"

    def __init__(self, field: str, value: Any, rule: str) -> None:
        self.field, self.value, self.rule = field, value, rule
        text = repr(value)
        if len(text) > 80:
            text = text[:77] + "..."
        super().__init__(f"{field}={text}: {rule}")


class PermissionDenied(PlanningError):
    code = "forbidden"


class NotAuthenticated(PlanningError):
    code = "unauthenticated"
