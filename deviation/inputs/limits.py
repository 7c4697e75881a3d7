"""Bounds on every value that enters: read once from ``rules/limits.toml`` (data, not code).

The case reader, the log readers, the floor screen and ``watch`` check against the same bounds
and say the same thing. A plant may give its own file with ``DEVIATION_LIMITS``; every key is
optional there, the shipped file's values stand for the rest.
"""

from __future__ import annotations

import functools
import math
import os
import tomllib
from dataclasses import dataclass, fields
from pathlib import Path

from deviation.errors import CaseError
from deviation.resources import shipped

_ENV = "DEVIATION_LIMITS"


@dataclass(frozen=True)
class Limits:
    """The bounds (see ``rules/limits.toml`` for each one's meaning and unit)."""

    retort_reading_min_C: float = 0.0
    retort_reading_max_C: float = 150.0
    initial_temperature_max_C: float = 100.0
    process_temperature_min_C: float = 90.0
    process_temperature_max_C: float = 150.0
    process_time_max_min: float = 1440.0
    come_up_time_max_min: float = 240.0
    record_span_max_min: float = 2880.0
    record_gap_limit_max_min: float = 60.0
    record_rows_max: int = 2_000_000
    file_size_max_bytes: int = 64 * 1024 * 1024
    container_dimension_min_mm: float = 1.0
    container_dimension_max_mm: float = 2000.0
    fh_min_min: float = 0.1
    fh_max_min: float = 2000.0
    j_min: float = 0.05
    j_max: float = 20.0
    diffusivity_min_m2_s: float = 1e-9
    diffusivity_max_m2_s: float = 1e-5
    target_F_min_min: float = 0.01
    target_F_max_min: float = 1000.0
    D_min_min: float = 0.001
    D_max_min: float = 100.0
    z_min_C: float = 1.0
    z_max_C: float = 100.0
    spores_per_container_max: float = 1e15
    lot_size_max_containers: int = 100_000_000
    surface_heat_transfer_max_W_m2K: float = 1e6


def shipped_limits_path() -> Path:
    """``limits.toml`` beside the default rules (installed package data, or the checkout)."""
    return shipped("rules") / "limits.toml"


def _read(path: Path, *, base: Limits | None = None) -> Limits:
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise CaseError("no such limits file", source=str(path)) from None
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise CaseError(f"cannot read the limits file: {exc}", source=str(path)) from None
    known = {f.name: f.type for f in fields(Limits)}
    values = {}
    for key, value in data.items():
        if key not in known:
            raise CaseError(f"{key}: unknown key; expected one of: {', '.join(known)}", source=str(path))
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            raise CaseError(f"{key}: expected a finite number, found {value!r}", source=str(path))
        values[key] = int(value) if known[key] == "int" else float(value)
    current = base or Limits()
    return Limits(**{**{f.name: getattr(current, f.name) for f in fields(Limits)}, **values})


@functools.lru_cache(maxsize=1)
def _cached(env_value: str | None) -> Limits:
    shipped = shipped_limits_path()
    limits = _read(shipped) if shipped.is_file() else Limits()
    if env_value:
        limits = _read(Path(env_value).expanduser(), base=limits)
    return limits


def current() -> Limits:
    """The bounds in force: the shipped file, then the plant's (``DEVIATION_LIMITS``)."""
    return _cached(os.environ.get(_ENV) or None)


def fahrenheit_hint(value_C: float, low_C: float, high_C: float) -> str | None:
    """If a °C value outside [low, high] reads well as °F, the sentence saying so."""
    as_C = (value_C - 32.0) * 5.0 / 9.0
    if low_C <= as_C <= high_C:
        return f"if it is °F ({value_C:g} °F = {as_C:.1f} °C), write it in °F or as {as_C:.1f} °C"
    return None


__all__ = ["Limits", "current", "fahrenheit_hint", "shipped_limits_path"]
