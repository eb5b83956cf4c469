"""Fuel emission factors and CO2e of vehicle-km.

Diesel factors: EN 16258:2012, Annex A (from memory, as listed in the
project's trade facts): 2.67 kg CO2e per litre tank-to-wheel, 3.24
well-to-wheel. Cross-check: US EPA emission factors for greenhouse gas
inventories, 10.21 kg CO2 per US gallon of diesel (from memory), with
1 US gallon = 3.785411784 L exactly (the US survey definition, 231 cubic
inches).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from hubnet.emissions import FuelFactor, co2e_kg, co2e_kg_array, litres, load_fuels
from hubnet.errors import InputError

US_GALLON_L = 3.785411784  # exact: 231 in3 x (2.54 cm)^3 = 3785.411784 cm3
EPA_DIESEL_KG_CO2_PER_GAL = 10.21  # US EPA GHG emission factors hub, from memory


def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "fuels.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_bundled_diesel_factors_are_en_16258() -> None:
    # EN 16258:2012 Annex A (from memory): diesel TTW 2.67, WTW 3.24 kg CO2e/L.
    diesel = load_fuels()["diesel"]
    assert diesel == FuelFactor("diesel", 2.67, 3.24, diesel.source)
    assert "EN 16258" in diesel.source and "ISO 14083" in diesel.source


def test_every_bundled_fuel_names_its_source() -> None:
    for fuel, factor in load_fuels().items():
        assert factor.fuel == fuel
        assert len(factor.source) > 20, fuel
        assert factor.wtw_kg_per_l >= factor.ttw_kg_per_l  # WTW includes TTW


def test_diesel_ttw_agrees_with_the_epa_factor_within_2_percent() -> None:
    # EPA: 10.21 kg CO2 / 3.785411784 L = 2.6972 kg/L (from memory); EN 16258 TTW
    # 2.67 kg CO2e/L differs by (2.6972 - 2.67) / 2.6972 = 1.0 %.
    epa_per_l = EPA_DIESEL_KG_CO2_PER_GAL / US_GALLON_L
    assert epa_per_l == pytest.approx(2.6972, abs=1e-4)
    assert load_fuels()["diesel"].ttw_kg_per_l == pytest.approx(epa_per_l, rel=0.02)


def test_100_km_at_30_l_per_100km_of_diesel() -> None:
    # 100 km x 30 L / 100 km = 30 L; 30 x 2.67 = 80.1 kg TTW, 30 x 3.24 = 97.2 kg WTW
    # (EN 16258 Annex A factors, from memory).
    diesel = load_fuels()["diesel"]
    assert litres(100.0, 30.0) == pytest.approx(30.0)
    ttw, wtw = co2e_kg(100.0, 30.0, diesel)
    assert ttw == pytest.approx(80.1)
    assert wtw == pytest.approx(97.2)


def test_array_variant_matches_and_broadcasts() -> None:
    # 250 km at 32 L/100 km = 80 L -> 80 x 2.67 = 213.6 kg TTW, 80 x 3.24 = 259.2 kg WTW;
    # 0 km -> 0 kg; 100 km at 30 L/100 km -> 80.1 / 97.2 kg as above.
    diesel = load_fuels()["diesel"]
    ttw, wtw = co2e_kg_array([250.0, 0.0, 100.0], [32.0, 32.0, 30.0], diesel)
    np.testing.assert_allclose(ttw, [213.6, 0.0, 80.1])
    np.testing.assert_allclose(wtw, [259.2, 0.0, 97.2])
    for km, use, t, w in zip([250.0, 0.0, 100.0], [32.0, 32.0, 30.0], ttw, wtw, strict=True):
        assert (t, w) == pytest.approx(co2e_kg(km, use, diesel))
    ttw2, _ = co2e_kg_array(np.array([[100.0], [200.0]]), 30.0, diesel)
    assert ttw2.shape == (2, 1)
    np.testing.assert_allclose(ttw2[:, 0], [80.1, 160.2])


def test_negative_inputs_raise() -> None:
    diesel = load_fuels()["diesel"]
    with pytest.raises(ValueError):
        co2e_kg(-1.0, 30.0, diesel)
    with pytest.raises(ValueError):
        co2e_kg_array([1.0, float("nan")], 30.0, diesel)


def test_bundled_table_is_a_fresh_dict() -> None:
    table = load_fuels()
    table.pop("diesel")
    assert "diesel" in load_fuels()


def test_user_fuel_file_replaces_the_table(tmp_path: Path) -> None:
    # A user's own factors (hand-made values, no source given: the path stands in).
    path = _write(tmp_path, "[hvo]\nttw_kg_per_l = 0\nwtw_kg_per_l = 0.5\n")
    table = load_fuels(path)
    assert list(table) == ["hvo"]
    assert table["hvo"] == FuelFactor("hvo", 0.0, 0.5, str(path))
    # 200 km at 30 L/100 km = 60 L -> 0 kg TTW, 60 x 0.5 = 30 kg WTW.
    assert co2e_kg(200.0, 30.0, table["hvo"]) == pytest.approx((0.0, 30.0))


def test_user_fuel_file_typo_names_the_key_with_did_you_mean(tmp_path: Path) -> None:
    path = _write(
        tmp_path,
        '[diesel]\nttw_kg_per_l = 2.67\nwtw_kg_per_litre = 3.24\nsource = "mine"\n',
    )
    with pytest.raises(InputError) as err:
        load_fuels(path)
    problems = {p.column: p for p in err.value.problems}
    typo = problems["diesel.wtw_kg_per_litre"]
    assert "did you mean 'wtw_kg_per_l'" in typo.message
    assert typo.row == 3
    assert "missing" in problems["diesel.wtw_kg_per_l"].message


def test_user_fuel_file_bad_values(tmp_path: Path) -> None:
    path = _write(
        tmp_path,
        "petrol = 2.4\n"
        "[a]\nttw_kg_per_l = -1\nwtw_kg_per_l = 3\n"
        '[b]\nttw_kg_per_l = 3\nwtw_kg_per_l = 2\nsource = ""\n'
        '[c]\nttw_kg_per_l = "2.67"\nwtw_kg_per_l = true\n',
    )
    with pytest.raises(InputError) as err:
        load_fuels(path)
    problems = {p.column: p for p in err.value.problems}
    assert problems["petrol"].row == 1 and "table" in problems["petrol"].message
    assert ">= 0" in problems["a.ttw_kg_per_l"].message and problems["a.ttw_kg_per_l"].row == 3
    assert "below tank-to-wheel" in problems["b.wtw_kg_per_l"].message
    assert "non-empty" in problems["b.source"].message
    assert "number" in problems["c.ttw_kg_per_l"].message
    assert "number" in problems["c.wtw_kg_per_l"].message


def test_missing_empty_and_broken_fuel_files(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="not found"):
        load_fuels(tmp_path / "none.toml")
    with pytest.raises(InputError, match="no fuel"):
        load_fuels(_write(tmp_path, "# nothing\n"))
    with pytest.raises(InputError, match="not valid TOML"):
        load_fuels(_write(tmp_path, "[diesel\n"))


#: A user's own fuel table: tank-to-wheel from the US EPA greenhouse gas
#: inventory factor, 10.21 kg CO2 per US gallon of diesel = 2.70 kg per litre
#: (from memory); well-to-wheel kept at EN 16258:2012 Annex A's 3.24 (from
#: memory). Named differently from the bundled fuel, so that using the
#: bundled table by mistake fails on the name.
USER_FUELS = """
[diesel_epa]
ttw_kg_per_l = 2.70
wtw_kg_per_l = 3.24
source = "US EPA GHG inventory factor for diesel (from memory); WTW from EN 16258"
"""


def _user_fuel_scenario(tmp_path: Path, fuels_text: str, fuel: str = "diesel_epa") -> Path:
    import pandas as pd
    from freightdata import write_inputs

    config = write_inputs(tmp_path / "inputs")
    folder = config.parent
    vehicles = pd.read_csv(folder / "vehicles.csv")
    vehicles["fuel"] = fuel
    vehicles.to_csv(folder / "vehicles.csv", index=False)
    (folder / "my_fuels.toml").write_text(fuels_text, encoding="utf-8")
    text = config.read_text(encoding="utf-8")
    config.write_text(
        text.replace(
            'vehicles = "vehicles.csv"', 'vehicles = "vehicles.csv"\nfuels = "my_fuels.toml"'
        ),
        encoding="utf-8",
    )
    return config


def test_a_users_fuel_table_prices_the_runs(tmp_path: Path) -> None:
    import json

    from hubnet.api import run_scenario

    config = _user_fuel_scenario(tmp_path, USER_FUELS)
    sol, out = run_scenario(config, tmp_path / "run")
    legs = sol.legs
    assert legs
    for leg in legs:
        if not leg.vehicle_km:
            continue
        per_km = {"van": 16.0, "artic": 31.0}  # L/100 km, tests/freightdata.py
        burnt = sum(
            n * leg.distance_km * per_km[c] / 100 for c, n in leg.dispatches.items() if n > 0
        )
        assert leg.co2e_ttw_kg == pytest.approx(burnt * 2.70, rel=1e-9)
        assert leg.co2e_wtw_kg == pytest.approx(burnt * 3.24, rel=1e-9)
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert str(summary["inputs"]["fuels"]).endswith("my_fuels.toml")


def test_fuels_outside_the_users_table_are_reported(tmp_path: Path) -> None:
    from hubnet.api import load_scenario

    # The user's table replaces the bundled one: 'diesel' is then unknown.
    config = _user_fuel_scenario(tmp_path, USER_FUELS, fuel="diesel")
    with pytest.raises(InputError) as err:
        load_scenario(config)
    text = str(err.value)
    assert "vehicles.csv" in text and "fuel" in text and "'diesel'" in text
    assert "diesel_epa" in text  # the names the user's table has


def test_a_bad_fuel_table_is_reported_with_the_other_problems(tmp_path: Path) -> None:
    from hubnet.api import load_scenario

    config = _user_fuel_scenario(tmp_path, USER_FUELS.replace("2.70", "-2.70"))
    demand = config.parent / "demand.csv"
    demand.write_text(
        demand.read_text(encoding="utf-8").replace("MAD,TOL,", "MAD,XXX,", 1), encoding="utf-8"
    )
    with pytest.raises(InputError) as err:
        load_scenario(config)
    files = {p.file for p in err.value.problems}
    assert any(f.endswith("my_fuels.toml") for f in files), files
    assert any(f.endswith("demand.csv") for f in files), files
