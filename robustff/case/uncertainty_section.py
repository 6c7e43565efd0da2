"""Read the ``[uncertainty]`` section of a case file (private part of the case loader).

Two spellings of an uncertain parameter are accepted and mean the same thing::

    [uncertainty]
    "process.gain" = { relative = 0.2 }      # quoted key containing a dot

    [uncertainty.process]
    gain = { relative = 0.2 }                # nested table (or unquoted dotted key process.gain)

A distribution that could produce a physically impossible value (a negative time constant, dead
time or noise level; a process gain of zero or of the wrong sign) is refused: bounded
distributions must stay in range, unbounded ones need a ``clip``.
"""

from __future__ import annotations

import math
from typing import Any

from robustff.case.fields import Problems, Table, as_table, check_number, join
from robustff.case.sampling import copula_factor
from robustff.case.schema import (
    DISTRIBUTION_KINDS,
    Correlation,
    Distribution,
    UncertainParameter,
)
from robustff.errors import CaseError
from robustff.plant.balance_plant import BalancePlant
from robustff.plant.models import MODEL_PARAMETERS, SENSOR_PARAMETERS, SensorModel, TransferModel
from robustff.plant.valve import VALVE_PARAMETERS, ValveModel

__all__ = ["read_uncertainty", "NON_NEGATIVE_PARAMETERS", "UNCERTAIN_BLOCKS", "INVALID_BLOCK",
           "support", "check_balance_support", "Models"]

#: Stands for a ``[valve]`` or ``[secondary]`` table that is present but has problems (None:
#: absent), so that its uncertain parameters are not also said to lack their table.
INVALID_BLOCK = object()
UNCERTAIN_BLOCKS: tuple[str, ...] = ("process", "disturbance", "sensor", "valve", "secondary")
NON_NEGATIVE_PARAMETERS: dict[str, str] = {
    "time_constant": "a time constant",
    "time_constant_2": "a time constant",
    "dead_time": "a dead time",
    "noise_std": "a noise standard deviation",
    "rate_limit": "a rate limit",
    "deadband": "a deadband",
    "stiction_s": "a stiction band",
    "stiction_j": "a slip jump",
    "rangeability": "a rangeability",
}
_SHAPES: dict[str, tuple[int, str]] = {
    "uniform": (2, "[low, high]"),
    "normal": (2, "[mean, std]"),
    "triangular": (3, "[low, mode, high]"),
    "lognormal": (2, "[median, factor]"),
}
_CHOICES = (
    "uniform = [low, high], relative = r, normal = [mean, std], "
    "triangular = [low, mode, high] or lognormal = [median, factor]"
)
_HOW = 'name it "block.parameter", e.g. "process.gain" = { relative = 0.2 }'

Models = dict[str, TransferModel | SensorModel | ValveModel | BalancePlant | object | None]
Result = tuple[tuple[UncertainParameter, ...] | None, tuple[Correlation, ...] | None]


def read_uncertainty(problems: Problems, value: object, models: Models) -> Result:
    """Uncertain parameters (in file order) and rank correlations, or ``None`` on problems."""
    raw = as_table(problems, "uncertainty", value, "[uncertainty]")
    if raw is None:
        return None, None
    before = len(problems)
    entries = _flatten(problems, raw)
    parameters: list[UncertainParameter] = []
    for key, item in entries:
        path = f"uncertainty.{key}"
        known, nominal = _check_key(problems, path, key, models)
        distribution = _read_distribution(problems, path, item)
        model = models.get(key.partition(".")[0])
        if known and distribution is not None and nominal is not None:
            if isinstance(model, BalancePlant):
                check_balance_support(problems, path, model, key.partition(".")[2],
                                      distribution, nominal)
            else:
                _check_physical(problems, path, key, distribution, nominal)
        if distribution is not None:
            parameters.append(UncertainParameter(key, distribution))
    correlations = _read_correlations(problems, raw.get("correlation"), [k for k, _ in entries])
    if len(problems) > before or correlations is None:
        return None, None
    return tuple(parameters), correlations


