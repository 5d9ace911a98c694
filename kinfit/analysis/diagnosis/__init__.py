"""The pieces of the transport diagnosis, one concept per module; :mod:`kinfit.analysis.diagnosis.diagnosis`
assembles them into one :class:`~kinfit.analysis.diagnosis.diagnosis.Diagnosis`.

- :mod:`kinfit.analysis.diagnosis.model_free`: what the data alone prove (runs that differ in one factor,
  compared with a test that accounts for noise);
- :mod:`kinfit.analysis.diagnosis.per_run`: criteria and regime of every run from the fitted model, with
  posterior intervals and regime probabilities;
- :mod:`kinfit.analysis.diagnosis.falsified`: apparent against intrinsic activation energy and order;
- :mod:`kinfit.analysis.diagnosis.next_runs`: stirrer speed and particle size that would make the runs
  intrinsic.
"""

from __future__ import annotations

__all__: list[str] = []
