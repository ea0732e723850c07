"""Results as numpy arrays.

Each task's result message becomes an object whose attributes are numpy
arrays in the units of the service (K, T, mu_B per cluster, k_B per
cluster, mu_B/T per cluster), with the message itself in .message. The
to_dataframe() methods need pandas and give long tables with the unit in
every column name (T_K, B_T, M_muB, ...).
"""

from __future__ import annotations

from dataclasses import dataclass, field as dataclass_field
from typing import Any, Dict, Iterator, List, Optional, Union

import numpy as np
from google.protobuf import json_format

__all__ = [
    "SpectrumResult",
    "ThermoResult",
    "MagnetizationResult",
    "FitResult",
    "ModelFit",
    "FittedParameter",
    "LinkCoefficients",
    "engine_dict",
    "wrap",
]


def _pandas():
    try:
        import pandas
    except ImportError as e:  # pragma: no cover - pandas is installed in CI
        raise ImportError("to_dataframe needs pandas (Debian: apt-get install python3-pandas)") from e
    return pandas


def _array(values) -> np.ndarray:
    return np.asarray(list(values), dtype=float)


def engine_dict(report) -> Dict[str, Any]:
    """The EngineReport as a plain dict with snake_case keys and Python
    numbers (memory in bytes)."""
    return {
        "method": report.method,
        "route": report.route,
        "dimension": int(report.dimension),
        "sectors": [
            {"label": s.label, "sz": s.sz if s.HasField("sz") else None, "dimension": int(s.dimension)}
            for s in report.sectors
        ],
        "complex": bool(report.complex),
        "memory_bytes": int(report.memory_bytes),
        "diagonalizations": int(report.diagonalizations),
        "solver": report.solver,
        "warnings": list(report.warnings),
        "matvecs": int(report.matvecs),
        "symmetry": report.symmetry,
        # Eigenvectors computed and skipped (negligible Boltzmann weight),
        # and the largest share of a partition function the skipped carry.
        "eigenvectors": int(report.eigenvectors),
        "eigenvectors_skipped": int(report.eigenvectors_skipped),
        "neglected_weight": float(report.neglected_weight),
    }


def _powder_dict(msg, holder) -> Optional[Dict[str, Any]]:
    if not holder.HasField("powder"):
        return None
    return json_format.MessageToDict(msg, preserving_proto_field_name=True, including_default_value_fields=True)


class _Result:
    """What every result has: the message, the cluster name, the engine's
    report and its warnings, and the job it came from."""

    def __init__(self, message, job: Optional[str] = None):
        self.message = message
        self.job = job
        self.cluster_name = getattr(message, "cluster_name", "")
        self.engine = engine_dict(message.engine) if message.HasField("engine") else {}
        self.warnings: List[str] = list(self.engine.get("warnings", []))

    def to_dict(self) -> Dict[str, Any]:
        """The protojson of the result, as `frustum TASK --json` prints it."""
        return json_format.MessageToDict(self.message, including_default_value_fields=True)

    def __repr__(self) -> str:
        return f"<{type(self).__name__} {self.cluster_name!r}{' from ' + self.job if self.job else ''}>"


class SpectrumResult(_Result):
    """energies (K, ascending, with multiplicity); levels grouped as parallel
    arrays level_energy, degeneracy, sz and total_spin (NaN where not a good
    quantum number); field (T); truncated; total_states."""

    def __init__(self, message, job=None):
        super().__init__(message, job)
        self.field = _array(message.field)
        self.energies = _array(message.energies)
        self.level_energy = _array(l.energy for l in message.levels)
        self.degeneracy = np.asarray([l.degeneracy for l in message.levels], dtype=int)
        self.sz = _array(l.sz if l.HasField("sz") else np.nan for l in message.levels)
        self.total_spin = _array(l.total_spin if l.HasField("total_spin") else np.nan for l in message.levels)
        self.truncated = bool(message.truncated)
        self.total_states = int(message.total_states)

    def to_dataframe(self):
        """One row per level: E_K, degeneracy, Sz, S."""
        pd = _pandas()
        return pd.DataFrame({"E_K": self.level_energy, "degeneracy": self.degeneracy,
                             "Sz": self.sz, "S": self.total_spin})


class ThermoResult(_Result):
    """Parallel arrays, one entry per temperature: temperature (K), energy
    (K), specific_heat (k_B), entropy (k_B), magnetization (mu_B, along the
    field), susceptibility (dM/dB, mu_B/T); field (T) and
    susceptibility_direction."""

    def __init__(self, message, job=None):
        super().__init__(message, job)
        self.field = _array(message.field)
        self.temperature = _array(message.temperature)
        self.energy = _array(message.energy)
        self.specific_heat = _array(message.specific_heat)
        self.entropy = _array(message.entropy)
        self.magnetization = _array(message.magnetization)
        self.susceptibility = _array(message.susceptibility)
        self.susceptibility_direction = _array(message.susceptibility_direction)

    def to_dataframe(self):
        """One row per temperature: T_K, E_K, C_kB, S_kB, M_muB, chi_muB_per_T."""
        pd = _pandas()
        return pd.DataFrame({"T_K": self.temperature, "E_K": self.energy, "C_kB": self.specific_heat,
                             "S_kB": self.entropy, "M_muB": self.magnetization,
                             "chi_muB_per_T": self.susceptibility})


