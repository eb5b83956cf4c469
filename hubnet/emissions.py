"""Fuel emission factors and the CO2e of vehicle-km.

The factors are data, read from a TOML file with one table per fuel
(``hubnet/factors/fuels.toml`` by default, each with its source):

``diesel``
    Tank-to-wheel 2.67 and well-to-wheel 3.24 kg CO2e per litre
    (EN 16258:2012, Annex A, from memory; EN 16258 has been replaced by
    ISO 14083:2023, which keeps the tank-to-wheel / well-to-wheel split).

Tank-to-wheel (TTW) counts burning the fuel in the vehicle; well-to-wheel
(WTW) adds producing and delivering it, so WTW >= TTW.

Units: distances km, fuel use litres per 100 vehicle-km, factors kg CO2e
per litre, results kg CO2e.
"""

from __future__ import annotations

import difflib
import math
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass
from functools import lru_cache
from importlib import resources
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt

from hubnet.errors import InputError, Problem

__all__ = ["FuelFactor", "co2e_kg", "co2e_kg_array", "litres", "load_fuels"]

_FUEL_KEYS: tuple[str, ...] = ("ttw_kg_per_l", "wtw_kg_per_l", "source")
_BUNDLED = "factors/fuels.toml"


@dataclass(frozen=True, slots=True)
class FuelFactor:
    """Emission factors of one fuel.

    Attributes
    ----------
    fuel
        Fuel name, as used in the vehicles' ``fuel`` column (``diesel``).
    ttw_kg_per_l
        Tank-to-wheel emissions, kg CO2e per litre burnt.
    wtw_kg_per_l
        Well-to-wheel emissions, kg CO2e per litre burnt (>= tank-to-wheel).
    source
        Where the values come from.
    """

    fuel: str
    ttw_kg_per_l: float
    wtw_kg_per_l: float
    source: str


def load_fuels(path: Path | None = None) -> dict[str, FuelFactor]:
    """Read a table of fuel emission factors.

    Parameters
    ----------
    path
        A TOML file with one table per fuel, each with ``ttw_kg_per_l`` and
        ``wtw_kg_per_l`` (kg CO2e per litre, >= 0, WTW >= TTW) and optional
        ``source`` text (default: the file's path). ``None`` reads the bundled
        table (``hubnet/factors/fuels.toml``). A user file replaces the
        bundled table; it does not extend it.

    Returns
    -------
    dict of str to FuelFactor
        Keyed by fuel name, in file order. A new dict on each call.

    Raises
    ------
    InputError
        When the file is missing or not valid TOML, has no fuel, or a fuel's
        table has an unknown, missing, non-numeric or negative value. Every
        problem is reported, each with its line when it can be found.
    """
    if path is None:
        return dict(_bundled_fuels())
    name = str(path)
    try:
        text = Path(path).read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError(Problem(name, None, None, "fuel factor file not found")) from None
    except (OSError, UnicodeDecodeError) as err:
        raise InputError(Problem(name, None, None, f"cannot read the file: {err}")) from None
    return _parse_fuels(_parse_toml(text, name), name, text)


@lru_cache(maxsize=1)
def _bundled_fuels() -> Mapping[str, FuelFactor]:
    text = resources.files("hubnet").joinpath(_BUNDLED).read_text(encoding="utf-8")
    name = f"hubnet/{_BUNDLED}"
    return _parse_fuels(_parse_toml(text, name), name, text)


def _parse_toml(text: str, name: str) -> dict[str, Any]:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        m = re.search(r"line (\d+)", str(err))
        line = int(m.group(1)) if m else None
        raise InputError(Problem(name, line, None, f"not valid TOML: {err}")) from None


def _key_line(text: str, table: str, key: str | None) -> int | None:
    """Line (1-based) of ``key = ...`` in ``[table]``, or of the header when key is None."""
    current: str | None = None
    header = re.compile(r"^\s*\[([^\[\]]+)\]\s*(#.*)?$")
    for number, line in enumerate(text.splitlines(), start=1):
        m = header.match(line)
        if m:
            current = m.group(1).strip().strip("\"'")
            if key is None and current == table:
                return number
            continue
        if key is not None and current == table:
            if re.match(rf"^\s*[\"']?{re.escape(key)}[\"']?\s*=", line):
                return number
    if key is None:  # a top-level `fuel = ...` instead of a table
        for number, line in enumerate(text.splitlines(), start=1):
            if re.match(rf"^\s*[\"']?{re.escape(table)}[\"']?\s*=", line):
                return number
    return None


