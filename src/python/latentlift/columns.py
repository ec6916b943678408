"""The column kernel over NumPy arrays."""

from __future__ import annotations

import os
from typing import Any, Iterable, Mapping

import numpy as np

from latentlift import _core
from latentlift.settings import config_path_of, overrides_of

HUMIDITY_KINDS = ("specific_humidity", "relative_humidity", "dew_point_temperature", "humidity_mixing_ratio")


def analyze_columns(
    temp_k: Any,
    humidity: Any,
    pressure_pa: Any,
    *,
    humidity_kind: str = "specific_humidity",
    height_m: Any = None,
    surface_pressure_pa: Any = None,
    level_fields: bool = False,
    threads: int = 0,
    config: str | os.PathLike | None = None,
    overrides: Iterable[str] | Mapping[str, Any] | None = None,
    **settings: Any,
) -> dict:
    """Analyse N columns with the C++ kernel (OpenMP over columns, the GIL released).

    Arrays have the levels as their last axis, any float dtype, NaN for missing, SI units:
    ``temp_k`` (K), ``humidity`` (kg/kg for specific humidity and mixing ratio, a fraction 0-1
    for relative humidity (over water), K for dew point; ``humidity_kind`` says which), ``pressure_pa``
    (Pa: one per level, shape ``(levels,)``, or one per level and column), optional
    ``height_m`` (geopotential height, m) and ``surface_pressure_pa`` (Pa, one per column).
    Settings are the config keys of section ``analysis`` as keywords (``buoyancy``,
    ``top_pressure_hpa``, ``source_layer_hpa``, ``min_excess_k``, ``mu_parcel``) and/or a
    config file.

    Returns a dict of arrays named like the output fields of ``latentlift analyze`` in its
    units (hPa, K, m, J kg-1; float32, NaN missing; ``latent_class`` int8, -1 missing), shape
    of the columns; with ``level_fields`` also the per-level fields (shape of ``temp_k``);
    and ``qc``, the quality-control counts.
    """
    return _core.analyze_columns(
        np.asarray(temp_k),
        np.asarray(humidity),
        np.asarray(pressure_pa),
        humidity_kind,
        None if height_m is None else np.asarray(height_m),
        None if surface_pressure_pa is None else np.asarray(surface_pressure_pa),
        config_path_of(config),
        overrides_of(settings, overrides),
        bool(level_fields),
        int(threads),
    )
