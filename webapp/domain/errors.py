"""The one exception a person's action can raise in the domain: a refused rule."""

from __future__ import annotations


class RuleRefusal(Exception):
    """An action the rules do not allow, with words a mechanic can act on.

    `rule` is a stable machine name (for the API and tests); `reason` is the
    sentence shown to the person; `details` carries extra facts (for example
    seconds remaining) for clients that want them.
    """

    def __init__(self, rule: str, reason: str, **details: object) -> None:
        super().__init__(reason)
        self.rule = rule
        self.reason = reason
        self.details = details

    def as_dict(self) -> dict[str, object]:
        return {"rule": self.rule, "reason": self.reason, **self.details}
