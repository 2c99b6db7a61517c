"""Typed block settings: each kind declares its settings once, with type, range and default.

Values are plain JSON values: an ``int``, a ``float``, a ``bool``, a string, or for a pair either
one ``int`` (the same on height and width) or two, ``[h, w]`` in a file and the tuple ``(h, w)`` in
memory once checked (so settings are hashable). ``padding`` also accepts the string ``"same"``.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from layerloom.core.values import check_text, quote


class SettingError(ValueError):
    """A value that a setting refuses; the message names the setting, the value and the range."""


@dataclass(frozen=True)
class Setting:
    """One setting of a block kind.

    ``type`` is one of ``int``, ``float``, ``bool``, ``choice``, ``text``, ``pair`` (``int`` or ``[h, w]``)
    and ``padding`` (a pair or ``"same"``). ``minimum``/``maximum`` bound numbers and each item
    of a pair.
    """

    key: str
    type: str
    default: Any
    label: str
    minimum: float | None = None
    maximum: float | None = None
    choices: tuple[str, ...] = ()
    help: str = ""

    def check(self, value: Any) -> Any:
        """Return ``value`` in canonical form, or raise :class:`SettingError` saying why not."""
        t = self.type
        if t == "bool":
            if isinstance(value, bool):
                return value
            raise SettingError(f"{self.label} must be true or false, not {quote(value)}")
        if t == "choice":
            if value in self.choices:
                return value
            raise SettingError(f"{self.label} must be one of {', '.join(self.choices)}, not {quote(value)}")
        if t == "float":
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise SettingError(f"{self.label} must be a number, not {quote(value)}")
            self._range(float(value))
            return float(value)
        if t == "int":
            return self._int(value)
        if t == "text":
            if isinstance(value, str) and value.strip():
                try:
                    return check_text(value, self.label)
                except ValueError as e:
                    raise SettingError(str(e)) from None
            raise SettingError(f"{self.label} must be a non-empty text, not {quote(value)}")
        if t == "padding" and value == "same":
            return "same"
        if t in ("pair", "padding"):
            if isinstance(value, (list, tuple)):
                if len(value) != 2:
                    raise SettingError(f"{self.label} must be one number or two (height, width), not {quote(list(value))}")
                h, w = self._int(value[0]), self._int(value[1])
                return h if h == w else (h, w)
            return self._int(value)
        raise SettingError(f"unknown setting type {t!r}")  # a programming error in a kind

    def _int(self, value: Any) -> int:
        if isinstance(value, bool) or not isinstance(value, int):
            if isinstance(value, float) and value.is_integer():
                value = int(value)
            else:
                extra = " or 'same'" if self.type == "padding" else ""
                raise SettingError(f"{self.label} must be a whole number{extra}, not {quote(value)}")
        self._range(value)
        return value

    def _range(self, value: float) -> None:
        if self.minimum is not None and value < self.minimum:
            raise SettingError(f"{self.label} {_number(value)} is below the minimum {self.minimum:g}")
        if self.maximum is not None and value > self.maximum:
            raise SettingError(f"{self.label} {_number(value)} is above the maximum {self.maximum:g}")


def _number(value: float) -> str:
    """A number for a message: ``3``, ``0.5``; a long integer shortened."""
    return quote(value) if isinstance(value, int) else f"{value:g}"


def pair(value: Any) -> tuple[int, int]:
    """``3`` → ``(3, 3)``; ``[3, 1]`` → ``(3, 1)``."""
    if isinstance(value, int):
        return value, value
    return value[0], value[1]


def pair_text(value: Any) -> str:
    """Trade notation of a pair: ``3`` → ``3×3``, ``[1, 7]`` → ``1×7``."""
    h, w = pair(value)
    return f"{h}×{w}"


BIG = 1 << 20  # upper bound for channel counts and sizes; far beyond any practical design


def int_setting(key: str, default: int, label: str, minimum: int = 1, maximum: int = BIG, help: str = "") -> Setting:
    return Setting(key, "int", default, label, minimum, maximum, help=help)


def pair_setting(key: str, default: Any, label: str, minimum: int = 1, maximum: int = 4096, help: str = "") -> Setting:
    return Setting(key, "pair", default, label, minimum, maximum, help=help)


def padding_setting(default: Any = 0) -> Setting:
    return Setting("padding", "padding", default, "Padding", 0, 4096,
                   help="zeros added on each side: one number, [h, w], or 'same' (stride 1 only)")


def bool_setting(key: str, default: bool, label: str, help: str = "") -> Setting:
    return Setting(key, "bool", default, label, help=help)
