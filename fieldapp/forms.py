"""WTForms for the engineer's set-up screens: piles, caps, ground models, rules and the import.

Every number goes through :class:`MeasureField`, whose messages name the field and the allowed
range ("Diameter must be 150 to 3,000 mm, got 100"). Cross-field checks (toe below cut-off,
layers contiguous, c_u for clay, phi' for sand, report values for rock) run in each form's
``validate``, and the design_core constructors run last as a backstop: their ValueError is shown
on the field it names, so nothing design_core would refuse is ever stored.
"""

from __future__ import annotations

import math
from dataclasses import fields as dc_fields

from flask_wtf import FlaskForm
from flask_wtf.file import FileAllowed, FileField, FileRequired
from wtforms import Field, FieldList, Form, FormField, SelectChoice, SelectField, StringField, TextAreaField
from wtforms.validators import DataRequired, Length, StopValidation, ValidationError
from wtforms.widgets import NumberInput

from design_core import Rules
from design_core.inputs import MATERIALS, PILE_TYPES, PileDesign
from fieldapp import text_rules
from fieldapp.queries.caps import CAP_LOAD_LIMIT
from fieldapp.queries.piles import FIELDS, LEVEL_LIMIT_M, MARK_MAX, check_pile, label_problem
from fieldapp.queries.projects import check_project

MATERIAL_LABELS = {
    "cohesive": "cohesive (clay: alpha method, needs c_u)",
    "cohesionless": "cohesionless (sand: beta method, needs φ')",
    "rock": "rock (report shaft friction and base pressure)",
    "ignore": "ignored (fill: weight only)",
}
PILE_TYPE_LABELS = {"bored": "bored", "cfa": "CFA", "driven": "driven", "screw": "screw"}


def options(pairs) -> list[SelectChoice]:
    """Select options from (value, label) pairs (WTForms 3.3 wants SelectChoice objects)."""
    return [SelectChoice(str(value), str(label)) for value, label in pairs]


def fmt_number(x: float) -> str:
    """A number as the forms show it: no trailing zeros, no exponent for ordinary values."""
    if float(x).is_integer():
        return f"{int(x)}"
    return repr(float(x))


def range_words(lo: float | None, hi: float | None, unit: str = "") -> str:
    """'150 to 3,000 mm', 'within ±10,000 m', 'at least 0' ..."""
    unit = f" {unit}" if unit and unit != "°" else unit

    def n(x):
        return f"{x:,.0f}" if float(x).is_integer() else f"{x:,g}"

    if lo is not None and hi is not None:
        if lo == -hi:
            return f"within ±{n(hi)}{unit}"
        return f"{n(lo)} to {n(hi)}{unit}"
    if lo is not None:
        return f"at least {n(lo)}{unit}"
    if hi is not None:
        return f"at most {n(hi)}{unit}"
    return "a number"


class MeasureField(Field):
    """A number with a unit and an allowed range; blank is None (an error when required).

    Renders as ``<input type=number step=any>`` so a tablet shows its numeric keypad.
    """

    widget = NumberInput(step="any")

    def __init__(self, label=None, validators=None, *, lo: float | None = None, hi: float | None = None,
                 unit: str = "", required: bool = True, integer: bool = False, **kwargs):
        super().__init__(label, validators, **kwargs)
        self.lo, self.hi, self.unit = lo, hi, unit
        self.required, self.integer = required, integer
        self.flags.required = required

    @property
    def range_text(self) -> str:
        """The allowed range in words."""
        return range_words(self.lo, self.hi, self.unit)

    def _value(self):
        if self.raw_data:
            return self.raw_data[0]
        return "" if self.data is None else fmt_number(self.data)

    def process_formdata(self, valuelist):
        self.data = None
        if not valuelist:
            return
        text = str(valuelist[0]).strip()
        if not text:
            return
        try:
            value = float(text)
        except ValueError:
            raise ValueError(f"{self.label.text} must be a number ({self.range_text}), got {text!r}") from None
        if not math.isfinite(value):
            raise ValueError(f"{self.label.text} must be a finite number ({self.range_text})")
        if self.integer:
            if not value.is_integer():
                raise ValueError(f"{self.label.text} must be a whole number ({self.range_text}), got {text}")
            value = int(value)
        self.data = value

    def pre_validate(self, form):
        if self.process_errors:
            raise StopValidation()
        if self.data is None:
            if self.required:
                raise StopValidation(f"{self.label.text} is required ({self.range_text})")
            return
        if (self.lo is not None and self.data < self.lo) or (self.hi is not None and self.data > self.hi):
            raise StopValidation(f"{self.label.text} must be {self.range_text}, got {fmt_number(self.data)}")


