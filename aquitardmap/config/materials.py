"""Map free-text material descriptions of water-well logs to unit codes of the stack.

Water-well records describe what the driller saw in words ("grey silty clay", "sand and
gravel, water") rather than in the project's unit codes. ``project.toml`` holds an ordered
list of ``[[materials]]`` rules; the first rule that matches a description gives its unit.
A description no rule matches is never guessed: the reader reports it, with its count, so
the analyst can add a rule.

A rule matches when the description contains any of its ``words`` as whole words (case is
ignored; a phrase such as ``"silty clay"`` matches across any run of spaces), or when its
``pattern`` (a Python regular expression, case ignored) is found anywhere in it.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass, field


def words_regex(words: Sequence[str]) -> re.Pattern[str] | None:
    """Case-insensitive regex matching any of ``words`` as whole words; None if empty."""
    parts = []
    for w in words:
        tokens = w.split()
        if tokens:
            parts.append(r"\s+".join(re.escape(t) for t in tokens))
    if not parts:
        return None
    return re.compile(r"(?<!\w)(?:" + "|".join(parts) + r")(?!\w)", re.IGNORECASE)


@dataclass(frozen=True)
class MaterialRule:
    """One ``[[materials]]`` rule: descriptions it matches are logged as ``unit``.

    Attributes:
        unit: a unit code of the stack.
        words: whole words or phrases, any of which makes the rule match.
        pattern: a regular expression searched in the description (case ignored), or "".
    """

    unit: str
    words: tuple[str, ...] = ()
    pattern: str = ""
    _compiled: tuple[re.Pattern[str], ...] = field(default=(), repr=False, compare=False)

    def __post_init__(self) -> None:
        compiled = []
        wr = words_regex(self.words)
        if wr is not None:
            compiled.append(wr)
        if self.pattern:
            compiled.append(re.compile(self.pattern, re.IGNORECASE))
        object.__setattr__(self, "_compiled", tuple(compiled))

    def matches(self, description: str) -> bool:
        """True when any word or the pattern is found in ``description``."""
        return any(rx.search(description) for rx in self._compiled)


def match_material(description: str, rules: Sequence[MaterialRule]) -> str | None:
    """Unit code of the first rule matching ``description``; None when no rule matches.

    >>> rules = [MaterialRule("LAM", pattern=r"varv|laminat"),
    ...          MaterialRule("UMC", words=("clay", "silty clay"))]
    >>> match_material("Grey laminated clay", rules), match_material("sandy loam", rules)
    ('LAM', None)
    """
    text = " ".join(description.split())
    for rule in rules:
        if rule.matches(text):
            return rule.unit
    return None


__all__ = ["MaterialRule", "match_material", "words_regex"]
