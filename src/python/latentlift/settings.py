"""Settings as keywords: turned into the command line's ``--set section.key=value`` overrides,
so that the C++ configuration (src/cli/config.cpp) checks them and names a bad key itself."""

from __future__ import annotations

import os
from typing import Any, Iterable, Mapping


def overrides_of(settings: Mapping[str, Any], overrides: Iterable[str] | Mapping[str, Any] | None = None) -> list[str]:
    """``buoyancy="temperature"`` -> ``analysis.buoyancy=temperature``; ``overrides`` are passed
    as they are (``"input.relative_humidity_over=mixed"`` or ``{"input.relative_humidity_over": "mixed"}``)."""
    out = []
    for key, value in settings.items():
        out.append(f"{key if '.' in key else 'analysis.' + key}={_toml_value(value)}")
    if isinstance(overrides, Mapping):
        out.extend(f"{key}={_toml_value(value)}" for key, value in overrides.items())
    elif overrides is not None:
        if isinstance(overrides, str):
            overrides = [overrides]
        out.extend(str(item) for item in overrides)
    return out


def config_path_of(config: str | os.PathLike | None) -> str:
    """The --config file ("" for none); the C++ configuration reads and checks it."""
    return "" if config is None else os.fspath(config)


def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_quoted(v) for v in value) + "]"
    return str(value)


def _toml_quoted(value: Any) -> str:
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    return _toml_value(value)
