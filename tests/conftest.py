"""Test-wide setup: Qt runs off screen, and hypothesis has two profiles.

``ci`` (the default) is derandomized so every run draws the same examples, with no per-example
deadline (the machine is slow and shared) and no shrinking, so a failure is reported at once
instead of after minutes of search. ``long`` (``LAYERLOOM_LONG=1``) draws fresh random examples,
twenty times as many, and shrinks a failure to a minimal example.
"""
import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from hypothesis import Phase, settings  # noqa: E402  (after the environment is set)

settings.register_profile("ci", derandomize=True, deadline=None, max_examples=100,
                          phases=(Phase.explicit, Phase.reuse, Phase.generate))
settings.register_profile("long", derandomize=False, deadline=None, max_examples=2000)
settings.load_profile("long" if os.environ.get("LAYERLOOM_LONG") == "1" else "ci")
