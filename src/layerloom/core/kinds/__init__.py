"""All block kinds, registered on import. Look one up with ``KINDS[name]``."""
from layerloom.core.kinds import conv, dense, ends, joins, motif, norm_act, pool, unmapped  # noqa: F401  (registers)
from layerloom.core.kinds.base import KINDS, Cost, Kind

__all__ = ["KINDS", "Cost", "Kind"]
