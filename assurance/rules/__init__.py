"""Decision rules: when a trial counts as a success, and go / consider / stop zones.

- :mod:`~assurance.rules.significance`: :class:`~assurance.Significance`, a test's
  rejection region as a threshold on the estimate.
- :mod:`~assurance.rules.posterior`: posterior-probability rules, minimum estimates and
  rules joined by AllOf / AnyOf (same threshold interface).
- :mod:`~assurance.rules.zones`: go / consider / stop zones and their probabilities.

Every rule reduces to thresholds on the estimate; ``compute`` turns thresholds into
probabilities.
"""

from __future__ import annotations

from .significance import Significance

__all__ = ["Significance"]