class MagnetizationResult(_Result):
    """M(B) curves: field (T, one per column), temperature (K, one per row),
    magnetization (2D, temperatures x fields, mu_B per cluster), groups
    (group name -> 2D array, mu_B), susceptibility (2D, mu_B/T, or None when
    not asked for), saturation and group_saturation (mu_B), direction, and
    powder (a dict, or None for one direction)."""

    def __init__(self, message, job=None):
        super().__init__(message, job)
        self.field = _array(message.field)
        self.direction = _array(message.direction)
        self.temperature = _array(c.temperature for c in message.curves)
        nt, nb = len(message.curves), len(message.field)
        self.magnetization = np.asarray([list(c.magnetization) for c in message.curves], dtype=float).reshape(nt, nb)
        names = sorted({g for c in message.curves for g in c.groups})
        self.groups: Dict[str, np.ndarray] = {
            g: np.asarray([list(c.groups[g].values) if g in c.groups else [np.nan] * nb for c in message.curves],
                          dtype=float).reshape(nt, nb)
            for g in names
        }
        if any(len(c.susceptibility) for c in message.curves):
            self.susceptibility: Optional[np.ndarray] = np.asarray(
                [list(c.susceptibility) for c in message.curves], dtype=float).reshape(nt, nb)
        else:
            self.susceptibility = None
        self.saturation = float(message.saturation)
        self.group_saturation = {k: float(v) for k, v in sorted(message.group_saturation.items())}
        self.powder = _powder_dict(message.powder, message)

    def curve(self, temperature: float) -> np.ndarray:
        """M(B) at the temperature of the result closest to the one given."""
        i = int(np.argmin(np.abs(self.temperature - temperature)))
        return self.magnetization[i]

    def to_dataframe(self):
        """Long format, one row per (T, B): T_K, B_T, M_muB, then
        chi_muB_per_T (when asked for) and M_GROUP_muB for every group."""
        pd = _pandas()
        nt, nb = self.magnetization.shape
        cols = {"T_K": np.repeat(self.temperature, nb), "B_T": np.tile(self.field, nt),
                "M_muB": self.magnetization.reshape(-1)}
        if self.susceptibility is not None:
            cols["chi_muB_per_T"] = self.susceptibility.reshape(-1)
        for g, m in self.groups.items():
            cols[f"M_{g}_muB"] = m.reshape(-1)
        return pd.DataFrame(cols)


@dataclass(frozen=True)
class FittedParameter:
    """A parameter at the optimum: value and standard error in unit."""

    name: str
    value: float
    error: float
    unit: str
    paths: List[str] = dataclass_field(default_factory=list)
    at_bound: bool = False

    def __str__(self) -> str:
        unit = "" if self.unit in ("", "1") else " " + self.unit
        bound = " (at a bound)" if self.at_bound else ""
        return f"{self.name} = {self.value:.6g} ± {self.error:.2g}{unit}{bound}"


@dataclass(frozen=True)
class LinkCoefficients:
    """a (scale) and c (offset) of y = a O + c, for all points
    (temperature None) or for one temperature (K)."""

    temperature: Optional[float]
    scale: float
    scale_error: float
    offset: float
    offset_error: float


class ModelFit:
    """One model (or baseline) at its optimum: chi_square, reduced_chi_square,
    degrees_of_freedom, aic, bic; parameters (name -> FittedParameter);
    links; curve, observable and residual at every data point (arrays);
    correlations ((a, b) -> value); converged, evaluations, warnings; cluster
    (the fitted model as a cluster dict, None for a baseline); engine."""

    def __init__(self, message):
        self.message = message
        self.name = message.name
        self.baseline = bool(message.baseline)
        self.chi_square = float(message.chi_square)
        self.degrees_of_freedom = int(message.degrees_of_freedom)
        self.reduced_chi_square = float(message.reduced_chi_square)
        self.aic = float(message.aic)
        self.bic = float(message.bic)
        self.parameters: Dict[str, FittedParameter] = {
            p.name: FittedParameter(p.name, p.value, p.error, p.unit, list(p.paths), bool(p.at_bound))
            for p in message.parameters
        }
        self.links = [
            LinkCoefficients(l.temperature if l.HasField("temperature") else None,
                             l.scale, l.scale_error, l.offset, l.offset_error)
            for l in message.links
        ]
        self.curve = _array(message.curve)
        self.observable = _array(message.observable)
        self.residual = _array(message.residual)
        self.correlations = {(c.a, c.b): c.value for c in message.correlations}
        self.converged = bool(message.converged)
        self.evaluations = int(message.evaluations)
        self.warnings = list(message.warnings)
        self.cluster = (json_format.MessageToDict(message.cluster) if message.HasField("cluster") else None)
        self.engine = engine_dict(message.engine) if message.HasField("engine") else {}
        self.powder = _powder_dict(message.powder, message)

    def __repr__(self) -> str:
        params = ", ".join(str(p) for p in self.parameters.values())
        return f"<ModelFit {self.name!r} chi2/dof={self.reduced_chi_square:.4g} aic={self.aic:.4g} {params}>"


