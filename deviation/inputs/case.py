"""Case files (TOML) read into pydantic models: the filed scheduled process and what happened.

A case holds the filed scheduled process (``[process]`` with its microbiology, container,
heat-penetration parameters, alternates and critical factors) and the deviation
(``[deviation]``: lot, retort, initial temperature, the retort record or the events seen).

Temperatures are accepted in °C (``*_C``) or °F (``*_F``) and converted once, here; z in °F
converts by 5/9 (a difference, not a temperature). Every other part of the tool sees °C only.
"""

from __future__ import annotations

import hashlib
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import (
    AfterValidator,
    AliasChoices,
    BaseModel,
    ConfigDict,
    Field,
    ValidationError,
    ValidationInfo,
    field_validator,
    model_validator,
)

from deviation.errors import CaseError
from deviation.inputs import limits
from deviation.inputs.files import read_bounded
from deviation.inputs.units import fahrenheit_difference_to_celsius, fahrenheit_to_celsius

# Temperature-valued keys that may be written with _F instead of _C.
_TEMPERATURES = (
    "process_temperature",
    "minimum_initial_temperature",
    "reference_temperature",
    "cooling_water_temperature",
    "come_up_start_temperature",
    "initial_temperature",
    "temperature",
    "reprocess_from_temperature",
    "spoilage_reference_temperature",
)
# Temperature differences (z) convert by 5/9 alone.
_DIFFERENCES = ("z", "spoilage_z")


def _accept_fahrenheit(data: Any) -> Any:
    """Turn ``name_F`` keys into ``name_C`` (°C); refuse a key given in both units."""
    if not isinstance(data, dict):
        return data
    data = dict(data)
    for base in _TEMPERATURES + _DIFFERENCES:
        key_F, key_C = f"{base}_F", f"{base}_C"
        if key_F not in data:
            continue
        if key_C in data:
            raise ValueError(f"give {key_C} or {key_F}, not both")
        value = data.pop(key_F)
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ValueError(f"{key_F} must be a number, found {value!r}")
        convert = fahrenheit_difference_to_celsius if base in _DIFFERENCES else fahrenheit_to_celsius
        data[key_C] = convert(value)
    return data


_BOUNDS_OF: dict[int, tuple[limits.Limits, dict[str, tuple[float, float, str]]]] = {}


def _bounds() -> dict[str, tuple[float, float, str]]:
    """Field name -> (lowest, highest, unit) from the limits in force (``rules/limits.toml``);
    built once per limits in force (every field of every case is checked against it)."""
    lim = limits.current()
    kept = _BOUNDS_OF.get(id(lim))
    if kept is not None and kept[0] is lim:
        return kept[1]
    _BOUNDS_OF.clear()
    table = _bounds_of(lim)
    _BOUNDS_OF[id(lim)] = (lim, table)
    return table


def _bounds_of(lim: limits.Limits) -> dict[str, tuple[float, float, str]]:
    dims = (lim.container_dimension_min_mm, lim.container_dimension_max_mm, "mm")
    fh = (lim.fh_min_min, lim.fh_max_min, "min")
    j = (lim.j_min, lim.j_max, "")
    D = (lim.D_min_min, lim.D_max_min, "min")
    z = (lim.z_min_C, lim.z_max_C, "°C")
    temperature = (-50.0, lim.retort_reading_max_C, "°C")
    return {
        "process_temperature_C": (lim.process_temperature_min_C, lim.process_temperature_max_C, "°C"),
        "process_time_min": (1e-3, lim.process_time_max_min, "min"),
        "come_up_time_min": (0.0, lim.come_up_time_max_min, "min"),
        "cooling_time_min": (1e-3, lim.process_time_max_min, "min"),
        "target_F_min": (lim.target_F_min_min, lim.target_F_max_min, "min"),
        "reference_temperature_C": (lim.process_temperature_min_C - 30.0, lim.process_temperature_max_C, "°C"),
        "z_C": z, "spoilage_z_C": z,
        "spoilage_D_min": D, "botulinum_D_min": D,
        "spores_per_container": (1e-12, lim.spores_per_container_max, ""),
        "botulinum_log_reductions_required": (1.0, 100.0, ""),
        "diameter_mm": dims, "height_mm": dims, "length_mm": dims, "width_mm": dims, "thickness_mm": dims,
        "fh_min": fh, "fc_min": fh, "fh2_min": fh, "jh": j, "jc": j,
        "break_min": (0.0, lim.process_time_max_min, "min"),
        "break_temperature_C": (-50.0, lim.retort_reading_max_C, "°C"),
        "thermal_diffusivity_m2_s": (lim.diffusivity_min_m2_s, lim.diffusivity_max_m2_s, "m²/s"),
        "surface_heat_transfer_W_m2K": (1.0, lim.surface_heat_transfer_max_W_m2K, "W/(m²·K)"),
        "thermal_conductivity_W_mK": (0.01, 100.0, "W/(m·K)"),
        "minimum_initial_temperature_C": (-50.0, lim.initial_temperature_max_C, "°C"),
        "initial_temperature_C": (-50.0, lim.initial_temperature_max_C, "°C"),
        "cooling_water_temperature_C": (0.0, lim.initial_temperature_max_C, "°C"),
        "come_up_start_temperature_C": (-50.0, lim.retort_reading_max_C, "°C"),
        "reprocess_from_temperature_C": (-50.0, lim.initial_temperature_max_C, "°C"),
        "spoilage_reference_temperature_C": (lim.process_temperature_min_C - 30.0, lim.process_temperature_max_C, "°C"),
        "temperature_C": temperature,
        "record_gap_limit_min": (1e-3, lim.record_gap_limit_max_min, "min"),
        "start_min": (0.0, lim.record_span_max_min, "min"),
        "end_min": (0.0, lim.record_span_max_min, "min"),
        "at_min": (0.0, lim.record_span_max_min, "min"),
        "vent_time_min": (0.0, 120.0, "min"),
        "vent_temperature_C": (50.0, lim.retort_reading_max_C, "°C"),
        "cold_zone_offset_C": (0.0, 20.0, "°C"),
        "water_level_above_top_mm": (1.0, 2000.0, "mm"),
        "level_above_top_mm": (-2000.0, 2000.0, "mm"),
        "rotation_rpm_min": (0.01, 100.0, "rpm"), "rotation_rpm_max": (0.01, 100.0, "rpm"),
        "rpm": (0.0, 100.0, "rpm"), "reel_speed_rpm": (0.01, 100.0, "rpm"),
        "carriers_per_min": (0.01, 1000.0, "1/min"),
        "entry_start_min": (0.0, lim.record_span_max_min, "min"),
        "entry_end_min": (0.0, lim.record_span_max_min, "min"),
    }


