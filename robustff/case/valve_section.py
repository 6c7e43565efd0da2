"""Reading the optional ``[valve]`` table of a case file (see ``docs/case-format.md``)."""

from __future__ import annotations

from robustff.case.fields import Problems, Table, as_table
from robustff.plant.valve import VALVE_CHARACTERISTICS, ValveModel

__all__ = ["read_valve"]

_KEYS = ("characteristic", "rangeability", "installed", "rate_limit", "deadband", "stiction_s",
         "stiction_j", "time_constant")


def read_valve(problems: Problems, value: object) -> ValveModel | None:
    """The valve of a ``[valve]`` table; None with the problems recorded (or when absent).

    ``value`` is the raw table (None when the case has no ``[valve]``: an ideal actuator).
    """
    if value is None:
        return None
    raw = as_table(problems, "valve", value, "[valve]")
    if raw is None:
        return None
    table = Table(problems, "valve", raw)
    before = len(problems)
    table.check_keys(_KEYS)
    default = ValveModel()
    characteristic = table.text("characteristic", default.characteristic, VALVE_CHARACTERISTICS)
    rangeability = table.number("rangeability", default.rangeability, positive=True)
    if rangeability is not None and rangeability <= 1.0:
        problems.add("valve.rangeability", "must be > 1 (the ratio of the largest to the "
                     "smallest controllable flow)", rangeability)
    if characteristic != "equal-percentage":
        table.forbid("rangeability", "used only with characteristic = 'equal-percentage'")
    installed = _read_installed(problems, table, characteristic)
    numbers = {
        key: table.number(key, 0.0, minimum=0.0, what=what)
        for key, what in (("rate_limit", "% of travel per time unit, 0 for no limit"),
                          ("deadband", "% of travel"), ("stiction_s", "% of travel"),
                          ("stiction_j", "% of travel"), ("time_constant", "time units"))
    }
    for key in ("deadband", "stiction_s", "stiction_j"):
        amount = numbers[key]
        if amount is not None and amount >= 100.0:
            problems.add(f"valve.{key}", "must be below 100 (% of travel)", amount)
    if (numbers["deadband"] or 0.0) > 0.0 and (numbers["stiction_s"] or 0.0) > 0.0:
        problems.add("valve.deadband", "give either a deadband or stiction (stiction_s already "
                     "includes the deadband)", numbers["deadband"])
    if (numbers["stiction_j"] or 0.0) > 0.0 and not (numbers["stiction_s"] or 0.0) > 0.0:
        problems.add("valve.stiction_j", "a slip jump needs stiction_s > 0 (the band the "
                     "stem sticks in)", numbers["stiction_j"])
    if len(problems) > before or characteristic is None or rangeability is None:
        return None
    return ValveModel(characteristic, rangeability, installed,
                      **{key: float(v) for key, v in numbers.items()})  # type: ignore[arg-type]


def _read_installed(
    problems: Problems, table: Table, characteristic: str | None
) -> tuple[tuple[float, float], ...]:
    if characteristic != "installed":
        table.forbid("installed", "used only with characteristic = 'installed'")
        return ()
    if not table.has("installed"):
        problems.add("valve.installed", "missing key (a list of [position %, flow fraction] "
                     "pairs, with characteristic = 'installed')")
        return ()
    value = table.raw["installed"]
    rows = value if isinstance(value, list) else None
    pairs: list[tuple[float, float]] = []
    for row in rows or []:
        ok = (isinstance(row, list) and len(row) == 2
              and all(isinstance(v, int | float) and not isinstance(v, bool) for v in row))
        if not ok:
            rows = None
            break
        pairs.append((float(row[0]), float(row[1])))
    if rows is None or len(pairs) < 2:
        problems.add("valve.installed", "must be a list of at least two [position %, flow "
                     "fraction] pairs", value)
        return ()
    positions = [p for p, _ in pairs]
    flows = [f for _, f in pairs]
    if positions[0] != 0.0 or positions[-1] != 100.0 or any(
            b <= a for a, b in zip(positions, positions[1:], strict=False)):
        problems.add("valve.installed", "positions must increase from 0 to 100 (% of travel)",
                     value)
    elif any(not 0.0 <= f <= 1.0 for f in flows) or any(
            b < a for a, b in zip(flows, flows[1:], strict=False)):
        problems.add("valve.installed", "flow fractions must lie in 0..1 and never decrease",
                     value)
    return tuple(pairs)
