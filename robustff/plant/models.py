"""Nominal plant models and batches of perturbed plants.

Three model kinds describe a path from an input to the controlled variable (CV):

* ``"fopdt"``: first order plus dead time, ``K exp(-theta s) / (tau s + 1)``;
* ``"sopdt"``: second order plus dead time, ``K exp(-theta s) / ((tau s + 1)(tau2 s + 1))``;
* ``"ipdt"``: integrating plus dead time, ``K exp(-theta s) / s`` (``K`` is the CV slope per unit
  input, in CV units per input unit per time unit).

All times are in the case's time unit. A time constant of zero means "no lag". The kinds are
described once in :mod:`robustff.plant.kinds`; this module reads their structure from there.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from robustff.plant.balance_batch import BalanceBatch
from robustff.plant.kinds import ALL_PARAMETERS, ModelKind, kind_names, model_kind, registered_kinds
from robustff.plant.valve import VALVE_PARAMETERS, ValveModel

__all__ = [
    "MODEL_KINDS",
    "MODEL_PARAMETERS",
    "SENSOR_PARAMETERS",
    "KIND_CODES",
    "TransferModel",
    "SensorModel",
    "PlantBatch",
]

#: Names of the registered model kinds (views of :mod:`robustff.plant.kinds`).
MODEL_KINDS: tuple[str, ...] = kind_names()

#: Parameters each model kind has, in the order they are stored.
MODEL_PARAMETERS: dict[str, tuple[str, ...]] = {
    kind.name: kind.parameter_names for kind in registered_kinds()
}

SENSOR_PARAMETERS: tuple[str, ...] = ("time_constant", "noise_std")

#: Integer codes used by the compiled simulator.
KIND_CODES: dict[str, int] = {kind.name: kind.code for kind in registered_kinds()}


@dataclass(frozen=True)
class TransferModel:
    """A path model of one registered kind (FOPDT, SOPDT, IPDT, ...).

    Parameters
    ----------
    kind : str
        Model structure: a name in :data:`robustff.plant.kinds.MODEL_KIND_REGISTRY`.
    gain : float
        Steady-state gain (CV units per input unit); for ``"ipdt"`` the slope gain
        (CV units per input unit per time unit). May be negative.
    time_constant : float
        First lag, time units (>= 0). Unused for ``"ipdt"``.
    time_constant_2 : float
        Second lag, time units (>= 0). Used only by ``"sopdt"``.
    dead_time : float
        Pure delay, time units (>= 0).
    """

    kind: str
    gain: float
    time_constant: float = 0.0
    time_constant_2: float = 0.0
    dead_time: float = 0.0

    @property
    def spec(self) -> ModelKind:
        """The registry record of this model's kind."""
        return model_kind(self.kind)

    @property
    def integrating(self) -> bool:
        """True for an integrating (non-self-regulating) path."""
        return self.spec.integrating

    @property
    def lags(self) -> tuple[float, ...]:
        """The kind's lag time constants, time units (empty for a kind without lags)."""
        return tuple(float(getattr(self, name)) for name in self.spec.lag_parameters)

    @property
    def total_lag(self) -> float:
        """Sum of the lags, time units (zero for a kind without lags)."""
        return float(sum(self.lags))

    def parameters(self) -> dict[str, float]:
        """The parameters this kind has, by name."""
        return {name: float(getattr(self, name)) for name in self.spec.parameter_names}

    def with_parameter(self, name: str, value: float) -> TransferModel:
        """A copy with one parameter changed."""
        if name not in self.spec.parameter_names:
            raise KeyError(f"a {self.kind} model has no parameter {name!r}")
        values = {key: float(getattr(self, key)) for key in ALL_PARAMETERS}
        values[name] = float(value)
        return TransferModel(self.kind, **values)

    def describe(self, time_unit: str = "") -> str:
        """A one-line description such as ``2.0 e^(-3 s)/(10 s + 1)`` with the time unit."""
        unit = f" {time_unit}" if time_unit else ""
        spec = self.spec
        parts = ["integrating"] if spec.integrating else []
        parts += [f"{spec.parameter(name).symbol} = {getattr(self, name):g}{unit}"
                  for name in spec.lag_parameters]
        lag_text = ", ".join(parts)
        head = f"{self.kind.upper()}: K = {self.gain:g}, {lag_text}"
        return f"{head}, dead time = {self.dead_time:g}{unit}"

    def to_control(self, pade_order: int | None = None) -> Any:
        """The model as a python-control transfer function.

        Parameters
        ----------
        pade_order : int, optional
            When given, the dead time is replaced by a Pade approximation of this order;
            otherwise the delay-free part is returned (use :meth:`frequency_response` for the
            exact delay).

        Notes
        -----
        python-control is imported here, not at module import, to keep batch runs fast.
        """
        import control

        s = control.tf("s")
        den = s if self.integrating else None
        for tau in self.lags:
            den = tau * s + 1 if den is None else den * (tau * s + 1)
        rational = control.tf([self.gain], [1.0]) if den is None else self.gain / den
        if pade_order is None or self.dead_time == 0.0:
            return rational
        num, den = control.pade(self.dead_time, pade_order)
        return rational * control.tf(num, den)

    def frequency_response(self, omega: np.ndarray) -> np.ndarray:
        """Complex frequency response with the exact dead time.

        Parameters
        ----------
        omega : ndarray, shape (F,)
            Angular frequencies, rad per time unit.

        Returns
        -------
        ndarray, shape (F,), complex
        """
        jw = 1j * np.asarray(omega, dtype=float)
        delay = np.exp(-jw * self.dead_time)
        den = jw if self.integrating else None
        for tau in self.lags:
            den = tau * jw + 1 if den is None else den * (tau * jw + 1)
        return self.gain * delay if den is None else self.gain * delay / den


