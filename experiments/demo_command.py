"""`liftsort demo`: the main job on the built-in invented demo building."""
from __future__ import annotations

from roundtrip.inputfile import load_scenario

from . import calc_command
from .tables import key_value_table
from .wording import CAUTION


def run(args, scenario=None) -> int:
    from .cli import demo_building_path
    scenario = load_scenario(demo_building_path())
    r = calc_command.classical_result(scenario, None, False)
    print(key_value_table(calc_command.result_rows(r),
                          f"{scenario.building.name}: classical up-peak calculation (demand mode)"))
    for line in calc_command.notes(r) + [CAUTION]:
        print("\n" + line)
    return 0
