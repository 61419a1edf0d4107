"""Rig-file text shared by the tests: the smallest rig file that loads (no channels, no source)."""

MINIMAL_RIG = """
format = 1
[rig]
name = "t"
kind = "stand"
gas = "N2"
[tank]
volume = "1 L"
fill_pressure = "200 bar gauge"
fill_temperature = "20 C"
meop = "230 bar gauge"
[regulator]
set_pressure = "6 bar gauge"
min_inlet_pressure = "10 bar gauge"
[nozzle]
throat_diameter = "1 mm"
exit_diameter = "2 mm"
[vehicle]
dry_mass = "1 kg"
"""


def with_rig_lines(text: str, *lines: str) -> str:
    """The rig text with lines added at the end of its [rig] table (e.g. 'ambient_pressure = "95 kPa abs"')."""
    return text.replace('gas = "N2"\n', 'gas = "N2"\n' + "".join(line + "\n" for line in lines), 1)
