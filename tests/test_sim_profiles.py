"""Simulator profiles: the shipped ones load, bad ones are refused with the file and key named,
and production units are drawn from the spread reproducibly.

The spread check is statistics (a sample's relative standard deviation estimates sigma within
about 1/sqrt(2N)); the rest checks behaviour promised by drivers/simulator/profiles.py.
"""

from __future__ import annotations

import numpy as np
import pytest

from drivers.errors import ProfileError
from drivers.simulator import running
from drivers.simulator.profiles import (
    draw_unit,
    list_profiles,
    load_dut,
    load_fixture,
    load_meter,
)

SHIPPED_DUTS = [
    "air-core-coil",
    "demo-coil",
    "ferrite-choke",
    "ferrite-power-choke",
    "powder-choke",
    "rf-coil",
]
SHIPPED_FIXTURES = ["bench-leads", "cable-leads", "direct", "long-leads"]


def test_shipped_profiles_are_listed_by_group():
    assert list_profiles("dut") == SHIPPED_DUTS
    assert list_profiles("standard") == ["load", "open", "short"]
    assert list_profiles("fixture") == SHIPPED_FIXTURES
    assert list_profiles("meter") == ["simulated-meter"]
    assert set(list_profiles()) >= set(SHIPPED_DUTS + SHIPPED_FIXTURES + ["open"])
    with pytest.raises(ProfileError, match="unknown profile group"):
        list_profiles("coils")


@pytest.mark.parametrize("name", SHIPPED_DUTS + ["open", "short", "load"])
def test_every_shipped_dut_loads(name):
    dut = load_dut(name)
    assert dut.name == name and dut.path is not None
    assert dut.impedance(np.array([1e3])).shape == (1,)


def test_shipped_values_and_defaults():
    coil = load_dut("air-core-coil")
    assert coil.kind == "coil" and coil.inductance == 10e-6 and coil.ac_exponent == 0.5
    assert coil.core_loss_tangent == 0.0 and coil.spread["inductance"] == 0.01
    demo = load_dut("demo-coil")
    assert demo.spread == {"inductance": 0.01, "dc_resistance": 0.02, "capacitance": 0.05}
    leads = load_fixture("long-leads")
    assert leads.series_inductance >= 0.1 * coil.inductance
    assert load_fixture("cable-leads").line.velocity_factor == 0.66
    assert load_meter().serial == "SIM-000001"
    assert load_dut("NONE").kind == "none"
    with pytest.raises(AttributeError, match="no 'resistance'"):
        _ = coil.resistance


def write(tmp_path, text: str, name: str = "bad.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


@pytest.mark.parametrize(
    ("text", "message"),
    [
        (
            "kind = 'coil'\ninductance = 1e-6\ndc_resistance = 1\ncolour = 'red'\n",
            r"bad.toml: unknown key 'colour' \(allowed: ",
        ),
        ("kind = 'coil'\ninductance = 1e-6\n", r"bad.toml: missing key 'dc_resistance' \(ohm\)"),
        (
            "kind = 'coil'\ninductance = -1e-6\ndc_resistance = 1\n",
            r"bad.toml: 'inductance' must be greater than 0, got -1e-06",
        ),
        (
            "kind = 'coil'\ninductance = 1e-6\ndc_resistance = -1\n",
            r"bad.toml: 'dc_resistance' must not be negative",
        ),
        (
            "kind = 'coil'\ninductance = '1uH'\ndc_resistance = 1\n",
            r"bad.toml: 'inductance' must be a number in H, got '1uH'",
        ),
        (
            "kind = 'coil'\ninductance = 1e-6\ndc_resistance = 1\n[spread]\nwidth = 0.1\n",
            r"unknown key spread.'width'",
        ),
        ("kind = 'coil'\ninductance = \n", r"bad.toml: not valid TOML"),
        ("kind = 'gadget'\n", r"bad.toml: kind 'gadget' is not one of"),
        ("inductance = 1e-6\n", r"bad.toml: missing key 'kind'"),
        ("kind = 'open'\nresistance = 1\n", r"unknown key 'resistance' \(allowed: description"),
        (
            "kind = 'coil'\ninductance = 1e-6\ndc_resistance = 1\n[[faults]]\nkind = 'smoke'\n",
            r"faults\[0\].'kind' must be one of drop",
        ),
        (
            "kind = 'coil'\ninductance = 1e-6\ndc_resistance = 1\n"
            "[[faults]]\nkind = 'drop'\nn = 0\n",
            r"faults\[0\]: n counts events from now",
        ),
    ],
)
def test_bad_dut_profiles_are_refused(tmp_path, text, message):
    with pytest.raises(ProfileError, match=message):
        load_dut(write(tmp_path, text))


def test_bad_fixture_and_meter_profiles_are_refused(tmp_path):
    with pytest.raises(ProfileError, match=r"kind 'coil' is not one of fixture"):
        load_fixture("air-core-coil")
    with pytest.raises(ProfileError, match=r"kind 'fixture' is not one of coil"):
        load_dut("bench-leads")
    fixture = "kind = 'fixture'\nseries_resistance = 0\nseries_inductance = 0\n"
    with pytest.raises(ProfileError, match=r"missing key 'shunt_capacitance' \(F\)"):
        load_fixture(write(tmp_path, fixture))
    fixture += "shunt_capacitance = 0\nshunt_conductance = 0\n[line]\nimpedance = 50\n"
    with pytest.raises(ProfileError, match=r"missing key line.'length' \(m\)"):
        load_fixture(write(tmp_path, fixture))
    meter = "kind = 'meter'\nmanufacturer = 'a,b'\n"
    with pytest.raises(ProfileError, match="missing key 'accuracy_class'"):
        load_meter(write(tmp_path, meter))


def test_unknown_names_and_missing_files(tmp_path):
    with pytest.raises(ProfileError, match=r"no shipped profile named 'copper-coil' \(shipped: "):
        load_dut("copper-coil")
    with pytest.raises(ProfileError, match="no such profile file"):
        load_dut(tmp_path / "absent.toml")


def test_running_refuses_a_bad_profile_before_starting():
    with (
        pytest.raises(ProfileError, match="no shipped profile named 'nothing-here'"),
        running(dut="nothing-here"),
    ):
        pass


def test_units_are_drawn_from_the_spread_reproducibly():
    demo = load_dut("demo-coil")
    rng = np.random.default_rng(2024)
    units = [draw_unit(demo, rng) for _ in range(2000)]
    again = [draw_unit(demo, np.random.default_rng(2024)) for _ in range(1)]
    assert again[0].values == units[0].values
    for key, sigma in demo.spread.items():
        values = np.array([u.values[key] for u in units]) / demo.values[key]
        assert values.mean() == pytest.approx(1.0, abs=5 * sigma / np.sqrt(2000))
        assert values.std(ddof=1) == pytest.approx(sigma, rel=5 / np.sqrt(2 * 2000))
    assert all(u.ac_corner_frequency == demo.ac_corner_frequency for u in units[:10])


def test_next_unit_through_the_handle_is_seeded():
    def three_units(seed: int) -> list[float]:
        with running(dut="demo-coil", seed=seed, measure_time=0) as sim:
            units = [sim.next_unit().inductance for _ in range(3)]
            sim.insert("open")
            after_standard = sim.next_unit()
            assert after_standard.name == "demo-coil" and sim.unit == 4
            return units

    first = three_units(5)
    assert first == three_units(5) != three_units(6)
    assert len(set(first)) == 3
