"""The routing weight: what a trip's cost counts, in one object.

A :class:`Weight` knows its name (as users type it), the edge column that
holds its per-edge cost, its unit, and how the walk to and from the network
is costed.  It is made once, where input enters (a command-line option, a
study key, an API call), with :func:`as_weight`; everything downstream reads
it from there and never re-validates a string.

==============  ============  ======  =========================================
name            edge column   unit    off-network walk
==============  ============  ======  =========================================
``minutes``     ``minutes``   min     walking time at the walking speed
``length_m``    ``length_m``  m       walked metres
``latency_ms``  ``latency_ms`` ms     free (signal latency exists only on the network)
``hops``        (none: 1)     links   free (a walk is not a link)
==============  ============  ======  =========================================
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import OptionError

__all__ = ["Weight", "WEIGHTS", "WEIGHT_NAMES", "as_weight", "MINUTES", "LENGTH_M", "LATENCY_MS", "HOPS"]


@dataclass(frozen=True)
class Weight:
    """One routing weight.

    Attributes
    ----------
    name : str
        As users type it: ``minutes``, ``length_m``, ``latency_ms`` or ``hops``.
    edge_field : str or None
        The ``edges`` layer column holding the per-edge cost (``None`` for
        ``hops``: every usable link counts 1).
    unit : str
        Short unit for labels and tables (``min``, ``m``, ``ms``, ``links``).
    unit_name : str
        The unit in words, for sentences ("minutes", "metres" ...).
    walk : {'time', 'length', 'free'}
        How an off-network leg is costed: walking time, walked length, or
        nothing.
    describes : str
        One line for help texts and layer descriptions.
    """

    name: str
    edge_field: str | None
    unit: str
    unit_name: str
    walk: str
    describes: str

    def __str__(self) -> str:
        return self.name

    @property
    def walk_costed(self) -> bool:
        """Whether walking to or from the network costs anything on this weight."""
        return self.walk != "free"

    def edge_cost(self, network) -> np.ndarray:
        """Per-edge cost on ``network`` (``NaN``: the edge has no value, or is closed, and is not routable)."""
        cost = (np.ones(network.n_edges, dtype=np.float64) if self.edge_field is None
                else network.edge_column(self.edge_field))
        closed = getattr(network, "edge_closed", None)
        if closed is not None:   # a scenario's closed links: no cost on any weight
            cost = np.where(closed, np.nan, cost)
        return cost

    def walk_cost(self, walk_m, walk_kmh: float) -> np.ndarray:
        """Cost of walking ``walk_m`` metres at ``walk_kmh`` km/h, in this weight's unit.

        Examples
        --------
        >>> float(MINUTES.walk_cost(500.0, 5.0))
        6.0
        >>> float(HOPS.walk_cost(500.0, 5.0))
        0.0
        """
        walk_m = np.asarray(walk_m, dtype=np.float64)
        if self.walk == "time":
            return walk_m / (walk_kmh * 1000.0 / 60.0)
        if self.walk == "length":
            return walk_m.copy()
        return np.zeros_like(walk_m)

    def format(self, value, digits: int = 1) -> str:
        """A cost with its unit, rounded for people: ``'12.3 min'``; ``'no route'`` when not finite."""
        if value is None or not np.isfinite(value):
            return "no route"
        if self.name == "hops":
            return f"{value:.0f} links"
        if self.name == "length_m":
            return f"{value / 1000:.{digits}f} km"
        return f"{value:.{digits}f} {self.unit}"


MINUTES = Weight("minutes", "minutes", "min", "minutes", "time", "travel time in minutes")
LENGTH_M = Weight("length_m", "length_m", "m", "metres", "length", "length in metres (geodesic)")
LATENCY_MS = Weight("latency_ms", "latency_ms", "ms", "milliseconds", "free", "signal latency in milliseconds")
HOPS = Weight("hops", None, "links", "links", "free", "number of links (each usable link counts 1)")

#: Every weight by name, in the order help texts list them.
WEIGHTS: dict[str, Weight] = {w.name: w for w in (MINUTES, LENGTH_M, LATENCY_MS, HOPS)}
#: The names, for argparse choices and the study schema.
WEIGHT_NAMES: tuple[str, ...] = tuple(WEIGHTS)


def as_weight(weight) -> Weight:
    """The :class:`Weight` for a name (or the weight itself): the one place a weight is validated.

    Raises
    ------
    OptionError
        Not a weight name; the message lists the choices.

    Examples
    --------
    >>> as_weight("minutes").unit
    'min'
    >>> as_weight(HOPS) is HOPS
    True
    """
    if isinstance(weight, Weight):
        return weight
    try:
        return WEIGHTS[weight]
    except (KeyError, TypeError):
        raise OptionError(f"weight {weight!r} is not known; choose one of {', '.join(WEIGHT_NAMES)}") from None
