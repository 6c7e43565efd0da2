"""Messages the studio's panes send up to the app (widgets never edit the case themselves)."""

from __future__ import annotations

from textual.message import Message

__all__ = ["FieldEdited", "DistributionEdited", "KindChanged", "RowAdded", "RowRemoved",
           "RangeFixAsked", "DisturbanceAddAsked", "DisturbanceRemoveAsked", "field_id"]


def field_id(name: str) -> str:
    """A widget id for a dotted case path (ids may not hold dots)."""
    return name.replace(".", "--").replace("_", "-")


class FieldEdited(Message):
    """A scalar field of the models and design pane was edited (``field`` like ``process.gain``)."""

    def __init__(self, field: str, text: str) -> None:
        super().__init__()
        self.field = field
        self.text = text


class DistributionEdited(Message):
    """The numbers of an uncertain parameter's distribution were edited."""

    def __init__(self, key: str, kind: str, params: str, clip: str) -> None:
        super().__init__()
        self.key, self.kind, self.params, self.clip = key, kind, params, clip


class KindChanged(Message):
    """Another distribution kind was chosen for an uncertain parameter."""

    def __init__(self, key: str, kind: str) -> None:
        super().__init__()
        self.key, self.kind = key, kind


class RowAdded(Message):
    """A plant parameter was made uncertain."""

    def __init__(self, key: str) -> None:
        super().__init__()
        self.key = key


class RowRemoved(Message):
    """An uncertain parameter was removed."""

    def __init__(self, key: str) -> None:
        super().__init__()
        self.key = key


class RangeFixAsked(Message):
    """The nominal value lies outside this uncertain parameter's range: offer to fix the range."""

    def __init__(self, key: str) -> None:
        super().__init__()
        self.key = key


class DisturbanceAddAsked(Message):
    """The engineer asked for one more disturbance."""


class DisturbanceRemoveAsked(Message):
    """The engineer asked to remove a disturbance (the app asks to confirm)."""

    def __init__(self, disturbance: str) -> None:
        super().__init__()
        self.disturbance = disturbance