def _parse_fuels(raw: Mapping[str, Any], file: str, text: str) -> dict[str, FuelFactor]:
    problems: list[Problem] = []
    fuels: dict[str, FuelFactor] = {}
    if not raw:
        problems.append(Problem(file, None, None, "no fuel tables found (expected [diesel] ...)"))
    for fuel, table in raw.items():
        if not isinstance(table, Mapping):
            problems.append(
                Problem(
                    file,
                    _key_line(text, fuel, None),
                    fuel,
                    f"expected a table [{fuel}] with ttw_kg_per_l, wtw_kg_per_l and source",
                )
            )
            continue

        def problem(key: str, message: str, fuel: str = fuel) -> None:
            problems.append(Problem(file, _key_line(text, fuel, key), f"{fuel}.{key}", message))

        for key in table:
            if key not in _FUEL_KEYS:
                close = difflib.get_close_matches(key, list(_FUEL_KEYS), n=1)
                hint = (
                    f"; did you mean {close[0]!r}?"
                    if close
                    else f"; known keys: {', '.join(_FUEL_KEYS)}"
                )
                problem(key, f"unknown key {key!r}{hint}")
        values: dict[str, float] = {}
        for key in _FUEL_KEYS[:2]:
            if key not in table:
                problems.append(
                    Problem(
                        file,
                        _key_line(text, fuel, None),
                        f"{fuel}.{key}",
                        "required key is missing (kg CO2e per litre, >= 0)",
                    )
                )
                continue
            value = table[key]
            if (
                not isinstance(value, int | float)
                or isinstance(value, bool)
                or not math.isfinite(value)
            ):
                problem(key, f"expected a number of kg CO2e per litre, got {value!r}")
            elif value < 0:
                problem(key, f"must be >= 0 kg CO2e per litre, got {value!r}")
            else:
                values[key] = float(value)
        if len(values) == 2 and values["wtw_kg_per_l"] < values["ttw_kg_per_l"]:
            problem(
                "wtw_kg_per_l",
                f"well-to-wheel {values['wtw_kg_per_l']:g} is below tank-to-wheel "
                f"{values['ttw_kg_per_l']:g}; well-to-wheel includes tank-to-wheel",
            )
        source = table.get("source", file)
        if not isinstance(source, str) or not source.strip():
            problem("source", f"expected non-empty text, got {source!r}")
        elif len(values) == 2:
            fuels[fuel] = FuelFactor(
                fuel, values["ttw_kg_per_l"], values["wtw_kg_per_l"], source.strip()
            )
    if problems:
        raise InputError(problems)
    return fuels


def litres(vehicle_km: float, l_per_100km: float) -> float:
    """Fuel burnt over ``vehicle_km`` at ``l_per_100km``, litres."""
    if not (vehicle_km >= 0 and l_per_100km >= 0):
        raise ValueError(
            f"vehicle-km and fuel use must be >= 0, got {vehicle_km!r} and {l_per_100km!r}"
        )
    return vehicle_km * l_per_100km / 100.0


def co2e_kg(vehicle_km: float, l_per_100km: float, factor: FuelFactor) -> tuple[float, float]:
    """CO2e of driving ``vehicle_km`` with a vehicle using ``l_per_100km`` of one fuel.

    Parameters
    ----------
    vehicle_km
        Vehicle-kilometres driven, km (>= 0).
    l_per_100km
        Fuel use, litres per 100 km (>= 0).
    factor
        The fuel's emission factors.

    Returns
    -------
    tuple of float
        ``(ttw, wtw)``: tank-to-wheel and well-to-wheel CO2e, kg.

    Examples
    --------
    >>> diesel = load_fuels()["diesel"]
    >>> ttw, wtw = co2e_kg(100.0, 30.0, diesel)  # 30 L of diesel
    >>> round(ttw, 6), round(wtw, 6)
    (80.1, 97.2)
    """
    fuel = litres(vehicle_km, l_per_100km)
    return fuel * factor.ttw_kg_per_l, fuel * factor.wtw_kg_per_l


def co2e_kg_array(
    vehicle_km: npt.ArrayLike, l_per_100km: npt.ArrayLike, factor: FuelFactor
) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """:func:`co2e_kg` over arrays (broadcast against each other).

    Parameters
    ----------
    vehicle_km
        Vehicle-kilometres, km (>= 0), any shape.
    l_per_100km
        Fuel use, litres per 100 km (>= 0), broadcastable with ``vehicle_km``.
    factor
        The fuel's emission factors (one fuel for the whole array).

    Returns
    -------
    tuple of ndarray
        ``(ttw, wtw)``, kg CO2e, of the broadcast shape.
    """
    km = np.asarray(vehicle_km, dtype=np.float64)
    use = np.asarray(l_per_100km, dtype=np.float64)
    if not (np.all(km >= 0) and np.all(use >= 0)):  # also rejects NaN
        raise ValueError("vehicle-km and fuel use must be >= 0")
    fuel = km * use / 100.0
    return fuel * factor.ttw_kg_per_l, fuel * factor.wtw_kg_per_l