def _flatten(problems: Problems, raw: dict[str, Any]) -> list[tuple[str, Any]]:
    """``(key, distribution table)`` pairs from both spellings, duplicates reported."""
    entries: list[tuple[str, Any]] = []
    for key, item in raw.items():
        if key == "correlation":
            continue
        if "." in key:
            entries.append((key, item))
        elif key in UNCERTAIN_BLOCKS and isinstance(item, dict) and not _is_distribution(item):
            entries.extend(_nested(f"{key}", item))
        else:
            problems.add(join("uncertainty", key), f"not an uncertain parameter: {_HOW}", item)
    seen: set[str] = set()
    unique: list[tuple[str, Any]] = []
    for key, item in entries:
        if key in seen:
            problems.add(f"uncertainty.{key}",
                         "given twice (as a quoted key and as a nested table?)")
            continue
        seen.add(key)
        unique.append((key, item))
    return unique


def _nested(prefix: str, table: dict[str, Any]) -> list[tuple[str, Any]]:
    """Keys of nested tables such as ``[uncertainty.disturbance.feed.sensor]``, flattened."""
    entries: list[tuple[str, Any]] = []
    for name, sub in table.items():
        if isinstance(sub, dict) and sub and not _is_distribution(sub):
            entries.extend(_nested(f"{prefix}.{name}", sub))
        else:
            entries.append((f"{prefix}.{name}", sub))
    return entries


def _is_distribution(item: dict[str, Any]) -> bool:
    return any(key in DISTRIBUTION_KINDS or key == "clip" for key in item)


def _check_key(
    problems: Problems, path: str, key: str, models: Models
) -> tuple[bool, float | None]:
    """Whether ``key`` names a parameter the case's models have, and its nominal value."""
    owner, name = _owner(key, models)
    block = "sensor" if owner.endswith("sensor") else owner.partition(".")[0]
    if models.get(owner) is INVALID_BLOCK:
        return False, None  # the table's own problems are reported with it
    if block not in UNCERTAIN_BLOCKS:
        problems.add(path, f"unknown block {block!r}: uncertain parameters belong to "
                     f"{', '.join(UNCERTAIN_BLOCKS)}; {_HOW}")
        return False, None
    balance = models.get("process")
    if isinstance(balance, BalancePlant) and block in ("process", "disturbance"):
        return _check_balance_key(problems, path, block, key.partition(".")[2], balance)
    if owner not in models and block in ("disturbance", "sensor"):
        named = sorted({key.split(".")[1] for key in models if key.startswith("disturbance.")})
        how = ("the case names its disturbances: write disturbance.NAME.parameter or "
               f"disturbance.NAME.sensor.parameter with NAME one of {', '.join(named)}"
               if named else "the case has one disturbance: write disturbance.parameter "
               "or sensor.parameter")
        problems.add(path, f"no such disturbance parameter; {how}")
        return False, None
    model = models.get(owner)
    if block == "secondary" and model is None:
        problems.add(path, "the case has no [secondary] loop; add one to make its parameters "
                     "uncertain")
        return False, None
    if block == "valve":
        if model is None:
            problems.add(path, "the case has no [valve]; add one to make its parameters "
                         "uncertain")
            return False, None
        if name not in VALVE_PARAMETERS:
            problems.add(path, f"the valve has no parameter {name!r} "
                         f"(it has {', '.join(VALVE_PARAMETERS)})")
            return False, None
    elif block == "sensor":
        if name not in SENSOR_PARAMETERS:
            problems.add(path, f"the sensor has no parameter {name!r} "
                         f"(it has {', '.join(SENSOR_PARAMETERS)})")
            return False, None
    elif model is None:
        return False, None  # the model's own problems are reported with it
    elif name not in MODEL_PARAMETERS[model.kind]:  # type: ignore[attr-defined]
        kind = model.kind  # type: ignore[attr-defined]
        problems.add(path, f"the {owner} model ({kind!r}) has no parameter {name!r} "
                     f"(it has {', '.join(MODEL_PARAMETERS[kind])})")
        return False, None
    if model is None:
        return True, None
    return True, float(getattr(model, name))


def _owner(key: str, models: Models) -> tuple[str, str]:
    """The model a key belongs to (its longest prefix in ``models``) and the parameter name."""
    prefix, _, name = key.rpartition(".")
    if prefix in models:
        return prefix, name
    block, _, rest = key.partition(".")
    return block, rest
def _check_balance_key(problems: Problems, path: str, block: str, name: str,
                       plant: BalancePlant) -> tuple[bool, float | None]:
    """A balance plant's uncertain parameters are its physical ones, ``process.NAME``."""
    names = ", ".join(plant.parameter_names())
    if block == "disturbance":
        problems.add(path, f"the disturbance paths of a {plant.KIND} follow from its balances; "
                     f"make its physical parameters or operating point uncertain instead "
                     f"(process.{plant.DISTURBANCES[0]}, ...: {names})")
        return False, None
    if name not in plant.parameter_names():
        problems.add(path, f"a {plant.KIND} has no parameter {name!r} (it has {names})")
        return False, None
    return True, plant.parameters()[name]