def _check_bound(name: str, value: Any) -> Any:
    """A bounded number inside its bounds; a °C value that reads well as °F says so."""
    bounds = _bounds()
    if name not in bounds or not isinstance(value, (int, float)) or isinstance(value, bool):
        return value
    low, high, unit = bounds[name]
    if low <= value <= high:
        return value
    message = f"{value:g} {unit} is outside {low:g} to {high:g} {unit}".replace("  ", " ").rstrip()
    if unit == "°C" and value > high:
        as_C = (value - 32.0) * 5.0 / 9.0
        if max(low, 0.0) <= as_C <= high:
            message += f"; if it is °F ({value:g} °F = {as_C:.1f} °C), write {name[:-2]}_F = {value:g}"
    raise ValueError(message)


def _not_blank(text: str) -> str:
    stripped = text.strip()
    if not stripped:
        raise ValueError("must not be empty or blank")
    return stripped


Text = Annotated[str, AfterValidator(_not_blank)]
"""Text that means something: surrounding blanks are dropped, a blank value is refused."""


class _Model(BaseModel):
    # Strict: a number is a number (true, "6" or 6e999 are refused), never NaN or infinity.
    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True, strict=True,
                              allow_inf_nan=False)

    @model_validator(mode="before")
    @classmethod
    def _units(cls, data: Any) -> Any:
        return _accept_fahrenheit(data)

    @field_validator("*", mode="after")
    @classmethod
    def _in_bounds(cls, value: Any, info: ValidationInfo) -> Any:
        return _check_bound(info.field_name, value)


Positive = Annotated[float, Field(gt=0)]
TemperatureC = float  # bounded by rules/limits.toml, per key


# C. botulinum types A and B: D at 121.1 °C (Stumbo 1973, Thermobacteriology in Food Processing).
BOTULINUM_REFERENCE_D_MIN = 0.21


class Microbiology(_Model):
    """The organisms the filed lethality is set against, each with its own kinetics.

    The spoilage organism keeps its own D, z and Tref (z and Tref default to the process's own);
    the botulinum figure is always judged on F0 (Tref 121.1 °C, z 10 °C) with D 0.21 min
    (Stumbo 1973), unless the case gives another D with its source.
    """

    spoilage_D_min: Positive = Field(
        description="D of the spoilage organism the target is set for, at its reference temperature [min]")
    spoilage_z_C: Positive | None = Field(
        None, description="z of the spoilage organism [°C difference] (default: the process's z_C)")
    spoilage_reference_temperature_C: TemperatureC | None = Field(
        None, description="Reference temperature of the spoilage organism's D [°C] (default: the "
                          "process's reference_temperature_C)")
    spores_per_container: Positive = Field(description="Initial spoilage spores per container N0 [-]")
    botulinum_D_min: Positive = Field(
        BOTULINUM_REFERENCE_D_MIN,
        description="D of C. botulinum at 121.1 °C [min] (0.21 min, Stumbo 1973); another value needs "
                    "botulinum_D_source")
    botulinum_D_source: str | None = Field(
        None, description="Where a botulinum D other than 0.21 min comes from (publication, study)")
    botulinum_log_reductions_required: Positive = Field(
        12.0, description="Required botulinum log reductions (12D principle)"
    )

    @model_validator(mode="after")
    def _botulinum_source(self) -> Microbiology:
        if abs(self.botulinum_D_min - BOTULINUM_REFERENCE_D_MIN) > 1e-12 and not (
                self.botulinum_D_source and self.botulinum_D_source.strip()):
            raise ValueError(
                f"botulinum_D_min {self.botulinum_D_min:g} min differs from the reference "
                f"{BOTULINUM_REFERENCE_D_MIN:g} min (Stumbo 1973): give botulinum_D_source naming "
                "where the value comes from")
        return self


