"""The motif instance kind: one use of a motif defined in the design, stacked ``repeat`` times.

Its inference, costs and ports come from the motif's inner blocks (see
:mod:`layerloom.core.inference`); the extra settings of an instance are the values of the motif's
parameters (whole numbers such as a bottleneck's width).
"""
from __future__ import annotations

from layerloom.core.kinds.base import Kind, register
from layerloom.core.settings import Setting, SettingError, int_setting
from layerloom.core.values import quote

MOTIF = Setting("motif", "text", "motif", "Motif", help="name of a motif defined in this design")
REPEAT = int_setting("repeat", 1, "Repeat × N", maximum=1000, help="copies stacked in series")
PARAM = int_setting("value", 1, "Motif parameter", minimum=0)


@register
class MotifUse(Kind):
    name, title, family = "Motif", "Motif", "Motifs"
    settings = (MOTIF, REPEAT)

    def check_settings(self, settings: dict) -> dict:
        """Motif name and repeat as declared; any other key is a parameter value (a whole number ≥ 0)."""
        out = dict(self.defaults)
        for key, value in settings.items():
            spec = self.settings_by_key.get(key)
            if spec is not None:
                out[key] = spec.check(value)
            else:
                try:
                    out[key] = PARAM.check(value)
                except SettingError as e:
                    raise SettingError(f"motif parameter {quote(key)}: {e}") from None
        return out

    def summary(self, s):
        return f"× {s['repeat']}" if s["repeat"] > 1 else ""