@dataclass(frozen=True)
class SensorModel:
    """The transmitter of the measured disturbance.

    Parameters
    ----------
    time_constant : float
        First-order lag of the transmitter, time units (>= 0).
    noise_std : float
        Standard deviation of white measurement noise added at each controller sample,
        disturbance units (>= 0).
    """

    time_constant: float = 0.0
    noise_std: float = 0.0


def _column(value: float, n: int) -> np.ndarray:
    return np.full(n, float(value), dtype=np.float64)


@dataclass
class PlantBatch:
    """Parameters of ``n`` perturbed plants, one entry per sample (arrays of shape (n,)).

    The model kinds are shared by all samples; the numbers differ. Build one with
    :meth:`from_nominal` and overwrite the uncertain parameters with :meth:`set_parameter`.
    Keys follow the case file: ``"process.gain"``, ``"disturbance.dead_time"``,
    ``"sensor.time_constant"`` ...
    """

    process_kind: str
    disturbance_kind: str
    values: dict[str, np.ndarray] = field(default_factory=dict)
    #: The valve's characteristic (shared); its numbers are the ``valve.*`` values. None: an
    #: ideal actuator.
    valve: ValveModel | None = None
    #: The secondary loop path's kind; None without a secondary loop.
    secondary_kind: str | None = None
    #: Every disturbance path: its kind, the prefix of its keys (``"disturbance"`` or
    #: ``"disturbance.NAME"``) and of its transmitter's (``"sensor"`` or
    #: ``"disturbance.NAME.sensor"``), and whether it is measured. Empty: the one path
    #: ``(disturbance_kind, "disturbance", "sensor", True)``.
    disturbance_paths: tuple[tuple[str, str, str, bool], ...] = ()
    #: Sampled plants built from balances (their physical numbers; the path models above are
    #: then each sample's linearisation at its operating point). None for transfer functions.
    balance: BalanceBatch | None = None

    @property
    def paths(self) -> tuple[tuple[str, str, str, bool], ...]:
        """:attr:`disturbance_paths`, the single unnamed path when it is empty."""
        return self.disturbance_paths or ((self.disturbance_kind, "disturbance", "sensor", True),)

    @property
    def size(self) -> int:
        """Number of samples."""
        return int(next(iter(self.values.values())).shape[0])

    @classmethod
    def from_nominal(
        cls, process: TransferModel, disturbance: TransferModel, sensor: SensorModel, n: int,
        valve: ValveModel | None = None, secondary: TransferModel | None = None,
        named: tuple[tuple[str, TransferModel, SensorModel, bool], ...] = (),
    ) -> PlantBatch:
        """``n`` copies of the nominal plant.

        ``valve``: None for an ideal actuator; ``secondary``: the secondary loop's path, None
        without one; ``named``: ``(name, path, transmitter, measured)`` of every named
        disturbance (then ``disturbance`` and ``sensor`` are not used), empty for the single
        unnamed one.
        """
        values: dict[str, np.ndarray] = {}
        if named:
            inputs = tuple((f"disturbance.{name}", f"disturbance.{name}.sensor", model, meter,
                            measured) for name, model, meter, measured in named)
        else:
            inputs = (("disturbance", "sensor", disturbance, sensor, True),)
        blocks = [("process", process), *((prefix, model) for prefix, _, model, _, _ in inputs)]
        # Without a secondary loop its columns hold a zero-gain FOPDT (never simulated).
        blocks.append(("secondary", secondary or TransferModel("fopdt", 0.0, 0.0, 0.0, 0.0)))
        for block, model in blocks:
            for name in ALL_PARAMETERS:
                # Parameters the kind does not have are stored as zero ("no lag").
                used = name in model.spec.parameter_names
                values[f"{block}.{name}"] = _column(getattr(model, name) if used else 0.0, n)
        for _, prefix, _, meter, _ in inputs:
            values[f"{prefix}.time_constant"] = _column(meter.time_constant, n)
            values[f"{prefix}.noise_std"] = _column(meter.noise_std, n)
        for name in VALVE_PARAMETERS:
            values[f"valve.{name}"] = _column(getattr(valve or ValveModel(), name), n)
        paths = (tuple((model.kind, prefix, meter_prefix, measured)
                       for prefix, meter_prefix, model, _, measured in inputs) if named else ())
        return cls(process.kind, inputs[0][2].kind, values, valve,
                   secondary.kind if secondary is not None else None, paths)

    def set_parameter(self, key: str, column: np.ndarray) -> None:
        """Overwrite one parameter for all samples.

        Raises
        ------
        KeyError
            If ``key`` is not a plant parameter.
        """
        if key not in self.values:
            raise KeyError(key)
        column = np.asarray(column, dtype=np.float64)
        if column.shape != (self.size,):
            raise ValueError(f"{key}: expected shape ({self.size},), got {column.shape}")
        self.values[key] = column

    def subset(self, index: np.ndarray | slice) -> PlantBatch:
        """The plants selected by ``index``."""
        return PlantBatch(
            self.process_kind,
            self.disturbance_kind,
            {key: np.ascontiguousarray(col[index]) for key, col in self.values.items()},
            self.valve,
            self.secondary_kind,
            self.disturbance_paths,
            self.balance.subset(index) if self.balance is not None else None,
        )

    def model(self, block: str, i: int) -> TransferModel:
        """Sample ``i`` of ``block`` ("process", "disturbance" or a disturbance path's prefix
        such as "disturbance.feed") as a :class:`TransferModel`."""
        kinds = {prefix: kind for kind, prefix, _, _ in self.paths}
        kind = self.process_kind if block == "process" else kinds.get(block,
                                                                       self.disturbance_kind)
        return TransferModel(
            kind,
            float(self.values[f"{block}.gain"][i]),
            float(self.values[f"{block}.time_constant"][i]),
            float(self.values[f"{block}.time_constant_2"][i]),
            float(self.values[f"{block}.dead_time"][i]),
        )
