"""The model kinds a path can have, each described once, looked up through one registry.

Every kind is a delay ``exp(-theta s)`` in series with a rational part of the structure

    K / (s^i (tau1 s + 1) (tau2 s + 1) ...)

where ``i`` is 1 for an integrating kind and 0 otherwise, and the lags are the kind's
``lag_parameters``. The rest of the package asks this registry for names, parameters, units and
structure instead of comparing kind names, so a new kind is one :class:`ModelKind` record here
plus its discretisation (:func:`robustff.engine.discretise.block_coefficients`, keyed by
:attr:`ModelKind.code`) and its tuning rules (:mod:`robustff.design.tuning`). The case file names
a kind by :attr:`ModelKind.name` (``model = "fopdt"``).
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = [
    "ParameterSpec",
    "ModelKind",
    "FOPDT",
    "SOPDT",
    "IPDT",
    "MODEL_KIND_REGISTRY",
    "model_kind",
    "registered_kinds",
    "kind_names",
    "ALL_PARAMETERS",
]

#: Every parameter a path model stores, whatever its kind (unused ones are zero).
ALL_PARAMETERS: tuple[str, ...] = ("gain", "time_constant", "time_constant_2", "dead_time")


@dataclass(frozen=True)
class ParameterSpec:
    """One parameter of a model kind.

    Parameters
    ----------
    name : str
        Attribute of :class:`robustff.plant.models.TransferModel` and key in the case file.
    symbol : str
        Short symbol used in one-line descriptions (``"K"``, ``"tau"``, ``"theta"``).
    unit : str
        Unit template with the fields ``{cv}`` (controlled-variable unit), ``{input}`` (unit of
        the path's input) and ``{time}`` (the case's time unit); see :meth:`unit_text`.
    description : str
        Short plain-language meaning.
    """

    name: str
    symbol: str
    unit: str
    description: str

    def unit_text(self, cv: str, source: str, time: str) -> str:
        """The unit with the case's units filled in, e.g. ``"degC per kg/s"``."""
        return self.unit.format(cv=cv, input=source, time=time)


_TIME = "{time}"
_DEAD_TIME = ParameterSpec("dead_time", "theta", _TIME, "pure delay (>= 0)")


@dataclass(frozen=True)
class ModelKind:
    """Everything the package needs to know about one model kind.

    Parameters
    ----------
    name : str
        Name in case files and on the command line (lower case).
    title : str
        Long name, e.g. ``"first order plus dead time"``.
    code : int
        Integer the compiled simulator dispatches on (unique).
    integrating : bool
        True for a non-self-regulating path (a pure integrator in the rational part).
    lag_parameters : tuple of str
        Names of the lag time constants, in series, largest-first by convention.
    parameters : tuple of ParameterSpec
        All parameters in stored order (gain first, dead time last).
    formula : str
        The transfer function in plain text.
    description : str
        One sentence on when the kind fits a process.
    """

    name: str
    title: str
    code: int
    integrating: bool
    lag_parameters: tuple[str, ...]
    parameters: tuple[ParameterSpec, ...]
    formula: str
    description: str

    @property
    def parameter_names(self) -> tuple[str, ...]:
        """Parameter names in stored order."""
        return tuple(p.name for p in self.parameters)

    @property
    def time_parameters(self) -> tuple[str, ...]:
        """The parameters measured in time units (lags, then the dead time)."""
        return (*self.lag_parameters, "dead_time")

    @property
    def order(self) -> int:
        """Number of states of the delay-free part (integrator plus lags)."""
        return int(self.integrating) + len(self.lag_parameters)

    def parameter(self, name: str) -> ParameterSpec:
        """The :class:`ParameterSpec` called ``name``.

        Raises
        ------
        KeyError
            If this kind has no such parameter.
        """
        for spec in self.parameters:
            if spec.name == name:
                return spec
        raise KeyError(f"a {self.name} model has no parameter {name!r}")


FOPDT = ModelKind(
    name="fopdt",
    title="first order plus dead time",
    code=0,
    integrating=False,
    lag_parameters=("time_constant",),
    parameters=(
        ParameterSpec("gain", "K", "{cv} per {input}", "steady-state gain (may be negative)"),
        ParameterSpec("time_constant", "tau", _TIME, "lag (>= 0)"),
        _DEAD_TIME,
    ),
    formula="K exp(-theta s) / (tau s + 1)",
    description="a self-regulating path with one dominant lag",
)

SOPDT = ModelKind(
    name="sopdt",
    title="second order plus dead time",
    code=1,
    integrating=False,
    lag_parameters=("time_constant", "time_constant_2"),
    parameters=(
        ParameterSpec("gain", "K", "{cv} per {input}", "steady-state gain (may be negative)"),
        ParameterSpec("time_constant", "tau", _TIME, "first lag (>= 0)"),
        ParameterSpec("time_constant_2", "tau2", _TIME, "second lag (>= 0)"),
        _DEAD_TIME,
    ),
    formula="K exp(-theta s) / ((tau s + 1)(tau2 s + 1))",
    description="a self-regulating path with two lags in series (an S-shaped step response)",
)

IPDT = ModelKind(
    name="ipdt",
    title="integrating plus dead time",
    code=2,
    integrating=True,
    lag_parameters=(),
    parameters=(
        ParameterSpec("gain", "K", "{cv} per {input} per {time}",
                      "slope gain: CV rate of change per unit input (may be negative)"),
        _DEAD_TIME,
    ),
    formula="K exp(-theta s) / s",
    description="a non-self-regulating path such as a level with a pumped outflow",
)

#: The registry: every model kind by name, in the order menus show them.
MODEL_KIND_REGISTRY: dict[str, ModelKind] = {kind.name: kind for kind in (FOPDT, SOPDT, IPDT)}

# Why check at import: the simulator dispatches on the code, so two kinds sharing one would
# silently simulate the wrong model.
if len({kind.code for kind in MODEL_KIND_REGISTRY.values()}) != len(MODEL_KIND_REGISTRY):
    raise RuntimeError("model kinds must have distinct simulator codes")


def model_kind(name: str) -> ModelKind:
    """The registered kind called ``name``.

    Raises
    ------
    KeyError
        With the known names, if ``name`` is not registered.
    """
    try:
        return MODEL_KIND_REGISTRY[name]
    except KeyError:
        known = ", ".join(MODEL_KIND_REGISTRY)
        raise KeyError(f"unknown model kind {name!r}; choose one of {known}") from None


def registered_kinds() -> tuple[ModelKind, ...]:
    """All registered kinds, in registry order."""
    return tuple(MODEL_KIND_REGISTRY.values())


def kind_names() -> tuple[str, ...]:
    """The names of all registered kinds, in registry order."""
    return tuple(MODEL_KIND_REGISTRY)
