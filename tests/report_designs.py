"""Small design files shared by the compare and report tests: 3-turn
coils keep predict well under a second each."""

MAGNET = """
[design]
name = "pick-a"
description = "three-turn test coil under a passing dipole"
rules = "standard"
[coil]
shape = "square"
outer_mm = 8
turns = 3
width_mm = 0.3
gap_mm = 0.3
layers = 2
[board]
layers = 2
[target]
kind = "dipole"
moment_am2 = [0, 0, 0.05]
[motion]
kind = "linear"
start_mm = [-10, 0, 3]
direction = [1, 0, 0]
speed_m_s = 1.0
distance_mm = 20
"""

PLATE = """
[design]
name = "prox-b"
rules = "standard"
[coil]
shape = "circle"
outer_mm = 8
turns = 3
width_mm = 0.25
gap_mm = 0.25
layers = 2
[board]
layers = 2
[target]
kind = "plate"
outline_mm = [[-6, -6], [6, -6], [6, 6], [-6, 6]]
thickness_mm = 0.5
material = "copper"
frequency_hz = 1e6
max_cells = 150
[motion]
kind = "linear"
start_mm = [-10, 0, 1]
direction = [1, 0, 0]
speed_m_s = 0.1
distance_mm = 20
"""

NARROW = """
[design]
name = "narrow-c"
rules = "standard"
[coil]
shape = "square"
outer_mm = 8
turns = 3
width_mm = 0.12
gap_mm = 0.3
layers = 2
[board]
layers = 2
"""



def write_designs(directory) -> dict:
    """Write the designs into ``directory``; return {'magnet'|'plate'|'narrow': path}."""
    out = {}
    for key, text in (("magnet", MAGNET), ("plate", PLATE), ("narrow", NARROW)):
        p = directory / f"{key}.toml"
        p.write_text(text)
        out[key] = p
    return out
