"""marshmallow schemas shared by the endpoints, and helpers to load requests with them.

Field names carry their units. Validation errors become 422 problem details
naming the field (see :mod:`service.errors`); a body that is not JSON at all is
a 400.
"""

from __future__ import annotations

import math
from typing import Any, ClassVar

from flask import request
from marshmallow import RAISE, Schema, ValidationError, fields, validate, validates_schema
from werkzeug.exceptions import BadRequest

from service.errors import ProblemError
from thermo.composition import BASES, KNOWN_OXIDES


class JSONNumber(fields.Float):
    """A finite JSON number: refuses strings and booleans (``Float`` alone accepts ``"3"``)."""

    default_error_messages: ClassVar[dict[str, str]] = {
        "invalid": "must be a JSON number",
        "special": "must be a finite number",
    }

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> float:
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise self.make_error("invalid")
        try:
            return super()._deserialize(value, attr, data, **kwargs)
        except OverflowError:  # an integer too large for a float
            raise self.make_error("special") from None


def quantity(description: str) -> fields.Float:
    """A required finite float read from a query string, with messages that state its unit."""
    return fields.Float(
        required=True,
        allow_nan=False,
        metadata={"description": description},
        error_messages={
            "required": f"is required ({description})",
            "invalid": f"must be a number ({description})",
            "special": f"must be a finite number ({description})",
        },
    )


class StatePointQuery(Schema):
    """Query parameters of a pressure-temperature point, range-checked against a dataset.

    Parameters
    ----------
    pressure_range_gpa, temperature_range_k : (float, float)
        Inclusive validity ranges of the dataset the point is evaluated with.
    """

    class Meta:
        unknown = RAISE

    error_messages: ClassVar[dict[str, str]] = {
        "unknown": "unknown query parameter; allowed: pressure_gpa, temperature_k",
    }
    pressure_gpa = quantity("pressure in GPa")
    temperature_k = quantity("temperature in K")

    def __init__(self, pressure_range_gpa: tuple[float, float], temperature_range_k: tuple[float, float],
                 **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.ranges = {"pressure_gpa": (pressure_range_gpa, "GPa"), "temperature_k": (temperature_range_k, "K")}

    @validates_schema(skip_on_field_errors=False)
    def _within_validity(self, data: dict[str, float], **kwargs: Any) -> None:
        problems = {}
        for key, ((lo, hi), unit) in self.ranges.items():
            if key in data and not lo <= data[key] <= hi:
                value = data[key]
                problems[key] = [f"{value:g} {unit} is outside the dataset's validity range [{lo:g}, {hi:g}] {unit}"]
        if problems:
            raise ValidationError(problems)


class CompositionSchema(Schema):
    """A bulk composition: ``{"basis", "oxides", "drop_unsupported_oxides"}``.

    ``oxides`` maps oxide formulas (see :data:`thermo.composition.KNOWN_OXIDES`)
    to non-negative amounts on ``basis`` (``wt_percent`` or ``mol_percent``).
    Amounts need not sum to 100 (the core normalises them with a warning); the
    total must be positive. Whether the dataset can represent each oxide is
    decided later by :func:`thermo.composition.bulk_from_oxides`: unsupported
    oxides are refused unless ``drop_unsupported_oxides`` is true.
    """

    class Meta:
        unknown = RAISE

    basis = fields.String(required=True, validate=validate.OneOf(BASES))
    oxides = fields.Dict(
        required=True,
        keys=fields.String(validate=validate.OneOf(tuple(KNOWN_OXIDES), error="unknown oxide; known: {choices}")),
        values=JSONNumber(validate=validate.Range(min=0, error="must not be negative")),
    )
    drop_unsupported_oxides = fields.Boolean(load_default=False, truthy={True}, falsy={False},
                                             error_messages={"invalid": "must be true or false"})

    @validates_schema
    def _positive_total(self, data: dict[str, Any], **kwargs: Any) -> None:
        amounts = data.get("oxides")
        if amounts is not None and not (amounts and math.fsum(amounts.values()) > 0):
            raise ValidationError({"oxides": ["must contain at least one oxide with a positive amount"]})


def load_query(schema: Schema) -> dict[str, Any]:
    """Load the current request's query string with ``schema``; a repeated parameter is refused."""
    repeated = {k: ["given more than once; give it once"] for k, v in request.args.lists() if len(v) > 1}
    if repeated:
        raise ValidationError(repeated)
    return schema.load(request.args.to_dict())


def load_json(schema: Schema) -> dict[str, Any]:
    """Load the current request's JSON body with ``schema`` (400 if the body is not JSON)."""
    try:
        body = request.get_json(force=False, silent=False)
    except BadRequest as exc:
        raise ProblemError(400, "malformed-request", "Malformed request",
                           "the request body must be a JSON document sent as application/json") from exc
    if not isinstance(body, dict):
        raise ValidationError({"_schema": ["the request body must be a JSON object"]})
    return schema.load(body)


__all__ = ["CompositionSchema", "JSONNumber", "StatePointQuery", "load_json", "load_query", "quantity"]