class ChoiceField(SelectField):
    """A select whose refusal names the field and the values allowed."""

    def pre_validate(self, form):
        try:
            super().pre_validate(form)
        except ValidationError:
            allowed = [c.value for c in (self.choices or []) if getattr(c, "value", "")]
            shown = ", ".join(allowed[:12]) + (" ..." if len(allowed) > 12 else "")
            raise ValidationError(f"{self.label.text} must be one of: {shown}") from None


def not_formula(form, field):
    """WTForms validator: a mark or name must not start like a spreadsheet formula."""
    problem = label_problem(field.label.text, (field.data or "").strip())
    if problem:
        raise ValidationError(problem)


def text_rule(check):
    """A WTForms validator from one of fieldapp.text_rules' checks (label, text) -> message."""
    def validator(form, field):
        if isinstance(field.data, str):
            problem = check(field.label.text, field.data.strip())
            if problem:
                raise ValidationError(problem)
    return validator


MARK_RULE = text_rule(text_rules.mark_problem)
CODE_RULE = text_rule(text_rules.code_problem)
NAME_RULE = text_rule(text_rules.name_problem)
TEXT_RULE = text_rule(text_rules.text_problem)


def _blank_to_none(value):
    return value.strip() if isinstance(value, str) and value.strip() else None


# --- piles -------------------------------------------------------------------------------------

class PileForm(FlaskForm):
    """One pile of the schedule. Set ``cap_id``, ``ground_model_id`` and ``exposure_class``
    choices before validating (they depend on the project)."""

    mark = StringField("Mark", [DataRequired(message=f"Mark is required (1 to {MARK_MAX} characters)"),
                                Length(max=MARK_MAX, message=f"Mark must be 1 to {MARK_MAX} characters"),
                                not_formula, MARK_RULE])
    cap_id = ChoiceField("Cap", coerce=str, validate_choice=True)
    ground_model_id = ChoiceField("Ground model", coerce=str)

    def validate(self, extra_validators=None):
        """Field checks, then toe below cut-off and the other cross-field checks, then PileDesign."""
        ok = super().validate(extra_validators)
        if not self.ground_model_id.data:
            self.ground_model_id.errors.append(
                "Ground model is required: choose one of the project's ground models (Ground screen)")
            ok = False
        if not ok:
            return False
        values = self.values()
        for name, message in check_pile(values):
            getattr(self, name).errors.append(message)
            ok = False
        if ok:
            try:
                PileDesign(mark=values["mark"], diameter=values["diameter_mm"] / 1000.0,
                           cutoff_level=values["cutoff_level_m"], toe_level=values["toe_level_m"],
                           easting=values["easting_m"], northing=values["northing_m"],
                           pile_type=values["pile_type"], compression=values["compression_kn"],
                           tension=values["tension_kn"], shear=values["shear_kn"],
                           moment=values["moment_knm"], n_bars=values["n_bars"], bar_mm=values["bar_mm"],
                           cage_length=values["cage_length_m"], fc_mpa=values["fc_mpa"],
                           fy_mpa=values["fy_mpa"], exposure_class=values["exposure_class"],
                           cover_mm=values["cover_mm"], head=values["head"])
            except ValueError as exc:
                self.mark.errors.append(str(exc))
                ok = False
        return ok

    def values(self) -> dict:
        """The clean values keyed by queries.piles.WRITE_COLUMNS."""
        out = {"mark": self.mark.data.strip(),
               "cap_id": int(self.cap_id.data) if self.cap_id.data else None,
               "ground_model_id": int(self.ground_model_id.data) if self.ground_model_id.data else None}
        for spec in FIELDS:
            value = getattr(self, spec.name).data
            if value is None:
                value = spec.default
            out[spec.name] = value
        return out


