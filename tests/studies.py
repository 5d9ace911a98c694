"""Small studies written by the tests: study text, runs and observation tables, and the files.

Shared by the test modules (imported as ``from studies import ...``, like ``nist``). Nothing
here holds test data: every value (parameters, reference conditions, runs, noise seeds, number
formats) comes from the calling test, so each test still states its own numbers. The standard
study is a power law with the agitation film law and, on request, a ``[pellet]`` section; its
text has a blank line between sections and none between parameter blocks, e.g. ::

    [data]
    runs = "runs.csv"
    observations = "obs.csv"

    [catalyst]
    geometry = "sphere"
    ...
    [parameters.k_ref]
    value = "0.05 mol/(kg*s)"
    [parameters.order]
    value = 1.0

Also a wall-clock alarm for the tests that feed damaged input to the loader or the expression
compiler.
"""

from __future__ import annotations

import contextlib
import signal
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["RUNS_HEADER", "Hang", "Raw", "alarm", "model_of", "noisy_batch_campaign",
           "numbered", "profile_rows", "profiles_csv", "runs_csv", "simulate", "study_text",
           "write_study"]

#: header of the runs table in the units the tests write (degC, rpm, um, g/L, mol/L)
RUNS_HEADER = ("run,temperature [degC],stirrer_speed [rpm],particle_diameter [um],"
               "catalyst_loading [g/L],initial_concentration [mol/L]")


class Raw(str):
    """Text written into the TOML as it is, e.g. a ``{placeholder}`` for a later ``format``."""


def _toml_value(value: object) -> str:
    """A TOML value: strings quoted, booleans lower case, numbers as Python writes them."""
    if isinstance(value, Raw):
        return str(value)
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, str):
        return f'"{value}"'
    return str(value)


def study_text(
    parameters: Mapping[str, object],
    *,
    reference_temperature: str,
    reference_diameter: str = "100 um",
    reference_speed: str = "600 rpm",
    rate_law: str = "power",
    film: str = "agitation",
    pellet: str | None = None,
    vary: Mapping[str, bool] | None = None,
    name: str | None = None,
    runs: str = "runs.csv",
    observations: str = "obs.csv",
    kinetics: Mapping[str, object] | None = None,
    sections: str = "",
    comment: str | None = None,
    geometry: str = "sphere",
    temperature_scaling: str | None = None,
) -> str:
    """The TOML text of a study on particles of 1500 kg/m^3 (spheres unless ``geometry``).

    Parameters
    ----------
    parameters : mapping
        ``[parameters.NAME]`` blocks in this order: a value (string with unit, number,
        boolean or :class:`Raw` text), or a mapping of the block's keys (``value``, ``min``, ``vary``, ...).
    reference_temperature, reference_diameter, reference_speed : str
        ``[kinetics]`` reference temperature and, for the agitation film, the reference speed
        and particle diameter.
    rate_law : str
        ``[kinetics] rate_law``.
    film : str
        ``[film] model``; the reference speed and diameter are written only for ``agitation``.
    pellet : str or None
        ``[pellet] diffusivity``; None leaves the section out.
    vary : mapping, optional
        ``vary = true/false`` lines added to the named parameter blocks.
    name : str or None
        ``[study] name``; None leaves the section out.
    runs, observations : str
        Table files named in ``[data]``.
    kinetics : mapping, optional
        Further ``[kinetics]`` keys (e.g. ``reference_concentration``).
    sections : str
        TOML text appended after the parameter blocks (further sections).
    comment : str or None
        A ``#`` comment line at the top.
    geometry : str
        ``[catalyst] geometry``.
    temperature_scaling : str or None
        ``temperature_scaling`` written into ``[film]`` and (when present) ``[pellet]``; None
        leaves it to the loader's default.
    """
    blocks = []
    if comment is not None:
        blocks.append(f"# {comment}\n")
    if name is not None:
        blocks.append(f'[study]\nname = "{name}"\n')
    blocks.append(f'[data]\nruns = "{runs}"\nobservations = "{observations}"\n')
    blocks.append(f'[catalyst]\ngeometry = "{geometry}"\nparticle_density = "1500 kg/m^3"\n')
    kin = {"rate_law": rate_law, "reference_temperature": reference_temperature,
           **(kinetics or {})}
    blocks.append("[kinetics]\n" + "".join(f"{k} = {_toml_value(v)}\n" for k, v in kin.items()))
    scaling = ("" if temperature_scaling is None
               else f'temperature_scaling = "{temperature_scaling}"\n')
    film_text = f'[film]\nmodel = "{film}"\n'
    if film == "agitation":
        film_text += (f'reference_speed = "{reference_speed}"\n'
                      f'reference_diameter = "{reference_diameter}"\n')
    blocks.append(film_text + scaling)
    if pellet is not None:
        blocks.append(f'[pellet]\ndiffusivity = "{pellet}"\n' + scaling)
    out = []
    for pname, spec in parameters.items():
        keys = dict(spec) if isinstance(spec, Mapping) else {"value": spec}
        if vary and pname in vary:
            keys["vary"] = vary[pname]
        out.append(f"[parameters.{pname}]\n"
                   + "".join(f"{k} = {_toml_value(v)}\n" for k, v in keys.items()))
    blocks.append("".join(out))
    return "\n".join(blocks) + sections


