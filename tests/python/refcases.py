"""Shared reference cases for the Python checks: configs as dicts, and a small TOML writer.

CLASSIC holds the classic annual-mean hemispheric parameter set of configs/classic-step-albedo.toml
(North, Cahalan and Coakley 1981, Rev. Geophys. 19, as often quoted, from memory; D calibrated to
0.52 W m-2 K-1 as in that config), so that the reference self-checks run without the repository's
configs. Units as in the config keys (W m-2, W m-2 K-1, degrees C, J m-2 K-1, years).
"""

from __future__ import annotations

import copy
import json

CLASSIC = {
    "grid": {"domain": "hemisphere", "bands": 90, "spacing": "equal_area"},
    "insolation": {"kind": "legendre", "solar_constant": 1337.6, "s2": -0.482},
    "albedo": {"kind": "step", "ice_free": 0.303, "ice_free_p2": 0.0779, "ice": 0.62,
               "freeze_temperature_c": -10.0},
    "longwave": {"kind": "linear", "a": 203.3, "b": 2.09},
    "transport": {"kind": "diffusive", "diffusivity": 0.52},
    "heat_capacity": {"value": 4.0e8},
    "initial": {"temperature_c": 15.0},
    "time": {"years": 50, "output_every_years": 1, "method": "implicit", "tolerance": 1.0e-4},
}


def classic(**sections) -> dict:
    """A deep copy of CLASSIC with whole sections replaced or extended (dict per section)."""
    cfg = copy.deepcopy(CLASSIC)
    for name, values in sections.items():
        # Every key of these sections but `kind` belongs to one kind, and icefold refuses a key
        # of another kind: a new kind starts the section afresh.
        old_kind = cfg.get(name, {}).get("kind")
        if name in ("longwave", "transport") and values.get("kind", old_kind) != old_kind:
            cfg[name] = {}
        cfg.setdefault(name, {}).update(values)
    return cfg


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v)  # a JSON string is a valid TOML basic string
    raise TypeError(f"cannot write {v!r} as TOML")


def to_toml(cfg: dict) -> str:
    """TOML text of a two-level config (tables of scalars, plus top-level scalars)."""
    lines = [f"{k} = {_toml_value(v)}" for k, v in cfg.items() if not isinstance(v, dict)]
    for name, table in cfg.items():
        if isinstance(table, dict):
            lines.append(f"\n[{name}]")
            lines += [f"{k} = {_toml_value(v)}" for k, v in table.items()]
    return "\n".join(lines) + "\n"