for _spec in FIELDS:
    if _spec.name == "pile_type":
        _field = ChoiceField(_spec.label, choices=options((t, PILE_TYPE_LABELS[t]) for t in PILE_TYPES),
                             default=_spec.default)
    elif _spec.name == "head":
        _field = ChoiceField(_spec.label, choices=options([("free", "free"), ("fixed", "fixed (in cap)")]),
                             default=_spec.default)
    elif _spec.name == "exposure_class":
        _field = ChoiceField(_spec.label, coerce=str, default=_spec.default)
    else:
        _field = MeasureField(_spec.label, lo=_spec.lo, hi=_spec.hi, unit=_spec.unit,
                              required=_spec.required, integer=_spec.kind == "int",
                              default=_spec.default)
    setattr(PileForm, _spec.name, _field)


# --- caps --------------------------------------------------------------------------------------

class CapForm(FlaskForm):
    """A cap: mark and loads at the centroid of its piles."""

    mark = StringField("Cap mark", [DataRequired(message="Cap mark is required (1 to 40 characters)"),
                                    Length(max=40, message="Cap mark must be 1 to 40 characters"), not_formula,
                                    CODE_RULE])
    n_kn = MeasureField("N (vertical, compression +)", lo=-CAP_LOAD_LIMIT, hi=CAP_LOAD_LIMIT, unit="kN",
                        required=False, default=0.0)
    mx_knm = MeasureField("Mx (adds compression towards +northing)", lo=-CAP_LOAD_LIMIT, hi=CAP_LOAD_LIMIT,
                          unit="kNm", required=False, default=0.0)
    my_knm = MeasureField("My (adds compression towards +easting)", lo=-CAP_LOAD_LIMIT, hi=CAP_LOAD_LIMIT,
                          unit="kNm", required=False, default=0.0)
    hx_kn = MeasureField("Hx (horizontal, easting)", lo=-CAP_LOAD_LIMIT, hi=CAP_LOAD_LIMIT, unit="kN",
                         required=False, default=0.0)
    hy_kn = MeasureField("Hy (horizontal, northing)", lo=-CAP_LOAD_LIMIT, hi=CAP_LOAD_LIMIT, unit="kN",
                         required=False, default=0.0)

    def loads(self) -> dict:
        """The loads keyed by queries.caps.CAP_LOAD_FIELDS (blanks are 0)."""
        return {name: getattr(self, name).data or 0.0
                for name in ("n_kn", "mx_knm", "my_knm", "hx_kn", "hy_kn")}


# --- ground models -----------------------------------------------------------------------------

LAYER_VALUE_FIELDS = ("top_level_m", "bottom_level_m", "unit_weight_kn_m3", "cu_kpa", "cu_bottom_kpa",
                      "phi_deg", "shaft_friction_kpa", "base_pressure_kpa")
# design_core.ground.Layer argument -> the form field its ValueError belongs on
_LAYER_ARG_TO_FIELD = {"top": "top_level_m", "bottom": "bottom_level_m", "material": "material",
                       "unit_weight": "unit_weight_kn_m3", "cu_bottom": "cu_bottom_kpa", "cu": "cu_kpa",
                       "phi": "phi_deg", "shaft_friction": "shaft_friction_kpa",
                       "base_pressure": "base_pressure_kpa"}