class Container(_Model):
    """Container shape and inside dimensions [mm]."""

    shape: Literal["cylinder", "brick"]
    diameter_mm: Positive | None = None
    height_mm: Positive | None = None
    length_mm: Positive | None = None
    width_mm: Positive | None = None
    thickness_mm: Positive | None = None

    @model_validator(mode="after")
    def _dimensions(self) -> Container:
        need = {"cylinder": ("diameter_mm", "height_mm"),
                "brick": ("length_mm", "width_mm", "thickness_mm")}[self.shape]
        other = {"cylinder": ("length_mm", "width_mm", "thickness_mm"),
                 "brick": ("diameter_mm", "height_mm")}[self.shape]
        missing = [k for k in need if getattr(self, k) is None]
        if missing:
            raise ValueError(f"a {self.shape} needs {', '.join(need)}; missing {', '.join(missing)}")
        extra = [k for k in other if getattr(self, k) is not None]
        if extra:
            raise ValueError(f"a {self.shape} takes {', '.join(need)}; remove {', '.join(extra)}")
        return self


class HeatPenetration(_Model):
    """Heat-penetration parameters of the slowest-heating point (the cold spot)."""

    model: Literal["conduction", "heating-curve", "finite-difference"]
    fh_min: Positive | None = Field(None, description="Heating rate factor fh [min]")
    jh: Positive | None = Field(None, description="Heating lag factor jh [-]")
    fc_min: Positive | None = Field(None, description="Cooling rate factor fc [min]")
    jc: Positive | None = Field(None, description="Cooling lag factor jc [-]")
    thermal_diffusivity_m2_s: Positive | None = Field(None, description="Thermal diffusivity [m²/s]")
    surface_heat_transfer_W_m2K: Positive | None = Field(
        None, validation_alias=AliasChoices("surface_heat_transfer_W_m2K", "surface_htc_W_m2K"),
        description="Surface heat transfer coefficient of the retort medium (conduction and "
                    "finite-difference models; Biot boundary) [W/(m²·K)]; surface_htc_W_m2K is "
                    "accepted as an older name")
    thermal_conductivity_W_mK: Positive | None = Field(
        None, description="Product thermal conductivity, with surface_heat_transfer_W_m2K [W/(m·K)]")
    fh2_min: Positive | None = Field(
        None, description="Broken heating curve (model 'heating-curve', with break_min): the second "
                          "line's rate factor fh2 [min]")
    break_min: float | None = Field(
        None, validation_alias=AliasChoices("break_min", "xbh_min", "xbh"),
        description="Broken heating curve: the break time xbh from the corrected zero of the heat "
                    "penetration test [min]; xbh_min and xbh are accepted as the trade's names")
    break_temperature_C: TemperatureC | None = Field(
        None, description="Broken heating curve: the cold-spot temperature at which the product "
                          "thickens, read from the heat penetration test at the break [°C]")

    @model_validator(mode="after")
    def _parameters(self) -> HeatPenetration:
        if self.model in ("conduction", "finite-difference"):
            if self.fh_min is None and self.thermal_diffusivity_m2_s is None:
                raise ValueError(f"model '{self.model}' needs fh_min or thermal_diffusivity_m2_s")
            if self.fh_min is not None and self.thermal_diffusivity_m2_s is not None:
                raise ValueError(f"model '{self.model}' takes fh_min or thermal_diffusivity_m2_s, not both")
        htc, k = self.surface_heat_transfer_W_m2K, self.thermal_conductivity_W_mK
        if (htc is None) != (k is None):
            raise ValueError("surface_heat_transfer_W_m2K and thermal_conductivity_W_mK go together; "
                             "give both or neither")
        if htc is not None and self.model == "heating-curve":
            raise ValueError("surface_heat_transfer_W_m2K needs model 'conduction' or 'finite-difference' "
                             "(the heating-curve model's fh and jh already hold the surface's effect)")
        if self.model == "heating-curve":
            missing = [k for k in ("fh_min", "jh") if getattr(self, k) is None]
            if missing:
                raise ValueError(f"model 'heating-curve' needs fh_min and jh; missing {', '.join(missing)}")
            if self.jc is not None and self.fc_min is None:
                raise ValueError("jc is given without fc_min; give both or neither")
        broken = [k for k in ("fh2_min", "break_min") if getattr(self, k) is not None]
        if broken and self.model != "heating-curve":
            raise ValueError(f"{' and '.join(broken)} (a broken heating curve) need model 'heating-curve'")
        if len(broken) == 1:
            missing = "break_min" if broken == ["fh2_min"] else "fh2_min"
            raise ValueError(f"a broken heating curve needs fh2_min and break_min; missing {missing}")
        if self.break_temperature_C is not None and not broken:
            raise ValueError("break_temperature_C is given without a broken heating curve "
                             "(fh2_min and break_min)")
        if broken and self.break_temperature_C is None:
            # not guessed: where the product breaks moves the F either way (a product still thin
            # when the retort falls loses more), and the test's own initial temperature sets it
            raise ValueError("a broken heating curve needs break_temperature_C: the cold-spot "
                             "temperature at the break in the heat penetration test ('deviation fit' "
                             "gives it)")
        return self


class AlternateProcess(_Model):
    """An alternate process filed with the scheduled process (e.g. lower temperature, longer)."""

    process_temperature_C: TemperatureC
    process_time_min: Positive
    come_up_time_min: Positive | None = None
    minimum_initial_temperature_C: TemperatureC | None = None


class CriticalFactor(_Model):
    """A limit filed as a critical factor of the scheduled process."""

    name: Text
    unit: str = ""
    min: float | None = None
    max: float | None = None

    @model_validator(mode="after")
    def _limits(self) -> CriticalFactor:
        if self.min is None and self.max is None:
            raise ValueError(f"critical factor '{self.name}' has neither min nor max")
        if self.min is not None and self.max is not None and self.min > self.max:
            raise ValueError(f"critical factor '{self.name}': min {self.min} is above max {self.max}")
        return self


