"""fieldrate service: the HTTP and storage shell around :mod:`kinetics`.

Everything numerical is delegated to :mod:`kinetics`; this package validates input,
stores measurements immutably, caches fits and serialises results.
"""

from __future__ import annotations

__all__: list[str] = []
