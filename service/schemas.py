"""marshmallow schemas shared by the endpoints, and helpers to load requests with them.

Field names carry their units. Validation errors become 422 problem details
naming the field (see :mod:`service.errors`); a body that is not JSON at all is
a 400.
"""

from __future__ import annotations

import itertools
import math
from typing import Any, ClassVar

import numpy as np
from flask import request
from marshmallow import RAISE, Schema, ValidationError, fields, validate, validates_schema
from werkzeug.exceptions import BadRequest

from service.errors import ProblemError
from service.jobs import JobOptions, StrictBoolean
from service.settings import SETTINGS
from thermo.composition import BASES, KNOWN_OXIDES
from thermo.dataset import DEFAULT_DATASET_ID, Dataset, available_datasets, load_dataset
from thermo.phases import default_phase_names
from thermo.tables import FIELDS as TABLE_FIELDS


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
    drop_unsupported_oxides = StrictBoolean(load_default=False)

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


#: Units of the quantities checked against a dataset's validity ranges, by kind.
DOMAIN_UNITS = {"pressure": "GPa", "temperature": "K"}


def outside_domain(ds: Dataset, kind: str, values: list[float]) -> list[str]:
    """Messages for ``values`` (pressures [GPa] or temperatures [K]) outside ``ds``'s inclusive validity range."""
    (lo, hi), unit = (ds.pressure_range_gpa if kind == "pressure" else ds.temperature_range_k), DOMAIN_UNITS[kind]
    bad = [v for v in values if not lo <= v <= hi]
    if not bad:
        return []
    if len(values) == 1:
        return [f"{bad[0]:g} {unit} is outside the validity range of dataset {ds.id}: [{lo:g}, {hi:g}] {unit}"]
    shown = ", ".join(f"{v:g}" for v in bad[:5]) + (", ..." if len(bad) > 5 else "")
    return [f"{len(bad)} value(s) outside the validity range of dataset {ds.id}, [{lo:g}, {hi:g}] {unit}: {shown}"]


def phase_problems(ds: Dataset, phases: list[str] | None) -> dict[int, list[str]]:
    """Per-index messages for candidate phase names unknown to ``ds`` or listed twice."""
    known = set(default_phase_names(ds)) | set(ds.endmembers.names)
    bad: dict[int, list[str]] = {}
    for i, name in enumerate(phases or []):
        if name not in known:
            bad[i] = [f"unknown phase {name!r}: not a solution or endmember of dataset {ds.id} "
                      f"(solutions and default phases: {', '.join(default_phase_names(ds))})"]
        elif name in phases[:i]:
            bad[i] = [f"phase {name!r} is listed more than once"]
    return bad


class ComputeRequest(JobOptions):  # JobOptions: "async": true → a background job
    """Members every computing request has: ``composition``, ``dataset``, ``phases`` (and ``async``).

    ``dataset`` defaults to :data:`thermo.dataset.DEFAULT_DATASET_ID`; ``phases`` (candidate
    phases: solution names or endmember names of the dataset) defaults to the dataset's own
    list and is returned as ``None`` when absent. Subclasses add their quantities and check
    them in :meth:`check_against_dataset`, so that all bad fields are reported at once.
    """

    class Meta:
        unknown = RAISE

    composition = fields.Nested(CompositionSchema, required=True,
                                error_messages={"required": "is required (oxide amounts and their basis)"})
    dataset = fields.String(load_default=DEFAULT_DATASET_ID, validate=_known_dataset)
    phases = fields.List(
        fields.String(validate=validate.Length(min=1, error="must be a non-empty phase name")),
        load_default=None,
        validate=validate.Length(min=1, error="must list at least one phase (omit it to use the dataset's list)"),
    )

    def check_against_dataset(self, ds: Dataset, data: dict[str, Any], problems: dict[str, Any]) -> None:
        """Add ``{field: messages}`` for the request's own quantities to ``problems`` (override)."""

    def check_in_domain(self, ds: Dataset, data: dict[str, Any], problems: dict[str, Any], key: str,
                        kind: str) -> None:
        """Report ``data[key]`` (a number, or an axis) outside ``ds``'s pressure or temperature range."""
        if data.get(key) is None or key in problems:
            return
        value = data[key]
        messages = outside_domain(ds, kind, [value] if isinstance(value, float | int) else axis_values(value))
        if messages:
            problems[key] = messages

    @validates_schema(skip_on_field_errors=False)
    def _against_dataset(self, data: dict[str, Any], **kwargs: Any) -> None:
        dataset_id = data.get("dataset")
        if dataset_id not in available_datasets():
            return  # reported by the field validator
        ds = load_dataset(dataset_id)
        problems: dict[str, Any] = {}
        self.check_against_dataset(ds, data, problems)
        bad = phase_problems(ds, data.get("phases"))
        if bad:
            problems["phases"] = bad
        if problems:
            raise ValidationError(problems)