class LayerForm(Form):
    """One layer row; a row left wholly blank is ignored."""

    top_level_m = MeasureField("Top level", lo=-LEVEL_LIMIT_M, hi=LEVEL_LIMIT_M, unit="m", required=False)
    bottom_level_m = MeasureField("Bottom level", lo=-LEVEL_LIMIT_M, hi=LEVEL_LIMIT_M, unit="m",
                                  required=False)
    material = ChoiceField("Material", choices=options([("", "—")] + [(m, MATERIAL_LABELS[m]) for m in MATERIALS]))
    unit_weight_kn_m3 = MeasureField("Unit weight", lo=10, hi=30, unit="kN/m³", required=False)
    cu_kpa = MeasureField("c_u at top", lo=0, hi=2000, unit="kPa", required=False)
    cu_bottom_kpa = MeasureField("c_u at bottom", lo=0, hi=2000, unit="kPa", required=False)
    phi_deg = MeasureField("φ'", lo=0, hi=50, unit="°", required=False)
    shaft_friction_kpa = MeasureField("Report shaft friction", lo=0, hi=5000, unit="kPa", required=False)
    base_pressure_kpa = MeasureField("Report base pressure", lo=0, hi=100_000, unit="kPa", required=False)
    description = StringField("Description", [Length(max=200, message="Description must be at most 200 characters"),
                                              NAME_RULE])

    def is_blank(self) -> bool:
        """True when nothing was entered in the row."""
        return (not self.material.data and not (self.description.data or "").strip()
                and all(getattr(self, n).data is None and not getattr(self, n).process_errors
                        for n in LAYER_VALUE_FIELDS))

    def values(self) -> dict:
        """The row keyed by queries.ground.LAYER_FIELDS."""
        out = {n: getattr(self, n).data for n in LAYER_VALUE_FIELDS}
        out["material"] = self.material.data
        out["description"] = (self.description.data or "").strip()
        return out


class GroundModelForm(FlaskForm):
    """A ground model: name, water level and layers from the top down."""

    name = StringField("Name", [DataRequired(message="Name is required (1 to 80 characters)"),
                                Length(max=80, message="Name must be 1 to 80 characters"), not_formula,
                                NAME_RULE])
    description = TextAreaField("Description", [Length(max=1000, message="Description must be at most 1,000 characters"),
                                                TEXT_RULE])
    water_level_m = MeasureField("Groundwater level", lo=-LEVEL_LIMIT_M, hi=LEVEL_LIMIT_M, unit="m")
    layers = FieldList(FormField(LayerForm), min_entries=1, max_entries=30)

    def filled_layers(self) -> list[LayerForm]:
        """The layer rows that hold something, in order."""
        return [entry.form for entry in self.layers if not entry.form.is_blank()]

    def validate(self, extra_validators=None):
        """Field ranges, then per layer: what its material needs, top above bottom, then the
        layers contiguous from the top down; finally design_core's GroundModel as a backstop."""
        from design_core.ground import GroundModel
        from fieldapp.pile_inputs import layer_from_values

        ok = super().validate(extra_validators)
        rows = [(i, e.form) for i, e in enumerate(self.layers, start=1) if not e.form.is_blank()]
        if not rows:
            self.layers.errors.append("Layers: give at least one layer (top level, bottom level, material, "
                                      "unit weight)")
            return False
        built = []
        for number, row in rows:
            for sub in row:
                sub.errors = [f"Layer {number}: {e}" for e in sub.errors]
            if any(getattr(row, n).errors for n in LAYER_VALUE_FIELDS):
                ok = False
                continue
            where = f"Layer {number}"
            missing = False
            for name, label in (("top_level_m", "top level"), ("bottom_level_m", "bottom level"),
                                ("unit_weight_kn_m3", "unit weight (10 to 30 kN/m³)")):
                if getattr(row, name).data is None:
                    getattr(row, name).errors.append(f"{where}: {label} is required")
                    missing = True
            if not row.material.data:
                row.material.errors.append(f"{where}: material is required")
                missing = True
            material = row.material.data
            if material == "cohesive" and row.cu_kpa.data is None:
                row.cu_kpa.errors.append(f"{where}: a cohesive layer needs c_u (0 to 2,000 kPa)")
                missing = True
            if material == "cohesionless" and row.phi_deg.data is None:
                row.phi_deg.errors.append(f"{where}: a cohesionless layer needs φ' (0 to 50°)")
                missing = True
            if material == "rock":
                for name, label in (("shaft_friction_kpa", "report shaft friction (0 to 5,000 kPa)"),
                                    ("base_pressure_kpa", "report base pressure (0 to 100,000 kPa)")):
                    if getattr(row, name).data is None:
                        getattr(row, name).errors.append(f"{where}: a rock layer needs the {label}")
                        missing = True
            top, bottom = row.top_level_m.data, row.bottom_level_m.data
            if top is not None and bottom is not None and top <= bottom:
                row.bottom_level_m.errors.append(
                    f"{where}: bottom level ({fmt_number(bottom)} m) must be below the top level "
                    f"({fmt_number(top)} m)")
                missing = True
            if missing:
                ok = False
                continue
            try:
                built.append((number, row, layer_from_values(row.values())))
            except ValueError as exc:
                message = str(exc)
                target = _LAYER_ARG_TO_FIELD.get(message.split(" ", 1)[0], "material")
                getattr(row, target).errors.append(f"{where}: {message}")
                ok = False
        if not ok:
            return False
        for i in range(1, len(built)):
            (n_above, _, above), (n_below, row_below, below) = built[i - 1], built[i]
            if abs(below.top - above.bottom) > 1e-6:
                row_below.top_level_m.errors.append(
                    f"Layer {n_below}: top level ({fmt_number(below.top)} m) must equal the bottom of "
                    f"layer {n_above} ({fmt_number(above.bottom)} m): layers are contiguous, from the top down")
                ok = False
        if not ok:
            return False
        try:
            model = GroundModel(tuple(layer for _, _, layer in built), self.water_level_m.data)
            model.stress_profile()
        except ValueError as exc:
            self.water_level_m.errors.append(str(exc))
            return False
        return True