def check_balance_support(problems: Problems, path: str, plant: BalancePlant, name: str,
                          distribution: Distribution, nominal: float) -> None:
    """Both ends of a balance parameter's distribution must be physical values."""
    parameter = plant.parameter(name)
    low, high = support(distribution, nominal)
    for end in (low, high):
        why = parameter.violation(end) if math.isfinite(end) else None
        if why is not None:
            problems.add(join(path, distribution.kind), f"can give {end:g}, but the "
                         f"{parameter.meaning} {why}", _written(distribution))
            return


def _read_distribution(problems: Problems, path: str, item: object) -> Distribution | None:
    raw = as_table(problems, path, item, "as { relative = 0.2 } or a table")
    if raw is None:
        return None
    table = Table(problems, path, raw)
    before = len(problems)
    table.check_keys((*DISTRIBUTION_KINDS, "clip"))
    kinds = [key for key in raw if key in DISTRIBUTION_KINDS]
    if not kinds:
        problems.add(path, f"missing distribution: give one of {_CHOICES}")
        return None
    if len(kinds) > 1:
        problems.add(path, f"give only one distribution (got {' and '.join(kinds)})")
        return None
    kind = kinds[0]
    if kind == "relative":
        r = table.number("relative", positive=True)
        params: tuple[float, ...] | None = None if r is None else (r,)
    else:
        count, names = _SHAPES[kind]
        params = table.numbers(kind, count, names)
    clip = None
    if "clip" in raw:
        if kind in ("normal", "lognormal"):
            clip = table.numbers("clip", 2, "[low, high]")
        else:
            table.forbid("clip", f"clip applies only to normal and lognormal (a {kind} "
                         "distribution is bounded already)")
    if params is not None:
        _check_shape(problems, join(path, kind), kind, params, clip)
    if len(problems) > before or params is None:
        return None
    return Distribution(kind, params, clip if clip is None else (clip[0], clip[1]))


def _check_shape(
    problems: Problems, path: str, kind: str, params: tuple[float, ...],
    clip: tuple[float, ...] | None,
) -> None:
    if kind == "uniform" and not params[0] < params[1]:
        problems.add(path, "low must be below high", list(params))
    elif kind == "normal" and params[1] <= 0.0:
        problems.add(path, "the standard deviation (second number) must be > 0", list(params))
    elif kind == "triangular" and not (params[0] <= params[1] <= params[2] > params[0]):
        problems.add(path, "must satisfy low <= mode <= high with low < high", list(params))
    elif kind == "lognormal" and (params[0] <= 0.0 or params[1] <= 1.0):
        problems.add(path, "the median must be > 0 and the factor (exp of the standard deviation "
                     "of the log) must be > 1", list(params))
    elif clip is not None:
        clip_path = path.rsplit(".", 1)[0] + ".clip"
        if not clip[0] < clip[1]:
            problems.add(clip_path, "low must be below high", list(clip))
        elif not clip[0] <= params[0] <= clip[1]:
            centre = "mean" if kind == "normal" else "median"
            problems.add(clip_path, f"must contain the {centre} ({params[0]:g})", list(clip))


def support(distribution: Distribution, nominal: float) -> tuple[float, float]:
    """Smallest and largest value a distribution can produce (clip included)."""
    kind, params, clip = distribution.kind, distribution.params, distribution.clip
    if kind == "uniform":
        return params[0], params[1]
    if kind == "triangular":
        return params[0], params[2]
    if kind == "relative":
        ends = sorted((nominal * (1 - params[0]), nominal * (1 + params[0])))
        return ends[0], ends[1]
    tiny = math.nextafter(0.0, 1.0)  # a lognormal never reaches zero
    low, high = (-math.inf, math.inf) if kind == "normal" else (tiny, math.inf)
    if clip is not None:
        low, high = max(low, clip[0]), min(high, clip[1])
    return low, high