SYSTEM_KINDS = ("still-steam", "water-immersion", "water-spray", "steam-air", "agitating-batch",
                "continuous-rotary", "hydrostatic")
# What each kind of retort system needs filed (21 CFR 113.40 (a)-(g); 9 CFR 318.305).
_SYSTEM_NEEDS = {
    "still-steam": ("vent_time_min", "vent_temperature_C"),
    "water-immersion": ("water_level_above_top_mm",),
    "water-spray": (),
    "steam-air": (),
    "agitating-batch": ("rotation_rpm_min", "rotation_rpm_max"),
    "continuous-rotary": ("reel_speed_rpm", "containers_per_turn"),
    "hydrostatic": ("carriers_per_min", "containers_per_carrier"),
}


class RetortSystem(_Model):
    """The retort system of the scheduled process and its own filed critical factors.

    kinds (trade terms): ``still-steam`` (21 CFR 113.40(a): the vent schedule, time and
    temperature), ``water-immersion`` (113.40(b): the water level above the top layer),
    ``water-spray`` and ``steam-air`` (other systems, 113.40(g)), ``agitating-batch``
    (discontinuous agitating, 113.40(e): the rotation speed range), ``continuous-rotary``
    (continuous agitating / reel-and-spiral, 113.40(d): the reel speed that sets the residence,
    containers per turn), ``hydrostatic`` (113.40(f): the conveyor speed, containers per carrier).
    """

    kind: Literal["still-steam", "water-immersion", "water-spray", "steam-air", "agitating-batch",
                  "continuous-rotary", "hydrostatic"]
    cold_zone_offset_C: Annotated[float, Field(ge=0)] = Field(
        0.0, description="How much the recorder's sensor reads above the retort's slowest-heating "
                         "zone, from the temperature distribution test [°C difference]; the record is "
                         "lowered by it")
    vent_time_min: Positive | None = Field(None, description="Vent schedule: vents open at least [min]")
    vent_temperature_C: TemperatureC | None = Field(
        None, description="Vent schedule: and until the retort reads at least [°C]")
    vent_study_on_file: bool = Field(
        False, description="A temperature distribution study on file shows the filed process is "
                           "delivered even when this vent schedule is missed (21 CFR 113.40(a)(12))")
    water_level_above_top_mm: Positive | None = Field(
        None, description="Filed water level above the top layer of containers [mm]")
    layers: Annotated[int, Field(ge=1, le=100)] | None = Field(
        None, description="Layers of containers in a basket (names the exposed layer)")
    rotation_rpm_min: Positive | None = Field(None, description="Filed rotation speed, lowest [rpm]")
    rotation_rpm_max: Positive | None = Field(None, description="Filed rotation speed, highest [rpm]")
    reel_speed_rpm: Positive | None = Field(
        None, description="Filed reel speed; the process time is the residence in the cooker shell at "
                          "this speed [rpm]")
    containers_per_turn: Annotated[int, Field(ge=1)] | None = Field(
        None, description="Containers entering per turn of the reel [-]")
    carriers_per_min: Positive | None = Field(
        None, description="Filed conveyor speed, carriers entering the steam dome per minute [1/min]")
    containers_per_carrier: Annotated[int, Field(ge=1)] | None = Field(
        None, description="Containers per carrier [-]")

    @model_validator(mode="after")
    def _needs(self) -> RetortSystem:
        need = _SYSTEM_NEEDS[self.kind]
        missing = [k for k in need if getattr(self, k) is None]
        if missing:
            raise ValueError(f"a '{self.kind}' system needs {', '.join(need)}; missing {', '.join(missing)}")
        other = sorted({k for ks in _SYSTEM_NEEDS.values() for k in ks} - set(need))
        given = [k for k in other if getattr(self, k) is not None]
        if given:
            raise ValueError(f"{', '.join(given)} do not apply to a '{self.kind}' system")
        if (self.rotation_rpm_min is not None and self.rotation_rpm_max is not None
                and self.rotation_rpm_min > self.rotation_rpm_max):
            raise ValueError(f"rotation_rpm_min {self.rotation_rpm_min:g} is above rotation_rpm_max "
                             f"{self.rotation_rpm_max:g}")
        return self

    @property
    def continuous(self) -> bool:
        return self.kind in ("continuous-rotary", "hydrostatic")

    def containers_per_min(self) -> float | None:
        """Entry rate at the filed speed [containers/min] (continuous systems)."""
        if self.kind == "continuous-rotary":
            return self.reel_speed_rpm * self.containers_per_turn
        if self.kind == "hydrostatic":
            return self.carriers_per_min * self.containers_per_carrier
        return None


