"""Independent check of the Albers equal-area conic used for map pictures.

pyproj 3.7.2 (PROJ): projects Snyder's (1987, p. 292) sphere example.
Run: python3 scripts/geometry/albers_check.py
"""
from pyproj import Transformer

t = Transformer.from_crs(
    "+proj=longlat +R=1 +no_defs",
    "+proj=aea +R=1 +lat_1=29.5 +lat_2=45.5 +lat_0=23 +lon_0=-96 +x_0=0 +y_0=0 +no_defs",
    always_xy=True,
)
x, y = t.transform(-75.0, 35.0)
print(f"x = {x:.7f}, y = {y:.7f}")
