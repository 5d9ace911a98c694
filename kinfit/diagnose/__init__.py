"""The pieces of the transport diagnosis, one concept per module; :mod:`kinfit.diagnostics`
assembles them into one :class:`~kinfit.diagnostics.Diagnosis`.

- :mod:`kinfit.diagnose.model_free`: what the data alone prove (runs that differ in one factor,
  compared with a test that accounts for noise);
- :mod:`kinfit.diagnose.per_run`: criteria and regime of every run from the fitted model, with
  posterior intervals and regime probabilities;
- :mod:`kinfit.diagnose.falsified`: apparent against intrinsic activation energy and order;
- :mod:`kinfit.diagnose.next_runs`: stirrer speed and particle size that would make the runs
  intrinsic.
"""

from __future__ import annotations

__all__: list[str] = []