class Process(_Model):
    """The filed scheduled process."""

    id: Text
    product: Text
    retort_type: str = "still steam"
    process_temperature_C: TemperatureC
    process_time_min: Positive = Field(description="Hold at process temperature after come-up [min]")
    come_up_time_min: Annotated[float, Field(ge=0)]
    minimum_initial_temperature_C: TemperatureC
    target_F_min: Positive = Field(description="Filed lethality at the cold spot [min]")
    reference_temperature_C: TemperatureC = 121.1
    z_C: Positive = 10.0
    cooling_water_temperature_C: TemperatureC = Field(
        20.0, description="Cooling water temperature used for the filed cycle [°C] (default 20)"
    )
    cooling_time_min: Positive | None = Field(
        None, description="Cooling duration of the filed cycle [min] (default max(30, 1.5 fh))"
    )
    come_up_start_temperature_C: TemperatureC | None = Field(
        None, description="Retort temperature at steam on [°C] (default: the initial temperature)"
    )
    microbiology: Microbiology
    container: Container
    heat_penetration: HeatPenetration
    system: RetortSystem | None = Field(
        None, description="The retort system and its own filed critical factors; without it the "
                          "process is evaluated as a still steam retort")
    alternate: list[AlternateProcess] = Field(default_factory=list)
    critical_factors: list[CriticalFactor] = Field(default_factory=list)

    @model_validator(mode="after")
    def _temperatures(self) -> Process:
        if self.minimum_initial_temperature_C >= self.process_temperature_C:
            raise ValueError(f"minimum_initial_temperature_C {self.minimum_initial_temperature_C:g} °C is at or "
                             f"above the process temperature {self.process_temperature_C:g} °C; expected a "
                             "product temperature at steam on below it")
        brk = self.heat_penetration.break_temperature_C
        if brk is not None and brk >= self.process_temperature_C:
            # a product that never breaks heats on the first line: more F than it may have had
            raise ValueError(f"heat_penetration.break_temperature_C {brk:g} °C is at or above the process "
                             f"temperature {self.process_temperature_C:g} °C; expected the cold-spot "
                             "temperature at the break of the filed curve, below it")
        return self

    @field_validator("critical_factors")
    @classmethod
    def _unique_factors(cls, factors: list[CriticalFactor]) -> list[CriticalFactor]:
        seen: set[str] = set()
        for f in factors:
            key = f.name.strip().lower()
            if key in seen:
                raise ValueError(f"critical factor '{f.name}' is filed twice")
            seen.add(key)
        return factors


class DeviationEvent(_Model):
    """Something seen at the retort, laid over the filed cycle when there is no log (or on top of it).

    kinds:
    - ``temperature-low``: ``start_min``, ``end_min``, ``temperature_C`` (the lowest reading,
      applied to the whole interval, as a process authority reads the bottom of the trace);
    - ``hold-time``: the hold actually given, ``process_time_min`` (shorter or longer than filed);
    - ``come-up-time``: the come-up actually taken, ``come_up_time_min``;
    - ``reading``: one reading of the retort temperature at ``at_min``, ``temperature_C`` (a
      reading below the process temperature during the hold counts as low from then until the
      next reading at or above it, or the end of the hold);
    - ``venting``: the venting actually done, ``vent_time_min`` and ``vent_temperature_C``
      (still steam);
    - ``water-level``: the water above the top layer from ``start_min`` to ``end_min`` was
      ``level_above_top_mm`` (negative: the top layer was out of the water);
    - ``circulation-loss``: the water circulation stopped from ``start_min`` to ``end_min``;
    - ``rotation``: the rotation speed from ``start_min`` to ``end_min`` was ``rpm`` (0: stopped);
    - ``reel-stop``: the reel or conveyor of a continuous system stopped from ``start_min`` to
      ``end_min``;
    - ``reel-speed``: it ran at ``speed_fraction`` of the filed speed from ``start_min`` to
      ``end_min``.
    Times are minutes from steam on (for a continuous system, from the start of the shell's record).
    """

    kind: Literal["temperature-low", "hold-time", "come-up-time", "reading", "venting", "water-level",
                  "circulation-loss", "rotation", "reel-stop", "reel-speed"]
    vent_time_min: Annotated[float, Field(ge=0)] | None = None
    vent_temperature_C: TemperatureC | None = None
    level_above_top_mm: float | None = None
    rpm: Annotated[float, Field(ge=0)] | None = None
    speed_fraction: Annotated[float, Field(ge=0, le=2)] | None = None
    at_min: Annotated[float, Field(ge=0)] | None = None
    start_min: Annotated[float, Field(ge=0)] | None = None
    end_min: Annotated[float, Field(ge=0)] | None = None
    temperature_C: TemperatureC | None = None
    process_time_min: Annotated[float, Field(ge=0)] | None = None
    come_up_time_min: Annotated[float, Field(ge=0)] | None = None
    note: str = ""

    @model_validator(mode="after")
    def _fields(self) -> DeviationEvent:
        need = {"temperature-low": ("start_min", "end_min", "temperature_C"),
                "hold-time": ("process_time_min",),
                "come-up-time": ("come_up_time_min",),
                "reading": ("at_min", "temperature_C"),
                "venting": ("vent_time_min", "vent_temperature_C"),
                "water-level": ("start_min", "end_min", "level_above_top_mm"),
                "circulation-loss": ("start_min", "end_min"),
                "rotation": ("start_min", "end_min", "rpm"),
                "reel-stop": ("start_min", "end_min"),
                "reel-speed": ("start_min", "end_min", "speed_fraction")}[self.kind]
        missing = [k for k in need if getattr(self, k) is None]
        if missing:
            raise ValueError(f"event '{self.kind}' needs {', '.join(need)}; missing {', '.join(missing)}")
        if self.start_min is not None and self.end_min is not None and self.end_min <= self.start_min:
            raise ValueError(f"event '{self.kind}': end_min {self.end_min} must be after start_min {self.start_min}")
        return self


class CriticalFactorReading(_Model):
    name: Text
    value: float
    note: str = ""