class EquilibriumRequest(ComputeRequest):
    """Body of ``POST /v1/equilibrium``: a composition at one pressure and temperature.

    Pressure and temperature are checked against the chosen dataset's validity ranges
    (inclusive), and every phase name against the dataset (see :class:`ComputeRequest`).
    """

    class Meta:
        unknown = RAISE

    error_messages: ClassVar[dict[str, str]] = {
        "unknown": "unknown field; allowed: composition, pressure_gpa, temperature_k, dataset, phases, async",
    }
    pressure_gpa = body_quantity("pressure in GPa")
    temperature_k = body_quantity("temperature in K")

    def check_against_dataset(self, ds: Dataset, data: dict[str, Any], problems: dict[str, Any]) -> None:
        self.check_in_domain(ds, data, problems, "pressure_gpa", "pressure")
        self.check_in_domain(ds, data, problems, "temperature_k", "temperature")


# --------------------------------------------------------------------------- axes
class AxisRange(Schema):
    """``{"start", "stop", "count"}``: ``count`` evenly spaced values from ``start`` to ``stop``, both included."""

    class Meta:
        unknown = RAISE

    error_messages: ClassVar[dict[str, str]] = {"unknown": "unknown field; allowed: start, stop, count"}
    start = body_quantity("first value of the axis")
    stop = body_quantity("last value of the axis")
    count = fields.Integer(required=True, strict=True,
                           validate=validate.Range(min=2, error="must be at least 2 (give a list for one value)"),
                           error_messages={"required": "is required (number of values, ends included)",
                                           "invalid": "must be an integer"})

    @validates_schema
    def _distinct_ends(self, data: dict[str, Any], **kwargs: Any) -> None:
        if "start" in data and "stop" in data and data["start"] == data["stop"]:
            raise ValidationError({"stop": ["must differ from start"]})


class GridAxis(fields.Field):
    """An axis: a non-empty list of finite JSON numbers, or ``{"start", "stop", "count"}`` (:class:`AxisRange`).

    Loads as given (a list of floats, or the range object): :func:`axis_values` expands it.
    """

    default_error_messages: ClassVar[dict[str, str]] = {
        "invalid": "must be a list of numbers or an object {{start, stop, count}}",
        "empty": "must list at least one value",
    }

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> Any:
        if isinstance(value, dict):
            try:
                return AxisRange().load(value)
            except ValidationError as exc:  # without its valid part, which marshmallow would keep as the value
                raise ValidationError(exc.messages) from None
        if not isinstance(value, list):
            raise self.make_error("invalid")
        if not value:
            raise self.make_error("empty")
        number, out, errors = JSONNumber(error_messages={"null": "must be a number, not null"}), [], {}
        for i, item in enumerate(value):
            try:
                out.append(number.deserialize(item))
            except ValidationError as exc:
                errors[i] = exc.messages
        if errors:
            raise ValidationError(errors)
        return out


def axis_length(axis: Any) -> int:
    """Number of values of a loaded :class:`GridAxis` (without expanding a range)."""
    return int(axis["count"]) if isinstance(axis, dict) else len(axis)


def axis_values(axis: Any) -> list[float]:
    """The values of a loaded :class:`GridAxis`: the list, or ``numpy.linspace(start, stop, count)``."""
    if isinstance(axis, dict):
        with np.errstate(all="ignore"):  # ends near the float limits: inf values, refused by the domain check
            return [float(v) for v in np.linspace(axis["start"], axis["stop"], axis["count"])]
    return [float(v) for v in axis]


def _increasing(values: list[float]) -> bool:
    return all(b > a for a, b in itertools.pairwise(values))


#: Relative tolerance on the spacing of a temperature list for it to count as a regular axis.
REGULAR_AXIS_RTOL = 1e-9


def _regular(values: list[float]) -> bool:
    with np.errstate(all="ignore"):  # differences of values near the float limits overflow: not regular
        steps = np.diff(values)
        return bool(np.all(np.abs(steps - steps[0]) <= REGULAR_AXIS_RTOL * abs(steps[0])))


def setting_default(name: str) -> int:
    """Default of a request-limit setting (:data:`service.settings.SETTINGS`)."""
    return int(SETTINGS[name][0])


# --------------------------------------------------------------------------- cooling paths
PATH_MODES = ("equilibrium", "fractional")


def path_step_count(start_k: float, stop_k: float, step_k: float) -> float:
    """Temperature steps of a path: ⌈(start − stop)/step⌉, at least 1 (inf if it overflows).

    The last step ends exactly at ``stop_k``; phase boundaries met on the way add rows, not steps.
    """
    ratio = (start_k - stop_k) / step_k
    return max(1, math.ceil(ratio - 1e-9)) if math.isfinite(ratio) else math.inf


