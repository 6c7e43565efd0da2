"""Reading the optional ``[secondary]`` table: a secondary (flow) loop inside the primary loop."""

from __future__ import annotations

from robustff.case.fields import REQUIRED, Problems, Table, as_table
from robustff.case.schema import SecondarySpec
from robustff.plant.models import MODEL_KINDS, MODEL_PARAMETERS, TransferModel

__all__ = ["read_secondary", "SECONDARY_CONTROLLER_KEYS"]

#: Keys of the secondary controller (the others are its path model's).
SECONDARY_CONTROLLER_KEYS: tuple[str, ...] = (
    "tuning", "closed_loop_time", "kc", "ti", "output_low", "output_high", "output_bias",
    "scans_per_primary",
)


def read_secondary(problems: Problems, value: object, substeps: int | None) -> SecondarySpec | None:
    """The secondary loop of a ``[secondary]`` table (None when absent or with problems).

    ``substeps`` is ``[simulation] substeps`` (None when it had problems): a secondary scan must
    be a whole number of internal steps.
    """
    if value is None:
        return None
    raw = as_table(problems, "secondary", value, "[secondary]")
    if raw is None:
        return None
    table = Table(problems, "secondary", raw)
    before = len(problems)
    kind = table.text("model", choices=MODEL_KINDS)
    if kind is None:
        return None
    names = MODEL_PARAMETERS[kind]
    table.check_keys(("model", *names, *SECONDARY_CONTROLLER_KEYS), f"for model = {kind!r}")
    values = {name: table.number(name, nonzero=True) if name == "gain" else
              table.number(name, minimum=0.0, what="a number >= 0, in the case's time unit")
              for name in names}
    tuning = table.text("tuning", "simc", ("simc", "manual"))
    manual = tuning == "manual"
    spec_kwargs = {
        "closed_loop_time": table.number("closed_loop_time", None, positive=True),
        "kc": table.number("kc", REQUIRED if manual else None, nonzero=True,
                           what="the secondary controller gain, % per flow unit"),
        "ti": table.number("ti", REQUIRED if manual else None, positive=True,
                           what="the secondary integral time, time units"),
        "output_low": table.number("output_low", 0.0),
        "output_high": table.number("output_high", 100.0),
        "output_bias": table.number("output_bias", 50.0),
        "scans_per_primary": table.integer("scans_per_primary", 1, 1, 1000),
    }
    if not manual:
        for key in ("kc", "ti"):
            table.forbid(key, "used only with tuning = 'manual'")
    else:
        table.forbid("closed_loop_time", "not used with tuning = 'manual'; remove it")
    low, high, bias = (spec_kwargs[k] for k in ("output_low", "output_high", "output_bias"))
    if low is not None and high is not None and bias is not None:
        if low >= high:
            problems.add("secondary.output_low", f"must be below output_high ({high:g})", low)
        elif not low <= bias <= high:
            problems.add("secondary.output_bias", "must lie within output_low .. output_high",
                         bias)
    scans = spec_kwargs["scans_per_primary"]
    if scans is not None and substeps is not None and substeps % scans:
        problems.add("secondary.scans_per_primary", f"must divide [simulation] substeps "
                     f"({substeps}): each secondary scan is a whole number of internal steps",
                     scans)
    if len(problems) > before or tuning is None:
        return None
    model = TransferModel(kind, **values)  # type: ignore[arg-type]
    return SecondarySpec(model, tuning, **spec_kwargs)  # type: ignore[arg-type]
