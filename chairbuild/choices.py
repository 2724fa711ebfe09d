"""Enumerations of user choices that parse their own text (one place for the parsing rule)."""

from __future__ import annotations

import enum

__all__ = ["Choice"]


class Choice(str, enum.Enum):
    """A string enum whose :meth:`parse` accepts a member, its value or an alias, in any case.

    Subclasses set ``_what`` (a noun for messages) through :meth:`describe` and may list
    extra spellings per member in :meth:`aliases`.
    """

    @classmethod
    def describe(cls) -> str:
        """Noun used in error messages."""
        return cls.__name__.lower()

    @classmethod
    def aliases(cls) -> dict[str, "Choice"]:
        """Extra accepted spellings (lower case) mapped to members."""
        return {}

    @classmethod
    def parse(cls, value: "Choice | str") -> "Choice":
        """Return the member for ``value``; raise OptionError naming the valid choices otherwise."""
        from chairbuild.errors import OptionError

        if isinstance(value, cls):
            return value
        key = str(value).strip().lower()
        for member in cls:
            if member.value.lower() == key:
                return member
        if key in cls.aliases():
            return cls.aliases()[key]
        valid = [m.value for m in cls] + sorted(a for a in cls.aliases() if a not in {m.value.lower() for m in cls})
        raise OptionError(f"unknown {cls.describe()} {value!r}; choose from: {', '.join(valid)}")
