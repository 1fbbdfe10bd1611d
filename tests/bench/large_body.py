#!/usr/bin/env python3
"""Write a large invented body for the whole-body benchmark: a trunk and N-1 appendages (values illustrative).

    large_body.py SEGMENTS AXIAL RADIAL > case.toml

Each appendage is a cylinder with bone, muscle, fat and skin layers (RADIAL cells in all), AXIAL cells long,
a countercurrent exchanger and shunts, attached along the trunk; pairs (count = 2) alternate with singles.
"""
import sys

segments, axial, radial = (int(a) for a in sys.argv[1:4])
bone, fat, skin = max(radial // 8, 1), max(radial // 8, 1), max(radial // 8, 1)
muscle = radial - bone - fat - skin
print(f'''title = "Large invented body, {segments} segments (benchmark; values illustrative)"
[run]
duration = "1 h"
output_interval = "10 min"
[body]
respiratory_segment = "trunk"
[environment]
temperature = "10 degC"
speed = "2 m/s"
[[segments]]
name = "trunk"
shape = "cylinder"
length = "40 cm"
axial_cells = {axial}
layers = [{{ tissue = "viscera", thickness = "6 cm", cells = {bone + muscle} }},
          {{ tissue = "fat", thickness = "1 cm", cells = {fat} }},
          {{ tissue = "skin", thickness = "0.3 cm", cells = {skin} }}]
coat = {{ material = "fur", thickness = "1.5 cm", cells = 2 }}
surface = {{ ends = "insulated" }}''')
for k in range(1, segments):
    print(f'''[[segments]]
name = "limb{k}"
parent = "trunk"
count = {1 + k % 2}
attach_position = {k / segments:.4f}
shape = "cylinder"
length = "15 cm"
axial_cells = {axial}
layers = [{{ tissue = "bone", thickness = "0.4 cm", cells = {bone} }},
          {{ tissue = "muscle", thickness = "0.8 cm", cells = {muscle} }},
          {{ tissue = "fat", thickness = "0.1 cm", cells = {fat} }},
          {{ tissue = "skin", thickness = "0.15 cm", cells = {skin} }}]
vessels = {{ countercurrent_conductance = "0.05 W/K", shunt_flow_max = "2 mL/min" }}
vasomotor = {{ shunt = 0.5 }}''')
