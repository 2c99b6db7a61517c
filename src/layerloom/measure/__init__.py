"""Measure: the exported network timed on this computer (needs torch; imported only when used).

:mod:`~layerloom.measure.timing` times the whole forward and each block, :mod:`~layerloom.measure.machine`
describes the computer, :mod:`~layerloom.measure.command` is ``layerloom measure``. The calibration of
a target from a measurement needs no torch and lives in :mod:`layerloom.core.calibrate`.
"""