class UncertaintySpec(_Model):
    """Spreads of the uncertain inputs for the Monte Carlo estimate (defaults: common practice)."""

    samples: Annotated[int, Field(ge=10, le=100_000)] = 1000
    seed: int = 20261202
    fh_relative_sd: Annotated[float, Field(ge=0, le=1)] = Field(
        0.10, description="Relative standard deviation of fh (or of the diffusivity) [-]")
    jh_relative_sd: Annotated[float, Field(ge=0, le=1)] = Field(
        0.10, description="Relative standard deviation of jh (heating-curve model) [-]")
    fc_relative_sd: Annotated[float, Field(ge=0, le=1)] = Field(
        0.10, description="Relative standard deviation of fc (heating-curve model, when filed) [-]")
    jc_relative_sd: Annotated[float, Field(ge=0, le=1)] = Field(
        0.10, description="Relative standard deviation of jc (heating-curve model, when filed) [-]")
    initial_temperature_sd_C: Annotated[float, Field(ge=0, le=30)] = Field(
        1.0, description="Standard deviation of the initial temperature [°C]")
    spores_log10_sd: Annotated[float, Field(ge=0, le=5)] = Field(
        0.5, description="Standard deviation of log10(spores per container) [-]")


class Stream(_Model):
    """The production stream of a continuous system: which entries the record covers.

    Containers enter the shell from ``entry_start_min`` to ``entry_end_min`` (minutes on the
    shell record's axis); ``first_entry`` gives the clock time of ``entry_start_min`` so entry
    times can be named as clock times. Stops and speed changes are ``reel-stop`` and
    ``reel-speed`` events.
    """

    entry_start_min: Annotated[float, Field(ge=0)]
    entry_end_min: Annotated[float, Field(ge=0)]
    first_entry: str | None = Field(None, description="Clock time of the first entry (ISO 8601)")

    @model_validator(mode="after")
    def _window(self) -> Stream:
        if self.entry_end_min <= self.entry_start_min:
            raise ValueError(f"entry_end_min {self.entry_end_min:g} must be after entry_start_min "
                             f"{self.entry_start_min:g}")
        if self.first_entry is not None:
            from datetime import datetime

            try:
                datetime.fromisoformat(self.first_entry)
            except ValueError:
                raise ValueError(f"first_entry {self.first_entry!r} is not a clock time "
                                 "(ISO 8601, e.g. 2026-12-01T06:00)") from None
        return self


class Deviation(_Model):
    """What happened to this lot."""

    lot: Text
    retort_id: Text
    plant: str = ""
    shift: str = Field("", description="The shift that ran the cycle (as the plant names it)")
    date: str = ""
    lot_size_containers: Annotated[int, Field(ge=1)]
    initial_temperature_C: TemperatureC
    retort_log: str | None = None
    cold_spot_log: str | None = None
    record_gap_limit_min: Positive = Field(
        2.0, description="Longest gap between recorder readings accepted [min] (default 2)"
    )
    process_ref: str | None = None
    reprocess_from_temperature_C: TemperatureC | None = None
    events: list[DeviationEvent] = Field(default_factory=list)
    critical_factor_readings: list[CriticalFactorReading] = Field(default_factory=list)
    uncertainty: UncertaintySpec | None = None
    stream: Stream | None = Field(None, description="Continuous systems: the production stream")
    description: str = ""


class Case(_Model):
    """A deviation case: the filed process and what happened."""

    process: Process
    deviation: Deviation

    @model_validator(mode="after")
    def _consistency(self) -> Case:
        PT = self.process.process_temperature_C
        it = self.deviation.initial_temperature_C
        if it >= PT:
            raise ValueError(f"deviation.initial_temperature_C {it:g} °C is at or above the process temperature "
                             f"{PT:g} °C; expected the product's temperature at steam on, below it")
        lot_max = limits.current().lot_size_max_containers
        if self.deviation.lot_size_containers > lot_max:
            raise ValueError(f"deviation.lot_size_containers {self.deviation.lot_size_containers} is above "
                             f"{lot_max}; expected the containers of one lot")
        system = self.process.system
        if self.deviation.stream is not None and (system is None or not system.continuous):
            raise ValueError("deviation.stream applies to a continuous system (process.system kind "
                             "'continuous-rotary' or 'hydrostatic')")
        if system is not None and system.continuous and self.deviation.stream is None:
            raise ValueError(f"a '{system.kind}' system needs deviation.stream (entry_start_min, "
                             "entry_end_min): which containers the record covers")
        filed = {f.name.strip().lower() for f in self.process.critical_factors}
        for i, reading in enumerate(self.deviation.critical_factor_readings):
            if reading.name.strip().lower() not in filed:
                names = ", ".join(sorted(f.name for f in self.process.critical_factors)) or "none"
                raise ValueError(
                    f"deviation.critical_factor_readings[{i}]: '{reading.name}' matches no filed "
                    f"critical factor (filed: {names})"
                )
        return self


# ---------------------------------------------------------------------------------------------
# Reading files


@dataclass(frozen=True)
class LoadedCase:
    """A case with the contents of the files it names, so nothing later depends on paths."""

    case: Case
    source: str
    sha256: str
    retort_log_text: str | None = None
    retort_log_source: str | None = None
    cold_spot_log_text: str | None = None
    cold_spot_log_source: str | None = None

    def snapshot(self) -> dict:
        """A JSON-able full snapshot: the case and the log contents (not paths)."""
        return {
            "case": self.case.model_dump(mode="json"),
            "source": self.source,
            "sha256": self.sha256,
            "retort_log_text": self.retort_log_text,
            "retort_log_source": self.retort_log_source,
            "cold_spot_log_text": self.cold_spot_log_text,
            "cold_spot_log_source": self.cold_spot_log_source,
        }

    @classmethod
    def from_snapshot(cls, snap: dict) -> LoadedCase:
        try:
            case = Case.model_validate(snap["case"])
        except ValidationError as exc:
            raise CaseError(_format_validation(exc), source=snap.get("source") or "snapshot") from None
        return cls(
            case=case,
            source=snap.get("source", "snapshot"),
            sha256=snap.get("sha256", ""),
            retort_log_text=snap.get("retort_log_text"),
            retort_log_source=snap.get("retort_log_source"),
            cold_spot_log_text=snap.get("cold_spot_log_text"),
            cold_spot_log_source=snap.get("cold_spot_log_source"),
        )


