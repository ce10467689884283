"""`sweepgate.plan` against `sweepgate plan` on every shipped scenario and plan file, from
the file and from a dict of the same tables."""

import json

import pytest

import sweepgate
from conftest import REPO, run_cli

FILES = sorted((REPO / "host-sim" / "scenarios").glob("*.toml")) + sorted(
    (REPO / "host-sim" / "plans").glob("*.toml")
)


def test_there_are_files_to_plan():
    assert len(FILES) >= 6


@pytest.mark.parametrize("path", FILES, ids=lambda p: p.name)
def test_plan_equals_the_command(sweepgate_bin, path):
    want = json.loads(run_cli(sweepgate_bin, "plan", "--scenario", path, "--json").stdout)
    got = sweepgate.plan(path)
    assert got == want
    text = run_cli(sweepgate_bin, "plan", "--scenario", path).stdout
    assert sweepgate.plan_text(path) == text


@pytest.mark.parametrize("path", FILES, ids=lambda p: p.name)
def test_plan_from_a_dict_equals_the_file(path):
    tomllib = pytest.importorskip("tomllib")  # Python 3.11+
    table = tomllib.loads(path.read_text())
    from_file = sweepgate.plan(path)
    from_dict = sweepgate.plan(table)
    # Only where the input came from differs (and the name, which a plan file without one
    # takes from its origin).
    assert from_dict["file"] == "plan dict"
    for key in ["file", "name"]:
        from_file.pop(key)
        from_dict.pop(key)
    assert from_dict == from_file


def test_overrides_equal_the_command_line_options(sweepgate_bin):
    path = REPO / "host-sim" / "scenarios" / "demo-lab.toml"
    want = json.loads(run_cli(
        sweepgate_bin, "plan", "--scenario", path, "--json", "--band-window", "hann",
        "--aut-size-m", "0.3", "--fractional-bandwidth", "0.1", "--rotation-deg-s", "4",
    ).stdout)
    got = sweepgate.plan(path, band_window="hann", aut_size_m=0.3, fractional_bandwidth=0.1,
                         rotation_deg_s=4)
    assert got == want
    assert got["inputs"]["band_window"] == "hann"
    assert got["inputs"]["aut_size_source"] == "command_line"


def test_a_dict_plan_uses_its_numbers():
    # The planner on a dict: direct path over 5 m between antennas at equal heights, and the
    # floor bounce at the image distance sqrt(5^2 + (1+1)^2) (image method).
    plan = sweepgate.plan({
        "sweep": {"start_hz": 2e9, "stop_hz": 6e9, "points": 401, "sweep_duration_s": 0.2},
        "range": {"distance_m": 5, "aut_height_m": 1, "probe_height_m": 1},
        "planes": [{"name": "floor", "axis": "z", "position_m": 0.0, "reflection": -0.5}],
    })
    c = 299_792_458.0
    assert plan["paths"]["direct_path_m"] == pytest.approx(5.0, rel=1e-12)
    floor = [e for e in plan["paths"]["echoes"] if e["name"] == "floor"][0]
    assert floor["path_m"] == pytest.approx((25 + 4) ** 0.5, rel=1e-9)
    assert floor["excess_delay_s"] == pytest.approx(((29 ** 0.5) - 5) / c, rel=1e-6)
    assert plan["gate"] is not None