# --- rules -------------------------------------------------------------------------------------

class ExposureRowForm(Form):
    """One row of the exposure table; a wholly blank row is ignored."""

    code = StringField("Class", [Length(max=12, message="Class must be 1 to 12 characters"), CODE_RULE])
    cmin_dur_mm = MeasureField("Minimum cover for durability", lo=0, hi=200, unit="mm", required=False)
    min_strength_mpa = MeasureField("Minimum concrete strength", lo=0, hi=120, unit="MPa", required=False)
    description = StringField("Description", [Length(max=200, message="Description must be at most 200 characters"),
                                              NAME_RULE])

    def is_blank(self) -> bool:
        """True when nothing was entered in the row."""
        return (not (self.code.data or "").strip() and not (self.description.data or "").strip()
                and self.cmin_dur_mm.data is None and self.min_strength_mpa.data is None
                and not self.cmin_dur_mm.process_errors and not self.min_strength_mpa.process_errors)


class RulesForm(FlaskForm):
    """Every rule of design_core.Rules with its allowed range, the exposure table and a note."""

    note = StringField("Why the change (kept with the new version)",
                       [DataRequired(message="Why the change is required (1 to 300 characters)"),
                        Length(max=300, message="Why the change must be at most 300 characters"), NAME_RULE])
    exposure = FieldList(FormField(ExposureRowForm), min_entries=1, max_entries=60)

    def rule_fields(self):
        """(rule name, bound field) in the order of design_core.Rules."""
        return [(name, getattr(self, name)) for name in RULE_NAMES]

    def exposure_rows(self) -> list[dict]:
        """The filled rows of the exposure table as ExposureClass keyword dicts."""
        out = []
        for entry in self.exposure:
            row = entry.form
            if row.is_blank():
                continue
            out.append({"code": (row.code.data or "").strip(), "cmin_dur_mm": row.cmin_dur_mm.data,
                        "min_strength_mpa": row.min_strength_mpa.data,
                        "description": (row.description.data or "").strip()})
        return out

    def validate(self, extra_validators=None):
        """Each value within the field's min/max from Rules.field_meta; each exposure row complete
        and its class unique; then Rules itself as a backstop."""
        ok = super().validate(extra_validators)
        codes = set()
        filled = 0
        for number, entry in enumerate(self.exposure, start=1):
            row = entry.form
            if row.is_blank():
                continue
            filled += 1
            for sub in row:
                sub.errors = [f"Exposure row {number}: {e}" for e in sub.errors]
            code = (row.code.data or "").strip()
            if not code:
                row.code.errors.append(f"Exposure row {number}: class is required (1 to 12 characters)")
                ok = False
            elif code in codes:
                row.code.errors.append(f"Exposure row {number}: class {code} is listed twice")
                ok = False
            codes.add(code)
            for field, words in ((row.cmin_dur_mm, "minimum cover (0 to 200 mm)"),
                                 (row.min_strength_mpa, "minimum strength (0 to 120 MPa)")):
                if field.data is None and not field.errors:
                    field.errors.append(f"Exposure row {number}: {words} is required")
                    ok = False
        if not filled:
            self.exposure.errors.append("Exposure table: give at least one class")
            ok = False
        if ok:
            try:
                self.to_rules()
            except ValueError as exc:
                self.note.errors.append(str(exc))
                ok = False
        return ok

    def to_rules(self) -> Rules:
        """The Rules these values make (ValueError naming the field when design_core refuses)."""
        data = {name: getattr(self, name).data for name in RULE_NAMES}
        data["exposure_table"] = self.exposure_rows()
        return Rules.from_dict(data)