class CoolingPathRequest(ComputeRequest):
    """Body of ``POST /v1/cooling-paths``: isobaric cooling of a composition from ``start_k`` to ``stop_k``.

    Parameters
    ----------
    max_steps : int
        Most temperature steps per path (``HEATPATH_MAX_PATH_STEPS``); more is refused naming ``step_k``.
    """

    class Meta:
        unknown = RAISE

    error_messages: ClassVar[dict[str, str]] = {
        "unknown": "unknown field; allowed: composition, pressure_gpa, start_k, stop_k, step_k, mode, "
                   "trapped_melt_fraction, dataset, phases, async",
    }
    pressure_gpa = body_quantity("pressure in GPa")
    start_k = body_quantity("start temperature in K, the hotter end")
    stop_k = body_quantity("stop temperature in K, below start_k")
    step_k = body_quantity("temperature step in K")
    mode = fields.String(load_default="equilibrium", validate=validate.OneOf(PATH_MODES))
    trapped_melt_fraction = JSONNumber(
        load_default=None,
        validate=validate.Range(min=0.0, max=1.0, max_inclusive=False, error="must satisfy 0 <= f < 1"),
    )

    def __init__(self, max_steps: int | None = None, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.max_steps = setting_default("HEATPATH_MAX_PATH_STEPS") if max_steps is None else max_steps

    def check_against_dataset(self, ds: Dataset, data: dict[str, Any], problems: dict[str, Any]) -> None:
        self.check_in_domain(ds, data, problems, "pressure_gpa", "pressure")
        self.check_in_domain(ds, data, problems, "start_k", "temperature")
        self.check_in_domain(ds, data, problems, "stop_k", "temperature")
        start, stop, step = data.get("start_k"), data.get("stop_k"), data.get("step_k")
        if start is not None and stop is not None and not stop < start and "stop_k" not in problems:
            problems["stop_k"] = [f"must be below start_k (a path cools): got start_k {start:g} K, stop_k {stop:g} K"]
        if step is not None and not step > 0:
            problems["step_k"] = ["must be positive"]
        elif None not in (start, stop, step) and stop < start:
            steps = path_step_count(start, stop, step)
            if steps > self.max_steps:
                problems["step_k"] = [
                    f"{start:g} K to {stop:g} K in steps of {step:g} K is {steps:g} steps; the limit is "
                    f"{self.max_steps} steps per path: take a larger step or a shorter range"]
        if data.get("trapped_melt_fraction") is not None and data.get("mode") != "fractional":
            problems["trapped_melt_fraction"] = ["applies to mode 'fractional' only; leave it out in equilibrium mode"]


# --------------------------------------------------------------------------- isentropes
class IsentropeRequest(ComputeRequest):
    """Body of ``POST /v1/isentropes``: T(P) at constant specific entropy.

    The entropy is that of the composition at ``potential_temperature_k`` and 1 bar, or
    ``specific_entropy_j_per_kg_k`` itself (exactly one of the two).

    Parameters
    ----------
    max_points : int
        Most pressures per isentrope (``HEATPATH_MAX_ISENTROPE_POINTS``).
    """

    class Meta:
        unknown = RAISE

    error_messages: ClassVar[dict[str, str]] = {
        "unknown": "unknown field; allowed: composition, pressure_gpa, potential_temperature_k, "
                   "specific_entropy_j_per_kg_k, dataset, phases, async",
    }
    pressure_gpa = GridAxis(required=True, error_messages={
        "required": "is required (pressures in GPa: a list, or {{start, stop, count}})"})
    potential_temperature_k = JSONNumber(load_default=None)
    specific_entropy_j_per_kg_k = JSONNumber(load_default=None)

    def __init__(self, max_points: int | None = None, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.max_points = setting_default("HEATPATH_MAX_ISENTROPE_POINTS") if max_points is None else max_points

    def check_against_dataset(self, ds: Dataset, data: dict[str, Any], problems: dict[str, Any]) -> None:
        axis = data.get("pressure_gpa")
        if axis is not None and axis_length(axis) > self.max_points:
            problems["pressure_gpa"] = [f"{axis_length(axis)} pressures; the limit is {self.max_points} pressures "
                                        "per isentrope"]
        self.check_in_domain(ds, data, problems, "pressure_gpa", "pressure")
        self.check_in_domain(ds, data, problems, "potential_temperature_k", "temperature")
        given = [k for k in ("potential_temperature_k", "specific_entropy_j_per_kg_k") if data.get(k) is not None]
        if not given and "potential_temperature_k" not in problems:
            problems["potential_temperature_k"] = ["is required unless specific_entropy_j_per_kg_k is given "
                                                   "(temperature in K at 1 bar on the isentrope)"]
        elif len(given) == 2:
            problems["specific_entropy_j_per_kg_k"] = ["give either potential_temperature_k or "
                                                       "specific_entropy_j_per_kg_k, not both"]


# --------------------------------------------------------------------------- tables
TABLE_FORMS = ("temperature", "enthalpy", "entropy")


class TableRequest(ComputeRequest):
    """Body of ``POST /v1/tables``: properties over a pressure list and a regular temperature axis.

    ``temperature_k`` must be a regular increasing axis (a range, or a list of evenly spaced
    increasing values); ``pressure_gpa`` any increasing list or a range.

    Parameters
    ----------
    max_points : int
        Most grid nodes per table (``HEATPATH_MAX_TABLE_POINTS``), for pressures x temperatures
        and for pressures x nodes of the enthalpy- and entropy-indexed axes.
    """

    class Meta:
        unknown = RAISE

    error_messages: ClassVar[dict[str, str]] = {
        "unknown": "unknown field; allowed: composition, pressure_gpa, temperature_k, form, variables, "
                   "boundary_points, indexed_count, dataset, phases, async",
    }
    pressure_gpa = GridAxis(required=True, error_messages={
        "required": "is required (pressures in GPa: a list, or {{start, stop, count}})"})
    temperature_k = GridAxis(required=True, error_messages={
        "required": "is required (temperatures in K: {{start, stop, count}}, or a list of evenly spaced values)"})
    form = fields.String(load_default="temperature", validate=validate.OneOf(TABLE_FORMS))
    variables = fields.List(
        fields.String(validate=validate.OneOf(tuple(TABLE_FIELDS), error="unknown variable; known: {choices}")),
        load_default=None,
        validate=validate.Length(min=1, error="must list at least one variable (omit it for all)"),
    )
    boundary_points = StrictBoolean(load_default=True)
    indexed_count = fields.Integer(load_default=None, strict=True,
                                   validate=validate.Range(min=2, error="must be at least 2"),
                                   error_messages={"invalid": "must be an integer"})

    def __init__(self, max_points: int | None = None, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.max_points = setting_default("HEATPATH_MAX_TABLE_POINTS") if max_points is None else max_points

    def check_against_dataset(self, ds: Dataset, data: dict[str, Any], problems: dict[str, Any]) -> None:
        p_axis, t_axis = data.get("pressure_gpa"), data.get("temperature_k")
        if isinstance(p_axis, list) and not _increasing(p_axis):
            problems["pressure_gpa"] = ["must increase strictly (a table's pressure axis)"]
        if isinstance(t_axis, list) and (len(t_axis) < 2 or not _increasing(t_axis) or not _regular(t_axis)):
            problems["temperature_k"] = ["must be at least two increasing, evenly spaced values (a regular axis); "
                                         "{start, stop, count} gives one"]
        for key, axis in (("pressure_gpa", p_axis), ("temperature_k", t_axis)):
            if isinstance(axis, dict) and not axis["stop"] > axis["start"] and key not in problems:
                problems[key] = ["must increase: stop must be above start"]
            if axis is not None and axis_length(axis) > self.max_points:  # before anything expands it
                problems[key] = [f"{axis_length(axis)} values; the limit is {self.max_points} grid nodes per table"]
        if p_axis is not None and t_axis is not None:
            n_p, n_t = axis_length(p_axis), axis_length(t_axis)
            if n_p * n_t > self.max_points:
                message = (f"{n_p} pressures x {n_t} temperatures = {n_p * n_t} grid nodes; the limit is "
                           f"{self.max_points} nodes per table")
                for key in ("pressure_gpa", "temperature_k"):
                    problems.setdefault(key, [message])
            count = data.get("indexed_count")
            if count is not None and n_p * count > self.max_points:
                problems["indexed_count"] = [f"{n_p} pressures x {count} indexed nodes = {n_p * count} grid nodes; "
                                             f"the limit is {self.max_points} nodes per table"]
        self.check_in_domain(ds, data, problems, "pressure_gpa", "pressure")
        self.check_in_domain(ds, data, problems, "temperature_k", "temperature")
        names = data.get("variables") or []
        repeated = {i: [f"variable {n!r} is listed more than once"] for i, n in enumerate(names) if n in names[:i]}
        if repeated:
            problems["variables"] = repeated


__all__ = [
    "AxisRange", "CompositionSchema", "ComputeRequest", "CoolingPathRequest", "EquilibriumRequest", "GridAxis",
    "IsentropeRequest", "JSONNumber", "StatePointQuery", "TableRequest", "axis_length", "axis_values",
    "body_quantity", "load_json", "load_query", "path_step_count", "quantity",
]
