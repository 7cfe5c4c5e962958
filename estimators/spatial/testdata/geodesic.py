#!/usr/bin/python3
"""Independent reference for the local projection: geodesic distances on
the WGS84 ellipsoid from Debian's python3-pyproj (PROJ's geodesic
routines, Karney 2013). Run with /usr/bin/python3 from this directory; it
writes geodesic.csv, which is committed. The Go tests never run Python."""
import csv
import math

from pyproj import Geod

geod = Geod(ellps="WGS84")
rows = []
# Centres at several latitudes (both hemispheres, one across the 180th
# meridian); for each, stations at east/north offsets (metres) laid out
# with a crude spherical conversion; only the lat/lon written here matter.
centres = [(0.0, 10.0), (-33.9, 18.4), (45.0, 7.0), (61.5, -149.9), (-12.0, 179.99)]
offsets = [(-500, -500), (500, 500), (1000, 0), (0, 1000), (-2000, 1500), (4000, -3000), (9000, 9000)]
for lat0, lon0 in centres:
    pts = []
    for dx, dy in offsets:
        lat = lat0 + dy / 111132.0
        lon = lon0 + dx / (111320.0 * math.cos(math.radians(lat0)))
        if lon > 180:
            lon -= 360
        pts.append((lat, lon))
    for i in range(len(pts)):
        for j in range(i + 1, len(pts)):
            (la1, lo1), (la2, lo2) = pts[i], pts[j]
            _, _, d = geod.inv(lo1, la1, lo2, la2)
            rows.append([lat0, lon0, "%.10f" % la1, "%.10f" % lo1, "%.10f" % la2, "%.10f" % lo2, "%.4f" % d])
with open("geodesic.csv", "w", newline="") as f:
    w = csv.writer(f)
    w.writerow(["lat0", "lon0", "lat1", "lon1", "lat2", "lon2", "geodesic_m"])
    w.writerows(rows)