def _check_physical(
    problems: Problems, path: str, key: str, distribution: Distribution, nominal: float
) -> None:
    kind = distribution.kind
    where, value = join(path, kind), _written(distribution)
    if kind == "relative" and nominal == 0.0:
        problems.add(where, f"a relative spread of a nominal value of 0 gives no spread; use "
                     f"uniform or normal for {key}", value)
        return
    low, high = support(distribution, nominal)
    name = key.rsplit(".", 1)[-1]
    unbounded = kind in ("normal", "lognormal") and distribution.clip is None
    reach = f"can give {low:g}" if not unbounded else f"a {kind} distribution without clip can give"
    if name in NON_NEGATIVE_PARAMETERS and low < 0.0:
        what = NON_NEGATIVE_PARAMETERS[name]
        if unbounded:
            reach, fix = "a normal distribution without clip can give negative values", (
                "add clip = [0, high] or use lognormal")
        elif kind == "relative":
            fix = "use relative < 1"
        elif distribution.clip is not None:
            fix = "use a clip whose low bound is at or above 0"
        else:
            fix = "keep the range at or above 0"
        problems.add(where, f"{reach}, but {what} cannot be negative: {fix}", value)
    if key == "valve.rangeability" and low <= 1.0:
        problems.add(where, f"can give {low:g}, but a rangeability must stay above 1", value)
    if key == "process.gain" and (low <= 0.0 <= high or (low > 0.0) != (nominal > 0.0)):
        sign = "positive" if nominal > 0.0 else "negative"
        if kind == "lognormal" and nominal < 0.0:
            reach = "a lognormal distribution gives positive values only"
        elif unbounded:
            reach = "a normal distribution without clip reaches zero and the opposite sign"
        else:
            reach = f"this distribution reaches {low:g} .. {high:g}"
        problems.add(where, f"the process gain must stay {sign} like its nominal value "
                     f"({nominal:g}), but {reach}; the controller would act in the wrong "
                     "direction or not at all", value)


def _written(distribution: Distribution) -> object:
    params = list(distribution.params)
    return params[0] if distribution.kind == "relative" else params


def _read_correlations(
    problems: Problems, value: object, keys: list[str]
) -> tuple[Correlation, ...] | None:
    if value is None:
        return ()
    if isinstance(value, dict) or not isinstance(value, list) or not value:
        problems.add("uncertainty.correlation", "must be written as one or more "
                     "[[uncertainty.correlation]] tables (double brackets)", value)
        return None
    before = len(problems)
    result: list[Correlation] = []
    pairs: set[frozenset[str]] = set()
    for index, item in enumerate(value):
        path = f"uncertainty.correlation[{index + 1}]"
        correlation = _read_correlation(problems, path, item, keys)
        if correlation is None:
            continue
        pair = frozenset((correlation.first, correlation.second))
        if pair in pairs:
            problems.add(path, "this pair of parameters is correlated twice",
                         f"{correlation.first}, {correlation.second}")
        pairs.add(pair)
        result.append(correlation)
    if len(problems) == before:
        _check_consistent(problems, keys, result)
    return tuple(result) if len(problems) == before else None


def _read_correlation(
    problems: Problems, path: str, item: object, keys: list[str]
) -> Correlation | None:
    raw = as_table(problems, path, item, "[[uncertainty.correlation]]")
    if raw is None:
        return None
    table = Table(problems, path, raw)
    before = len(problems)
    table.check_keys(("first", "second", "rank_correlation"))
    names = [table.text("first"), table.text("second")]
    for slot, name in zip(("first", "second"), names, strict=True):
        if name is not None and name not in keys:
            listed = ", ".join(keys) or "none"
            problems.add(join(path, slot), f"not an uncertain parameter of this case "
                         f"(uncertain: {listed})", name)
    if names[0] is not None and names[0] == names[1]:
        problems.add(join(path, "second"), "must differ from first", names[1])
    rho = None
    if "rank_correlation" in raw:
        rho = check_number(problems, join(path, "rank_correlation"), raw["rank_correlation"])
        if rho is not None and not -1.0 < rho < 1.0:
            problems.add(join(path, "rank_correlation"), "must lie strictly between -1 and 1", rho)
    else:
        problems.add(join(path, "rank_correlation"), "missing key (Spearman rank correlation, "
                     "between -1 and 1)")
    if len(problems) > before or None in names or rho is None:
        return None
    return Correlation(names[0], names[1], rho)  # type: ignore[arg-type]


def _check_consistent(problems: Problems, keys: list[str], correlations: list[Correlation]) -> None:
    try:
        copula_factor(keys, correlations)
    except CaseError as exc:
        problems.add("uncertainty.correlation", str(exc),
                     [c.rank_correlation for c in correlations])
