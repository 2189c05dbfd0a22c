"""Pseudo-arclength continuation (physics-free).

``follow``               follow a branch in one parameter; returns a ``Branch``
``switch``               follow the other branch through a located branch point
``Branch``               solutions, events, stop reason; ``to_dataset()`` gives the family
``Event``                a located fold or branch point
``ContinuationOptions``  tolerances and step-control constants
``CONTINUATION_MESSAGES`` stop reasons
"""

from ._continuation import CONTINUATION_MESSAGES, Branch, ContinuationOptions, Event, follow, switch

__all__ = ["follow", "switch", "Branch", "Event", "ContinuationOptions", "CONTINUATION_MESSAGES"]
