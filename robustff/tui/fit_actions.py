"""Fitting a model to bump-test data from the studio (a mixin of the app).

F7 opens :class:`~robustff.tui.fit_screens.FitFormScreen` (the fit of ``robustff fit`` runs in
its thread worker), then shows :class:`~robustff.tui.fit_screens.FitResultScreen`; applying
writes the fitted model, in the case's time unit, as the chosen block's nominal model (validated
by the loader), marks the case edited, autosaves and reruns the study.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from robustff.errors import RobustffError
from robustff.tui.fit_apply import FitRequest, converted_model, with_fitted_model
from robustff.tui.fit_screens import DEFAULT_FORM, FitFormScreen, FitResultScreen
from robustff.tui.host import StudioHost

if TYPE_CHECKING:
    from robustff.fit.least_squares import FitResult
    from robustff.plant.models import TransferModel

__all__ = ["FitActions"]


class FitActions(StudioHost):
    """Data-fit actions; mixed into :class:`robustff.tui.app.StudioApp`."""

    _fit_form: dict[str, str] | None = None

    @property
    def fit_form(self) -> dict[str, str]:
        """The fit form's texts (kept between openings within a session)."""
        if self._fit_form is None:
            self._fit_form = dict(DEFAULT_FORM)
        return self._fit_form

    def action_fit_data(self) -> None:
        self.push_screen(FitFormScreen(self.fit_form, self.case.time_unit), self._fit_finished)

    def _fit_finished(self, outcome: tuple[FitRequest, FitResult] | None) -> None:
        if outcome is None:
            return
        request, result = outcome
        case_unit = self.case.time_unit
        applied, note = converted_model(result.model, result.record.time_unit, case_unit)
        self.push_screen(FitResultScreen(request, result, applied, case_unit, note),
                         lambda apply: self._apply_fit(request, applied, note) if apply else None)

    def _apply_fit(self, request: FitRequest, model: TransferModel, unit_note: str) -> None:
        try:
            case, notes = with_fitted_model(self.case, request.block, model)
        except RobustffError as exc:
            self.notify(f"not applied: {exc}", severity="error", timeout=10)
            return
        self.accept_edit(case, rebuild=True, what=f"the fitted {request.block} model")
        self.notify(f"{request.block} model set to the {model.kind.upper()} fit "
                    f"({unit_note}); Ctrl+S saves it", timeout=8)
        for note in notes:
            self.notify(note, severity="warning", timeout=10)
