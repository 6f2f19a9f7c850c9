#!/usr/bin/env python3
"""Writes DIR/expected.json for tests/vtk_readback.py from the report.json octocut wrote in DIR.

Usage: expected-from-report.py DIR [TAG_NAME...]
The given tag names (if any) must be the report's patch names, in order; this checks that the
configured side names reached the mesh.
"""
import json
import sys

d = sys.argv[1]
with open(f"{d}/report.json") as f:
    r = json.load(f)
names = [p["name"] for p in r["patches"]]
want = sys.argv[2:]
if want and names != want:
    sys.exit(f"{d}: patch names {names} are not the configured {want}")
if not r["valid"]:
    sys.exit(f"{d}: report says the mesh is not valid")
exp = {
    "cells": r["cells"]["total"],
    "fluid_volume": r["fluid_volume"],
    "boundary_faces": r["faces"] - r["interior_faces"],
    "boundary_area": sum(p["area"] for p in r["patches"]),
    "tag_names": names,
}
with open(f"{d}/expected.json", "w") as f:
    json.dump(exp, f, indent=1)
print(f"{d}: expecting {exp['cells']} cells, fluid volume {exp['fluid_volume']!r}")