RULE_NAMES: list[str] = []
for _f in dc_fields(Rules):
    if _f.name == "exposure_table":
        continue
    _meta = Rules.field_meta(_f.name)
    if _meta.get("choices"):
        _rule_field = ChoiceField(_meta["label"], choices=options((c, c) for c in _meta["choices"]))
    else:
        _rule_field = MeasureField(_meta["label"], lo=_meta.get("min"), hi=_meta.get("max"),
                                   unit=_meta.get("unit") or "")
    setattr(RulesForm, _f.name, _rule_field)
    RULE_NAMES.append(_f.name)


# --- projects ------------------------------------------------------------------------------

class ProjectForm(FlaskForm):
    """A new project: name, site, datum for levels, engineer of record (checked by
    queries.projects.check_project, the same checks as ``toeline project add``)."""

    name = StringField("Name")
    site = StringField("Site")
    datum = StringField("Datum for levels")
    engineer = StringField("Engineer of record")

    def values(self) -> dict:
        """The four fields as text."""
        return {name: (getattr(self, name).data or "") for name in ("name", "site", "datum", "engineer")}

    def validate(self, extra_validators=None):
        """CSRF and the fields, each problem shown on its field."""
        ok = super().validate(extra_validators)
        for name, message in check_project(self.values()).items():
            getattr(self, name).errors.append(message)
            ok = False
        return ok


# --- import ------------------------------------------------------------------------------------

class ImportForm(FlaskForm):
    """The pile schedule file to import."""

    file = FileField("Schedule file (.csv or .xlsx)", [
        FileRequired(message="Schedule file is required: choose a .csv or .xlsx file"),
        FileAllowed(["csv", "xlsx"], message="Schedule file must be a .csv or .xlsx file"),
    ])


def blank(value) -> object:
    """None for an empty string (forms give '' for blank text)."""
    return _blank_to_none(value)


def form_messages(form) -> list[str]:
    """Every error message of a form, nested rows included, in the order of the fields."""
    out: list[str] = []
    for f in form:
        if f.type == "FormField":
            out.extend(form_messages(f.form))
        elif f.type == "FieldList":
            out.extend(e for e in f.errors if isinstance(e, str))
            for entry in f.entries:
                if entry.type == "FormField":
                    out.extend(form_messages(entry.form))
                else:
                    out.extend(e for e in entry.errors if isinstance(e, str))
        else:
            out.extend(e for e in f.errors if isinstance(e, str))
    return out
