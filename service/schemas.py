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
from service.jobs import JobOptions
from thermo.composition import BASES, KNOWN_OXIDES
from thermo.dataset import DEFAULT_DATASET_ID, available_datasets, load_dataset
from thermo.phases import default_phase_names


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
        if amounts is None:
            return
        total = sum(amounts.values())  # a plain float sum: inf (not an exception) when the amounts overflow
        if not total > 0:
            raise ValidationError({"oxides": ["must contain at least one oxide with a positive amount"]})
        if not math.isfinite(total):
            raise ValidationError({"oxides": ["the amounts are too large to add up to a finite total; "
                                              "give them on a percent scale"]})


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


def body_quantity(description: str) -> JSONNumber:
    """A required finite JSON number in a request body, with messages that state its unit."""
    return JSONNumber(
        required=True,
        metadata={"description": description},
        error_messages={
            "required": f"is required ({description})",
            "null": f"must be a number, not null ({description})",
            "invalid": f"must be a JSON number ({description})",
            "special": f"must be a finite number ({description})",
        },
    )


def _known_dataset(dataset_id: str) -> None:
    ids = available_datasets()
    if dataset_id not in ids:
        raise ValidationError(f"unknown dataset {dataset_id!r}; available: {', '.join(ids)} (see /v1/datasets)")


class EquilibriumRequest(JobOptions):  # JobOptions: "async": true → a background job
    """Body of ``POST /v1/equilibrium``: a composition at one pressure and temperature.

    ``dataset`` defaults to :data:`thermo.dataset.DEFAULT_DATASET_ID`; ``phases``
    (candidate phases: solution names or endmember names of the dataset)
    defaults to the dataset's own list and is returned as ``None`` when absent.
    Pressure and temperature are checked against the chosen dataset's validity
    ranges (inclusive), and every phase name against the dataset, so that all
    bad fields are reported at once.
    """

    class Meta:
        unknown = RAISE

    error_messages: ClassVar[dict[str, str]] = {
        "unknown": "unknown field; allowed: composition, pressure_gpa, temperature_k, dataset, phases, async",
    }
    composition = fields.Nested(CompositionSchema, required=True,
                                error_messages={"required": "is required (oxide amounts and their basis)"})
    pressure_gpa = body_quantity("pressure in GPa")
    temperature_k = body_quantity("temperature in K")
    dataset = fields.String(load_default=DEFAULT_DATASET_ID, validate=_known_dataset)
    phases = fields.List(
        fields.String(validate=validate.Length(min=1, error="must be a non-empty phase name")),
        load_default=None,
        validate=validate.Length(min=1, error="must list at least one phase (omit it to use the dataset's list)"),
    )

    @validates_schema(skip_on_field_errors=False)
    def _against_dataset(self, data: dict[str, Any], **kwargs: Any) -> None:
        dataset_id = data.get("dataset")
        if dataset_id not in available_datasets():
            return  # reported by the field validator
        ds = load_dataset(dataset_id)
        problems: dict[str, Any] = {}
        for key, (lo, hi), unit in (("pressure_gpa", ds.pressure_range_gpa, "GPa"),
                                    ("temperature_k", ds.temperature_range_k, "K")):
            if key in data and not lo <= data[key] <= hi:
                problems[key] = [f"{data[key]:g} {unit} is outside the validity range of dataset {ds.id}: "
                                 f"[{lo:g}, {hi:g}] {unit}"]
        known = set(default_phase_names(ds)) | set(ds.endmembers.names)
        bad: dict[int, list[str]] = {}
        for i, name in enumerate(data.get("phases") or []):
            if name not in known:
                bad[i] = [f"unknown phase {name!r}: not a solution or endmember of dataset {ds.id} "
                          f"(solutions and default phases: {', '.join(default_phase_names(ds))})"]
            elif name in data["phases"][:i]:
                bad[i] = [f"phase {name!r} is listed more than once"]
        if bad:
            problems["phases"] = bad
        if problems:
            raise ValidationError(problems)


__all__ = [
    "CompositionSchema", "EquilibriumRequest", "JSONNumber", "StatePointQuery", "body_quantity", "load_json",
    "load_query", "quantity",
]