class _Models:
    """The models of a fit in the server's order, by index or by name."""

    def __init__(self, models: List[ModelFit]):
        self._list = models
        self._by_name = {m.name: m for m in models}

    def __getitem__(self, key: Union[int, str]) -> ModelFit:
        if isinstance(key, str):
            try:
                return self._by_name[key]
            except KeyError:
                raise KeyError(f"no model {key!r}; the models are {list(self._by_name)}") from None
        return self._list[key]

    def __iter__(self) -> Iterator[ModelFit]:
        return iter(self._list)

    def __len__(self) -> int:
        return len(self._list)

    def __contains__(self, name) -> bool:
        return name in self._by_name

    def keys(self) -> List[str]:
        return list(self._by_name)

    def __repr__(self) -> str:
        return f"<models {self.keys()}>"


class FitResult:
    """The result of a fit: the data (temperature, field, value, sigma,
    scaling arrays), the models and baselines (.models by index or name),
    .best (the ModelFit with the lowest AIC; best_name its name),
    .warnings, and .table() for comparing the models."""

    def __init__(self, message, job: Optional[str] = None):
        self.message = message
        self.job = job
        self.observable = message.observable
        self.link = message.link
        self.data_name = message.data_name
        self.temperature = _array(message.temperature)
        self.field = _array(message.field)
        self.value = _array(message.value)
        self.sigma = _array(message.sigma)
        self.value_unit = message.value_unit
        self.scaling = _array(message.scaling)
        self.scaling_g = float(message.scaling_g)
        self.models = _Models([ModelFit(m) for m in message.models])
        self.best_name = message.best
        self.warnings = list(message.warnings)

    @property
    def best(self) -> Optional[ModelFit]:
        """The model with the lowest AIC, as the server chose it."""
        return self.models[self.best_name] if self.best_name in self.models else None

    def table(self):
        """One row per model: name, baseline, chi_square, degrees_of_freedom,
        reduced_chi_square, aic, delta_aic (to the best), bic, parameters
        (a readable summary). A DataFrame when pandas is importable, else a
        list of dicts."""
        best_aic = min((m.aic for m in self.models), default=0.0)
        rows = [{
            "name": m.name,
            "baseline": m.baseline,
            "chi_square": m.chi_square,
            "degrees_of_freedom": m.degrees_of_freedom,
            "reduced_chi_square": m.reduced_chi_square,
            "aic": m.aic,
            "delta_aic": m.aic - best_aic,
            "bic": m.bic,
            "parameters": "; ".join(str(p) for p in m.parameters.values()),
        } for m in self.models]
        try:
            import pandas as pd
        except ImportError:
            return rows
        return pd.DataFrame(rows)

    def to_dataframe(self):
        """Long format, one row per data point and model: T_K, B_T, y,
        sigma, x (the scaling variable), model, curve, residual."""
        pd = _pandas()
        n = len(self.value)
        sigma = self.sigma if len(self.sigma) == n else np.full(n, np.nan)
        frames = []
        for m in self.models:
            frames.append(pd.DataFrame({
                "T_K": self.temperature, "B_T": self.field, "y": self.value, "sigma": sigma,
                "x": self.scaling if len(self.scaling) == n else np.full(n, np.nan),
                "model": m.name, "curve": m.curve if len(m.curve) == n else np.full(n, np.nan),
                "residual": m.residual if len(m.residual) == n else np.full(n, np.nan),
            }))
        if not frames:
            return pd.DataFrame(columns=["T_K", "B_T", "y", "sigma", "x", "model", "curve", "residual"])
        return pd.concat(frames, ignore_index=True)

    def to_dict(self) -> Dict[str, Any]:
        return json_format.MessageToDict(self.message, including_default_value_fields=True)

    def __repr__(self) -> str:
        return f"<FitResult {self.observable!r} best={self.best_name!r} models={self.models.keys()}>"


_WRAPPERS = {
    "frustum.v1.SpectrumResult": SpectrumResult,
    "frustum.v1.ThermoResult": ThermoResult,
    "frustum.v1.MagnetizationResult": MagnetizationResult,
    "frustum.v1.FitResult": FitResult,
}


def wrap(message, job: Optional[str] = None):
    """The wrapper object of a result message."""
    return _WRAPPERS[message.DESCRIPTOR.full_name](message, job)