def numbered(rows: Iterable[Sequence[object]], prefix: str = "R") -> list[tuple[object, ...]]:
    """Rows without a run id, numbered ``R1``, ``R2``, ... in front."""
    return [(f"{prefix}{i + 1}", *row) for i, row in enumerate(rows)]


def runs_csv(rows: Iterable[Sequence[object]]) -> str:
    """Runs table text: :data:`RUNS_HEADER`, then one line a row of (run, T [degC],
    N [rpm], dp [um], loading [g/L], C0 [mol/L]), each cell written by ``str``."""
    return RUNS_HEADER + "\n" + "".join(",".join(map(str, r)) + "\n" for r in rows)


def profiles_csv(rows: Iterable[Sequence[object]], *, unit: str = "mol/m^3") -> str:
    """Observations table text ``run,time [min],concentration [unit]`` from (run, time
    [min], concentration) rows, each cell written by ``str`` (format numbers beforehand)."""
    return (f"run,time [min],concentration [{unit}]\n"
            + "".join(",".join(map(str, r)) + "\n" for r in rows))


def profile_rows(model: Any, values: np.ndarray, *, fmt: str = ".8g", scale: float = 1.0
                 ) -> list[tuple[str, str, str]]:
    """(run, time [min], concentration / scale) rows at the model's observation points.

    ``fmt`` is a format spec for both numbers, or ``"repr"`` for the shortest exact text.
    ``scale`` divides the concentrations (1000 writes mol/m^3 as mol/L).
    """
    ids = np.asarray(model.run_ids)[model.run_index]

    def text(x: float) -> str:
        return repr(x) if fmt == "repr" else format(x, fmt)

    return [(str(r), text(float(t) / 60.0), text(float(c) / scale))
            for r, t, c in zip(ids, model.times, values, strict=True)]


def write_study(folder: Path, study: str, runs: str, observations: str, *,
                study_file: str = "study.toml", observations_file: str = "obs.csv") -> Path:
    """Write the study text and both tables into ``folder`` (made if missing); return the
    study file's path."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "runs.csv").write_text(runs)
    (folder / observations_file).write_text(observations)
    path = folder / study_file
    path.write_text(study)
    return path


def model_of(study: Any, spec: Callable[[Any], Any] | None = None) -> Any:
    """The kinfit Model of a loaded study (``ModelSpec.from_study`` unless ``spec`` is given,
    e.g. ``kinfit.fitting.main_spec``)."""
    from kinfit.model import Model, ModelSpec

    return Model((spec or ModelSpec.from_study)(study), study)


def simulate(path: Path, spec: Callable[[Any], Any] | None = None
             ) -> tuple[Any, Any, np.ndarray]:
    """Load the study at ``path``; return (study, model, predictions at the study's values)."""
    from kinfit.study import load_study

    study = load_study(path)
    model = model_of(study, spec)
    return study, model, model.predict(model.x0[None, :])[0]


# ------------------------------------------------------------------------------ wall-clock alarm
class Hang(BaseException):
    """Raised by :func:`alarm` when a block runs past its limit (BaseException: never
    swallowed by ``except Exception``)."""


@contextlib.contextmanager
def alarm(seconds: float, message: str = "longer than {seconds:g} s") -> Iterator[None]:
    """Raise :class:`Hang` (``message`` formatted with ``seconds``) in the main thread if the
    block runs longer than ``seconds``."""

    def fire(signum: int, frame: Any) -> None:
        raise Hang(message.format(seconds=seconds))

    old = signal.signal(signal.SIGALRM, fire)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)


def noisy_batch_campaign(folder: Path, truth_text: str, runs: Sequence[Sequence[object]],
                         times_min: np.ndarray, *, sigma: float, seed: int,
                         spec: Callable[[Any], Any] | None = None) -> tuple[Any, Any]:
    """Batch runs simulated at the truth study's values plus seeded Gaussian noise of sd
    ``sigma`` (mol/m^3, clipped at 0), written as ``truth.toml`` and ``observations.csv`` in
    ``folder``. ``runs`` rows are (run, T [degC], N [rpm], dp [um], w [g/L], C0 [mol/L]);
    every run is sampled at ``times_min``. Returns (study, model)."""
    from kinfit.study import load_study

    obs = [(r[0], f"{t:g}", float(r[5]) * 1000) for r in runs for t in times_min]
    path = write_study(folder, truth_text, runs_csv(runs), profiles_csv(obs),
                       study_file="truth.toml", observations_file="observations.csv")
    _, model, f = simulate(path, spec)
    y = np.maximum(f + np.random.default_rng(seed).normal(0.0, sigma, f.size), 0.0)
    (Path(folder) / "observations.csv").write_text(
        profiles_csv(profile_rows(model, y, fmt=".8g")))
    return load_study(path), model
