"""The model builder: a rate law coupled to film resistance and the effectiveness factor inside a
reactor model, compiled for a study into a predictor vectorised over parameter sets.

:class:`ModelSpec` holds the choices (rate law, film model, pellet, reactor, parameter table);
:class:`Model` compiles them against a :class:`~kinfit.study.load.Study` and maps a parameter matrix
(m, p) to predictions (m, n_obs) in one numpy pass.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from kinfit.errors import ModelError, StudyError, did_you_mean
from kinfit.estimate.problem import ErrorModel, Problem, Space
from kinfit.model.candidates import rate_law_options
from kinfit.physics.criteria import Criteria, Thresholds, compute_criteria
from kinfit.physics.film import make_film_model
from kinfit.physics.geometry import characteristic_length, external_area
from kinfit.physics.kinetics.registry import make_rate_law
from kinfit.physics.pellet.effectiveness import eta_first_order
from kinfit.physics.properties import make_fluid
from kinfit.physics.reactors import (
    BatchGrid,
    batch_profiles,
    batch_profiles_surface,
    differential_rates,
)
from kinfit.physics.surface import (
    ObservedRate,
    PelletRate,
    observed_rate,
    observed_rate_value,
    solve_surface,
)
from kinfit.physics.temperature import TransportScaling, with_scaled_diffusivity
from kinfit.study.parameters import ParameterTable
from kinfit.study.runs import Study

__all__ = ["ModelSpec", "Model", "RunState", "ERROR_SCALE_NAMES"]

Array = NDArray[np.float64]
ERROR_SCALE_NAMES = ("sigma", "sigma_rel")
PELLET_MODES = ("direct", "tortuosity", "none")
_KINETIC_KEYS = {"rate_law", "reference_temperature", "reference_concentration"}


@dataclass(frozen=True)
class ModelSpec:
    """The model choices: what couples to what.

    Attributes
    ----------
    rate_law : RateLaw
    film : FilmModel
    geometry : {"sphere", "cylinder", "slab"}
    particle_density : float
        kg/m^3.
    pellet : {"direct", "tortuosity", "none"}
        Fit ``effective_diffusivity`` directly, or De = porosity Dm / ``tortuosity``, or no
        internal resistance (eta = 1).
    porosity : float or None
    molecular_diffusivity : float or None
        Dm, m^2/s, for ``tortuosity`` (else taken from ``fluid`` at each run's temperature).
    fluid : Fluid or None
        Solvent properties from the ``[fluid]`` section.
    scaling : TransportScaling
        Temperature scaling of De and kc (``temperature_scaling`` of [pellet] and [film]).
    reactor : {"batch", "differential"}
    parameters : ParameterTable
    label : str
        A short name for comparison tables.
    """

    rate_law: Any
    film: Any
    geometry: str
    particle_density: float
    pellet: str
    reactor: str
    parameters: ParameterTable
    porosity: float | None = None
    molecular_diffusivity: float | None = None
    fluid: Any = None
    label: str = "model"
    scaling: TransportScaling = field(default_factory=TransportScaling)

    @property
    def pellet_parameter(self) -> str | None:
        """Name of the pellet parameter, if any."""
        return {"direct": "effective_diffusivity", "tortuosity": "tortuosity"}.get(self.pellet)

    @property
    def parameter_names(self) -> tuple[str, ...]:
        """Every physical parameter the model needs, rate law first."""
        names = list(self.rate_law.parameter_names) + list(self.film.parameter_names)
        if self.pellet_parameter:
            names.append(self.pellet_parameter)
        return tuple(dict.fromkeys(names))

    @classmethod
    def from_study(cls, study: Study, *, rate_law: str | None = None, film: str | None = None,
                   pellet: str | None = None, parameters: ParameterTable | None = None,
                   label: str | None = None, check: bool = True) -> ModelSpec:
        """Build the spec from a study's sections, optionally overriding the choices.

        Raises
        ------
        StudyError
            Unknown rate law, film model or pellet mode; a needed parameter missing; a
            parameter the model does not use.
        """

        kin = dict(study.kinetics)
        law_name = rate_law or kin["rate_law"]
        options = {k: v for k, v in kin.items() if k not in ("rate_law",)}
        if law_name != kin["rate_law"]:  # a candidate law takes only the options it knows
            accepted = rate_law_options(law_name)
            options = {k: v for k, v in options.items() if k in accepted}
        law = make_rate_law(law_name, **options)
        film_sec = dict(study.film)
        study_film = film_sec.pop("model", "agitation")
        film_scaling = film_sec.pop("temperature_scaling", "none")
        film_name = film or study_film
        if film_name != study_film:  # another film model: the study's options are not its own
            film_sec = {}
        if film_name == "agitation":
            film_sec.setdefault("reference_speed", _geomean([r.stirrer_speed for r in study.runs]))
            film_sec.setdefault("reference_diameter",
                                _geomean([r.particle_diameter for r in study.runs]))
        fluid = None
        T_ref = float(kin["reference_temperature"])
        if study.fluid:

            fluid = make_fluid(**dict(study.fluid))
            if film_name not in ("agitation", "none"):
                film_sec.setdefault("fluid", with_scaled_diffusivity(fluid, T_ref)
                                    if film_scaling == "viscosity" else fluid)
        film_model = make_film_model(film_name, **film_sec)
        mode = pellet or study.pellet.get("diffusivity", "direct")
        if mode not in PELLET_MODES:
            raise StudyError(f"pellet mode '{mode}' is not recognised; use one of "
                             f"{list(PELLET_MODES)}")
        table = parameters if parameters is not None else study.parameters
        spec = cls(
            rate_law=law, film=film_model, geometry=study.catalyst["geometry"],
            particle_density=float(study.catalyst["particle_density"]), pellet=mode,
            reactor="differential" if study.kind == "rate" else "batch",
            parameters=table, porosity=study.catalyst.get("porosity"),
            molecular_diffusivity=study.pellet.get("molecular_diffusivity"),
            fluid=fluid, label=label or f"{law_name}/{film_name}/{mode}",
            scaling=TransportScaling(
                pellet=study.pellet.get("temperature_scaling", "none") if mode != "none"
                else "none",
                film=film_scaling if film_name != "none" else "none",
                reference_temperature=T_ref, fluid=fluid),
        )
        if check:
            spec.validate()
        return spec

    def validate(self) -> None:
        """Check that the table holds every needed parameter and nothing unknown."""
        needed = set(self.parameter_names)
        have = set(self.parameters)
        missing = [n for n in self.parameter_names if n not in have]
        if missing:
            raise StudyError(
                f"parameter '{missing[0]}' is needed by the model ({self.label}) but the study "
                f"has no [parameters.{missing[0]}]; add it with a value"
            )
        extra = sorted(have - needed - set(ERROR_SCALE_NAMES))
        if extra:
            raise StudyError(
                f"unknown parameter '{extra[0]}'{did_you_mean(extra[0], needed)} for the model "
                f"({self.label}); the model uses "
                f"{sorted(needed)} (and error scales {list(ERROR_SCALE_NAMES)})"
            )
        if self.pellet == "tortuosity" and (not self.porosity or not (
                self.molecular_diffusivity or (self.fluid is not None
                                               and self.fluid.has_diffusivity))):
            raise StudyError("pellet diffusivity 'tortuosity' needs [catalyst].porosity and "
                             "either [pellet].molecular_diffusivity or a [fluid] with a "
                             "diffusivity (or solute_molar_volume for Wilke-Chang)")
        if not any(self.parameters[n].vary for n in self.parameter_names):
            raise StudyError("no varying parameter: set vary = true on at least one parameter")


def _geomean(values: list[float]) -> float:
    v = np.asarray(values, dtype=float)
    v = v[v > 0]
    return float(np.exp(np.mean(np.log(v)))) if v.size else 1.0


@dataclass(frozen=True)
class RunState:
    """Transport state of every run at its initial conditions for one parameter set."""

    run_ids: tuple[str, ...]
    observed: ObservedRate
    kc: Array
    criteria: Criteria
    params: Mapping[str, Array] = field(default_factory=dict)


class Model:
    """A compiled, vectorised predictor for one study and one :class:`ModelSpec`.

    Parameters
    ----------
    spec : ModelSpec
    study : Study
    grid : BatchGrid, optional
        Integration grid of the batch reactor.
    """

    def __init__(self, spec: ModelSpec, study: Study, *, grid: BatchGrid | None = None) -> None:

        self.spec, self.study = spec, study
        self.grid = grid or BatchGrid()
        runs = study.runs
        self.run_ids = study.run_ids
        R = len(runs)
        col = lambda name: np.array([getattr(r, name) for r in runs], dtype=float)  # noqa: E731
        self.T = col("temperature")
        self.N = col("stirrer_speed")
        self.dp = col("particle_diameter")
        self.w = col("catalyst_loading")
        self.C0 = col("initial_concentration")
        self.L = characteristic_length(spec.geometry, self.dp)
        self.a_m = external_area(spec.geometry, self.dp, spec.particle_density)
        # temperature scaling of transport, per run (one factor each; see TransportScaling)
        sc = spec.scaling
        self.de_factor = sc.pellet_factor(self.T)
        self.kc_factor = (sc.film_factor(self.T) if spec.film.name == "agitation"
                          else np.ones(R))
        # correlation films use the liquid's properties at the run's temperature, or at T_ref
        # when scaling is off
        self.T_film = (self.T if sc.film == "viscosity" or spec.film.name == "agitation"
                       else np.full(R, sc.reference_temperature))
        groups = study.groups()
        self.group_of_run = np.array([groups.index(r.group or "default") for r in runs])
        if spec.reactor == "batch":
            self.y = np.concatenate([r.concentrations for r in runs])
            self.times = np.concatenate([r.times for r in runs])
        else:
            self.y = np.concatenate([r.rates for r in runs])
            self.times = np.zeros(self.y.size)
        self.run_index = np.concatenate([np.full(r.n_obs, i) for i, r in enumerate(runs)])
        self.weights = np.concatenate([r.weights for r in runs])
        # columns of the parameter matrix: varying parameters expanded by scope
        columns: list[str] = []
        self._slots: dict[str, tuple[str, NDArray[np.int_]]] = {}
        for name in spec.parameter_names:
            p = spec.parameters[name]
            if not p.vary:
                continue
            if p.scope == "shared":
                self._slots[name] = ("shared", np.array([len(columns)]))
                columns.append(name)
            elif p.scope == "run":
                self._slots[name] = ("run", np.arange(len(columns), len(columns) + R))
                columns.extend(f"{name}[{rid}]" for rid in self.run_ids)
            else:
                self._slots[name] = ("group", np.arange(len(columns), len(columns) + len(groups)))
                columns.extend(f"{name}[{g}]" for g in groups)
        self.columns = tuple(columns)
        self.column_parameter = tuple(c.split("[")[0] for c in columns)
        self.n_obs = int(self.y.size)
        if self.n_obs < len(columns):
            raise StudyError(f"{self.n_obs} observations but {len(columns)} varying parameters "
                             "(after expanding per-run and per-group scopes): fix parameters "
                             "or add observations")

    # ------------------------------------------------------------------ parameter mapping
    def space(self) -> Space:
        """Bounds and transforms of the varying columns."""
        ps = [self.spec.parameters[n] for n in self.column_parameter]
        return Space(self.columns, np.array([p.min for p in ps]), np.array([p.max for p in ps]),
                     tuple(p.transform for p in ps))

    @property
    def x0(self) -> Array:
        """Start values of the varying columns."""
        return np.array([self.spec.parameters[n].value for n in self.column_parameter])

    def expand(self, theta: Array) -> dict[str, Array]:
        """Per-run values (m, R) of every model parameter from a parameter matrix (m, p)."""
        theta = np.atleast_2d(np.asarray(theta, dtype=float))
        m, R = theta.shape[0], len(self.run_ids)
        out: dict[str, Array] = {}
        for name in self.spec.parameter_names:
            if name not in self._slots:
                out[name] = np.full((m, R), self.spec.parameters[name].value)
                continue
            scope, idx = self._slots[name]
            if scope == "shared":
                out[name] = np.repeat(theta[:, idx], R, axis=1)
            elif scope == "run":
                out[name] = theta[:, idx]
            else:
                out[name] = theta[:, idx][:, self.group_of_run]
        return out

    # ------------------------------------------------------------------ physics
    def _pieces(self, values: Mapping[str, Array], idx: NDArray[np.int_] | None = None):
        """Pellet rate, film conductance, kc and De laid out for evaluation.

        ``values`` holds per-run parameter values (m, R). Without ``idx`` the layout is
        (m, R, 1) (runs, with a trailing axis for concentration nodes); with ``idx`` (the run of
        each point) it is (m, n) (points).
        """
        spec = self.spec
        if idx is None:
            run = lambda a: np.asarray(a)[None, :, None]  # noqa: E731
            val = lambda v: v[:, :, None]  # noqa: E731
        else:
            run = lambda a: np.asarray(a)[idx][None, :]  # noqa: E731
            val = lambda v: v[:, idx]  # noqa: E731
        T, C0 = run(self.T), run(self.C0)
        law_p = {n: val(values[n]) for n in spec.rate_law.parameter_names}
        spec.rate_law.check(law_p)
        film_p = {n: val(values[n]) for n in spec.film.parameter_names}
        spec.film.check(film_p)
        kc = spec.film.kc(run(self.N), run(self.dp), run(self.T_film), film_p) * run(
            self.kc_factor)
        conductance = kc * run(self.a_m)
        De = self._effective_diffusivity(values, val, run)
        pr = PelletRate(spec.rate_law, law_p, T, C0, De, run(self.L), spec.particle_density,
                        spec.geometry)
        return pr, conductance, kc, De

    def _effective_diffusivity(self, values: Mapping[str, Array], val, run) -> Array | None:
        """De at each run's temperature: the fitted De_ref (or eps Dm(T_ref)/tau) times the
        run's temperature factor; None without a pellet model."""
        spec = self.spec
        if spec.pellet == "direct":
            De = val(values["effective_diffusivity"])
            if np.any(~(De > 0)):
                raise ModelError("parameter 'effective_diffusivity' must be > 0, got "
                                 f"{float(np.min(De)):g}")
            return De * run(self.de_factor)
        if spec.pellet == "tortuosity":
            tau = val(values["tortuosity"])
            if np.any(~(tau > 0)):
                raise ModelError(f"parameter 'tortuosity' must be > 0, got {float(np.min(tau)):g}")
            T0 = spec.scaling.reference_temperature
            Dm = (spec.molecular_diffusivity if spec.molecular_diffusivity
                  else spec.fluid.diffusivity(T0))
            return float(spec.porosity or 0.0) * Dm * run(self.de_factor) / tau
        return None

    def point_states(self, theta_row: Array, concentration: Array) -> tuple[ObservedRate, Array]:
        """Transport state at every observation for one parameter set, at the given bulk
        concentrations (n_obs,): observed rate, Cs, eta, Phi, intrinsic rate; and kc."""
        values = self.expand(np.atleast_2d(theta_row))
        pr, conductance, kc, _ = self._pieces(values, self.run_index)
        Cb = np.asarray(concentration, dtype=float)[None, :]
        obs = observed_rate(Cb * np.ones_like(conductance), pr, conductance)
        flat = ObservedRate(*(np.broadcast_to(a, Cb.shape)[0] for a in (
            obs.rate, obs.surface_concentration, obs.effectiveness, obs.thiele_modulus,
            obs.intrinsic_rate)))
        return flat, np.broadcast_to(kc, Cb.shape)[0]

    def predict(self, theta: Array) -> Array:
        """Predictions (m, n_obs) for a matrix of parameter sets (m, p) (physical values).

        Concentrations (mol/m^3) at the observation times for a batch campaign; observed rates
        (mol/(kg s)) for a rate campaign.
        """
        theta = np.atleast_2d(np.asarray(theta, dtype=float))
        values = self.expand(theta)
        if self._first_order(values):
            return self._first_order_profiles(values, self.times, self.run_index)
        pr, conductance, _, _ = self._pieces(values)

        def rate(C: Array) -> Array:
            return observed_rate_value(C, pr, conductance)

        if self.spec.reactor == "batch":
            return self._batch(pr, conductance, theta.shape[0], self.times, self.run_index)
        return differential_rates(rate, self.C0, self.run_index)

    def _batch(self, pr: PelletRate, conductance: Array, m: int, times: Array,
               run_index: NDArray[np.int_]) -> Array:
        """Batch profiles: on a grid in surface concentration where the pellet rate allows it
        (:attr:`PelletRate.surface_grid`; the film balance is then solved once, at t = 0),
        else on a grid in bulk concentration with the film balance solved at every point."""
        ceq = np.broadcast_to(pr.C_eq, (m, len(self.run_ids), 1))[..., 0]
        times = np.asarray(times, dtype=float)
        run_index = np.asarray(run_index)
        if pr.surface_grid:
            def g(c: Array) -> tuple[Array, Array]:
                val, dval, *_ = pr(c)
                return val, dval

            Cb0 = np.broadcast_to(self.C0[None, :, None], (m, len(self.run_ids), 1))
            Cs0 = np.asarray(solve_surface(Cb0, conductance, g, C_eq=pr.C_eq))
            return batch_profiles_surface(g, conductance, Cs0[..., 0], ceq, self.w, times,
                                          run_index, grid=self.grid)
        conc, _ = batch_profiles(lambda C: observed_rate_value(C, pr, conductance), self.C0,
                                 ceq, self.w, times, run_index, grid=self.grid)
        return conc

    def _first_order(self, values: Mapping[str, Array]) -> bool:
        """Whether the closed form applies: an irreversible power law of order exactly 1 in a
        batch reactor."""
        return (self.spec.reactor == "batch" and self.spec.rate_law.name == "power"
                and bool(np.all(values["order"] == 1.0)))

    def _first_order_profiles(self, values: Mapping[str, Array], times: Array,
                              run_index: NDArray[np.int_]) -> Array:
        """First order in a batch slurry, closed form: with k1 = k(T)/C_ref, eta from the
        first-order closed form at Phi = L sqrt(rho_p k1/De) and the resistances in series
        1/k_obs = 1/(kc a_m) + 1/(eta k1), C = C0 exp(-w k_obs t) (Satterfield 1970)."""

        spec, law = self.spec, self.spec.rate_law
        law_p = {n: values[n] for n in law.parameter_names}
        law.check(law_p)
        film_p = {n: values[n] for n in spec.film.parameter_names}
        spec.film.check(film_p)
        T = self.T[None, :]
        k1 = law.rate(law.reference_concentration, T, law_p) / law.reference_concentration
        conductance = spec.film.kc(self.N[None, :], self.dp[None, :], self.T_film[None, :],
                                   film_p) * (self.kc_factor * self.a_m)
        if spec.pellet == "none":
            eta: Array | float = 1.0
        else:
            De = self._effective_diffusivity(values, lambda v: v, lambda a: np.asarray(a)[None, :])
            eta = eta_first_order(self.L * np.sqrt(spec.particle_density * k1 / De),
                                  spec.geometry)
        with np.errstate(divide="ignore"):
            k_obs = 1.0 / (1.0 / conductance + 1.0 / (eta * k1))
        k_obs = np.broadcast_to(k_obs, k1.shape)
        ri = np.asarray(run_index)
        return self.C0[ri][None, :] * np.exp(-self.w[ri][None, :] * k_obs[:, ri] *
                                             np.asarray(times, dtype=float)[None, :])

    def predict_profiles(self, theta: Array, times: Array, run_index: NDArray[np.int_]) -> Array:
        """Batch concentrations at arbitrary times (for plots and predictions)."""
        values = self.expand(np.atleast_2d(np.asarray(theta, dtype=float)))
        if self._first_order(values):
            return self._first_order_profiles(values, times, run_index)
        pr, conductance, _, _ = self._pieces(values)
        return self._batch(pr, conductance, np.atleast_2d(theta).shape[0], times, run_index)

    def run_states(self, theta_row: Array, *, thresholds: Thresholds | None = None,
                   concentration: Array | None = None) -> RunState:
        """Transport state and criteria of every run at its initial concentration (or at
        ``concentration``, shape (R,)) for one parameter set."""
        values2 = self.expand(np.atleast_2d(theta_row))
        values = {k: v[:, :, None] for k, v in values2.items()}
        pr, conductance, kc, De = self._pieces(values2)
        Cb = (self.C0 if concentration is None else np.asarray(concentration))[None, :, None]
        obs = observed_rate(Cb * np.ones_like(conductance), pr, conductance)
        order = self.spec.rate_law.power_law_order({n: values[n] for n in
                                                    self.spec.rate_law.parameter_names})
        if order is None:
            order = _local_order(self.spec.rate_law, obs.surface_concentration,
                                 self.T[None, :, None], {n: values[n] for n in
                                                         self.spec.rate_law.parameter_names},
                                 self.C0[None, :, None])
        crit = compute_criteria(
            observed_rate=obs.rate[0, :, 0], bulk_concentration=Cb[0, :, 0],
            surface_concentration=obs.surface_concentration[0, :, 0],
            intrinsic_rate=obs.intrinsic_rate[0, :, 0], effectiveness=obs.effectiveness[0, :, 0],
            thiele_modulus=obs.thiele_modulus[0, :, 0],
            kc=np.broadcast_to(kc, obs.rate.shape)[0, :, 0], particle_diameter=self.dp,
            particle_density=self.spec.particle_density,
            effective_diffusivity=None if De is None else np.broadcast_to(De, obs.rate.shape)[
                0, :, 0],
            geometry=self.spec.geometry,
            order=np.broadcast_to(order, obs.rate.shape)[0, :, 0],
            C_eq=np.broadcast_to(pr.C_eq, obs.rate.shape)[0, :, 0], thresholds=thresholds,
        )
        flat = ObservedRate(*(np.asarray(a)[0, :, 0] for a in (
            obs.rate, obs.surface_concentration, obs.effectiveness, obs.thiele_modulus,
            obs.intrinsic_rate)))
        return RunState(self.run_ids, flat, np.broadcast_to(kc, obs.rate.shape)[0, :, 0], crit,
                        {k: v[0] for k, v in values2.items()})

    def problem(self, *, error_model: str | None = None, x0: Array | None = None) -> Problem:
        """The estimation problem: predictor, data, space, start."""
        return Problem(
            predict=self.predict, y=self.y, space=self.space(),
            x0=self.x0 if x0 is None else x0, weights=self.weights,
            error_model=ErrorModel(error_model or self.study.error_model),
            groups=self.run_index, labels=self.run_ids,
        )


def _local_order(law, Cs: Array, T: Array, p: Mapping[str, Array], C0: Array) -> Array:
    """d ln r / d ln C at Cs: the local order of a non-power-law rate."""
    r = law.rate(Cs, T, p, C0=C0)
    dr = law.drate_dC(Cs, T, p, C0=C0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(r > 0, dr * Cs / r, 1.0)
