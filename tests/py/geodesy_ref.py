"""Reference geodesy from GeographicLib (PyPI `geographiclib`, C. F. F. Karney,
"Algorithms for geodesics", J. Geodesy 87:43-55, 2013) for tests/geodesy.rs.

Reads one JSON object from stdin:
  {"pairs": [[lat1, lon1, lat2, lon2], ...], "polygons": [[[lat, lon], ...], ...]}
(degrees; polygon rings open, without the repeated first vertex) and writes
  {"distances_m": [...], "areas_m2": [...]}
on the WGS 84 ellipsoid. Areas are unsigned. Floats are written with repr, which
round-trips exactly.
"""

import json
import sys

from geographiclib.geodesic import Geodesic


def main():
    job = json.load(sys.stdin)
    geod = Geodesic.WGS84
    distances = [geod.Inverse(a, b, c, d)["s12"] for a, b, c, d in job.get("pairs", [])]
    areas = []
    for ring in job.get("polygons", []):
        poly = geod.Polygon()
        for lat, lon in ring:
            poly.AddPoint(lat, lon)
        _, _, area = poly.Compute(False, True)
        areas.append(abs(area))
    json.dump({"distances_m": distances, "areas_m2": areas}, sys.stdout)


if __name__ == "__main__":
    main()