def _shown(value: Any) -> str:
    """A value as the user wrote it in TOML."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return repr(value if len(value) <= 40 else value[:37] + "...")
    if isinstance(value, float):
        return f"{value:g}"
    return repr(value)


def _plain(err: dict) -> str:
    """One pydantic error in the words of a case file."""
    kind, found = err["type"], err.get("input")
    ctx = {k: (f"{v:g}" if isinstance(v, (int, float)) and not isinstance(v, bool) else v)
           for k, v in (err.get("ctx") or {}).items()}
    words = {
        "float_type": "expected a number",
        "float_parsing": "expected a number",
        "int_type": "expected a whole number",
        "int_parsing": "expected a whole number",
        "int_from_float": "expected a whole number",
        "finite_number": "expected a finite number",
        "string_type": "expected text",
        "bool_type": "expected true or false",
        "list_type": "expected a list",
        "dict_type": "expected a table",
        "model_type": "expected a table",
        "greater_than": f"expected a number above {ctx.get('gt')}",
        "greater_than_equal": f"expected at least {ctx.get('ge')}",
        "less_than": f"expected a number below {ctx.get('lt')}",
        "less_than_equal": f"expected at most {ctx.get('le')}",
        "string_too_short": "must not be empty",
    }
    if kind == "literal_error":
        msg = "expected " + str(ctx.get("expected", "")).replace(" or ", " or ")
    elif kind in words:
        msg = words[kind]
    else:
        msg = err["msg"]
        if msg.startswith("Value error, "):
            msg = msg[len("Value error, "):]
        return msg
    if found is not None and not isinstance(found, (dict, list)):
        msg += f" (found {_shown(found)})"
    return msg


def _format_validation(exc: ValidationError) -> str:
    """One ``field.path: message`` line per problem, in the words of a case file."""
    lines = []
    for err in exc.errors():
        path = ""
        for part in err["loc"]:
            if isinstance(part, str) and part.startswith("function-"):
                continue
            path += f"[{part}]" if isinstance(part, int) else (f".{part}" if path else str(part))
        if err["type"] == "extra_forbidden":
            msg = "unknown key (not part of the case contract)"
        elif err["type"] == "missing":
            msg = "required key is missing"
        else:
            msg = _plain(err)
        lines.append(f"{path}: {msg}" if path else msg)
    return "\n".join(lines)


def parse_case(data: dict, *, source: str = "case") -> Case:
    """Validate a case mapping; raise :class:`CaseError` with one line per problem."""
    try:
        return Case.model_validate(data)
    except ValidationError as exc:
        raise CaseError(_format_validation(exc), source=source) from None


def _read_text(path: Path, *, what: str, named_in: str) -> str:
    data = read_bounded(path, what=what, named_in=named_in)
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise CaseError(f"{what} {path} is not UTF-8 text ({exc.reason} at byte {exc.start})", source=named_in) from None


def load_toml(path: str | Path) -> dict:
    """Read a TOML file; syntax errors name the file, line and column."""
    path = Path(path)
    raw = read_bounded(path, what="case", named_in=str(path))
    try:
        return tomllib.loads(raw.decode("utf-8-sig"))
    except UnicodeDecodeError:
        raise CaseError("not UTF-8 text", source=str(path)) from None
    except tomllib.TOMLDecodeError as exc:
        raise CaseError(f"TOML syntax error: {exc}", source=str(path)) from None
    except RecursionError:
        raise CaseError("TOML nested too deeply to be a case file", source=str(path)) from None


def load_case(path: str | Path, *, process_resolver=None) -> LoadedCase:
    """Read a case file and the logs it names (paths relative to the case file).

    ``process_resolver(ref) -> dict`` resolves ``deviation.process_ref`` to a ``[process]``
    table (from the process library in the store); without one, a reference is an error.
    """
    path = Path(path)
    data = load_toml(path)
    source = str(path)
    dev = data.get("deviation") if isinstance(data.get("deviation"), dict) else None
    if dev is not None and dev.get("process_ref"):
        if "process" in data:
            raise CaseError("give either [process] or deviation.process_ref, not both", source=source)
        if process_resolver is None:
            raise CaseError(
                f"deviation.process_ref '{dev['process_ref']}' needs a process library (--db)",
                source=source,
            )
        data = dict(data)
        data["process"] = process_resolver(dev["process_ref"])
    case = parse_case(data, source=source)
    dev = case.deviation
    for key in ("retort_log", "cold_spot_log"):
        value = getattr(dev, key)
        if value is not None and not value.strip():
            raise CaseError(f"deviation.{key} is empty; give the path of the CSV file, or leave the key out",
                            source=source)
    if not dev.retort_log and not dev.events:
        raise CaseError("no record of the cycle: give deviation.retort_log (the recorder's CSV) or the "
                        "readings seen ([[deviation.events]]); nothing can be evaluated without one",
                        source=source)
    retort_text = retort_src = cold_text = cold_src = None
    base = path.parent
    if case.deviation.retort_log:
        p = Path(case.deviation.retort_log)
        p = p if p.is_absolute() else base / p
        retort_text, retort_src = _read_text(p, what="deviation.retort_log", named_in=source), str(p)
    if case.deviation.cold_spot_log:
        p = Path(case.deviation.cold_spot_log)
        p = p if p.is_absolute() else base / p
        cold_text, cold_src = _read_text(p, what="deviation.cold_spot_log", named_in=source), str(p)
    digest = hashlib.sha256()
    digest.update(read_bounded(path, what="case", named_in=source))
    for text in (retort_text, cold_text):
        digest.update(b"\0" + (text or "").encode())
    return LoadedCase(
        case=case,
        source=source,
        sha256=digest.hexdigest(),
        retort_log_text=retort_text,
        retort_log_source=retort_src,
        cold_spot_log_text=cold_text,
        cold_spot_log_source=cold_src,
    )


# Descriptions (with units) of the keys whose field does not carry one, for ``deviation schema``.
_DESCRIPTIONS = {
    "AlternateProcess": {
        "process_temperature_C": "Retort temperature of the alternate process [°C]",
        "process_time_min": "Hold at that temperature [min]",
        "come_up_time_min": "Come-up time of the alternate (default: the scheduled process's) [min]",
        "minimum_initial_temperature_C": "Lowest initial temperature of the alternate [°C]",
    },
    "Container": {
        "shape": "cylinder (can, jar) or brick (tray, pouch)",
        "diameter_mm": "Inside diameter of a cylinder [mm]", "height_mm": "Inside height of a cylinder [mm]",
        "length_mm": "Inside length of a brick [mm]", "width_mm": "Inside width of a brick [mm]",
        "thickness_mm": "Inside thickness of a brick [mm]",
    },
    "CriticalFactor": {
        "name": "Name of the critical factor as filed", "unit": "Its unit (text)",
        "min": "Lowest value filed [the factor's unit]", "max": "Highest value filed [the factor's unit]",
    },
    "CriticalFactorReading": {
        "name": "The filed critical factor this reading is of", "value": "The reading [the factor's unit]",
        "note": "Free text",
    },
    "Deviation": {
        "lot": "Lot or code of the containers", "retort_id": "The retort (or line) that ran the cycle",
        "plant": "The plant", "date": "Date of the cycle (ISO 8601)",
        "lot_size_containers": "Containers in the lot [-]",
        "initial_temperature_C": "Product temperature at steam on, this lot [°C]",
        "retort_log": "Path of the retort recorder's CSV (time_min or time; temperature_C or _F; optional "
                      "indicating_temperature_C and system columns)",
        "cold_spot_log": "Path of a measured cold-spot CSV (a thermocouple in the load)",
        "process_ref": "A filed process from the library: ID or ID@version (instead of [process])",
        "reprocess_from_temperature_C": "Product temperature a reprocess would start from [°C]",
        "events": "What was seen at the retort (see DeviationEvent), times in minutes from steam on",
        "critical_factor_readings": "Readings of the filed critical factors",
        "uncertainty": "Spreads for the Monte Carlo estimate",
        "description": "Free text",
    },
    "DeviationEvent": {
        "kind": "What the event is (see the kinds above)",
        "at_min": "Time of a reading [min from steam on]", "start_min": "Start [min from steam on]",
        "end_min": "End [min from steam on]", "temperature_C": "Temperature read (the lowest, for an interval) [°C]",
        "process_time_min": "Hold actually given [min]", "come_up_time_min": "Come-up actually taken [min]",
        "vent_time_min": "Vents open for [min]", "vent_temperature_C": "Retort temperature the vents closed at [°C]",
        "level_above_top_mm": "Water level above the top layer; negative below it [mm]",
        "rpm": "Rotation speed [rpm]", "speed_fraction": "Reel or conveyor speed as a fraction of the filed speed [-]",
        "note": "Free text",
    },
    "HeatPenetration": {"model": "conduction, heating-curve or finite-difference (see the README)"},
    "Process": {
        "id": "Identifier of the scheduled process", "product": "Product and container, in words",
        "retort_type": "Retort type in words (the system, when filed, is [process.system])",
        "process_temperature_C": "Filed retort temperature for the hold [°C]",
        "come_up_time_min": "Filed come-up time, steam on to process temperature [min]",
        "minimum_initial_temperature_C": "Filed lowest initial product temperature [°C]",
        "reference_temperature_C": "Tref of the filed F [°C] (121.1 for F0)",
        "z_C": "z of the filed F [°C difference] (10 for F0)",
        "microbiology": "The organisms the target is set against",
        "container": "Container shape and inside dimensions", "heat_penetration": "The cold-spot model",
        "alternate": "Alternate processes filed with the scheduled process",
        "critical_factors": "Filed critical factors with their limits",
    },
    "RetortSystem": {"kind": "still-steam, water-immersion, water-spray, steam-air, agitating-batch, "
                             "continuous-rotary or hydrostatic (21 CFR 113.40)"},
    "Stream": {"entry_start_min": "First container entry [min on the shell record's axis]",
               "entry_end_min": "Last container entry [min on the shell record's axis]"},
    "UncertaintySpec": {"samples": "Monte Carlo samples [-]", "seed": "Random seed (the same seed, the same figures)"},
}


def case_json_schema() -> dict:
    """JSON schema of the case file (``deviation schema``): every key with its meaning and unit."""
    schema = Case.model_json_schema()
    for model, props in _DESCRIPTIONS.items():
        for key, text in props.items():
            prop = schema["$defs"][model]["properties"][key]
            prop.setdefault("description", text)
    return schema
