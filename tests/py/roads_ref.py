"""Independent road times on an OpenStreetMap extract, to check broodcast's road model.

Usage: python3 roads_ref.py EXTRACT.osm.pbf PAIRS.csv

Reads the extract with pyosmium, builds the drivable graph from its own copy of the rules
in docs/model.md (kept highway classes, default speeds, maxspeed parsing, oneway rules;
segment length = WGS 84 geodesic from GeographicLib), and runs scipy.sparse.csgraph's
Dijkstra. For each pair broodcast wrote (its trip's entry and exit nodes with their extra
minutes, and its total), the reference total is the least entry + road + exit over the
same nodes; they must agree to 1e-6 minutes. Every pair's total must also be at least the
geodesic distance between the two points at the fastest speed of any kept road.
Prints one summary line; exits 1 on any disagreement.
"""

import csv
import sys

import numpy as np
import osmium
from geographiclib.geodesic import Geodesic
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import dijkstra

SPEEDS = {  # km/h, the same defaults as docs/model.md
    "motorway": 90, "motorway_link": 45, "trunk": 85, "trunk_link": 40,
    "primary": 65, "primary_link": 30, "secondary": 55, "secondary_link": 25,
    "tertiary": 40, "tertiary_link": 20, "unclassified": 25, "residential": 25,
    "living_street": 10, "service": 15, "track": 15,
}


def maxspeed(v):
    v = v.strip()
    factor = 1.0
    for suffix, f in (("mph", 1.609344), ("km/h", 1.0), ("kmh", 1.0), ("kph", 1.0)):
        if v.endswith(suffix):
            v, factor = v[: -len(suffix)].strip(), f
            break
    if not v or not all(c.isdigit() or c == "." for c in v):
        return None
    try:
        kmh = float(v) * factor
    except ValueError:
        return None
    return kmh if 0 < kmh <= 150 else None


def directions(tags):
    ow = tags.get("oneway")
    ow = ow.strip() if ow is not None else None
    if ow in ("yes", "true", "1"):
        return True, False
    if ow in ("-1", "reverse"):
        return False, True
    if ow in ("no", "false", "0"):
        return True, True
    if tags.get("highway") == "motorway" or tags.get("junction") == "roundabout":
        return True, False
    return True, True


class Ways(osmium.SimpleHandler):
    def __init__(self):
        super().__init__()
        self.arcs = {}  # (u, v) -> minutes, least over parallel ways
        self.fastest = 0.0

    def way(self, w):
        tags = {t.k: t.v for t in w.tags}
        hw = tags.get("highway")
        if hw not in SPEEDS:
            return
        if any(tags.get(k) == "no" for k in ("access", "motor_vehicle", "motorcar")):
            return
        kmh = maxspeed(tags["maxspeed"]) if "maxspeed" in tags else None
        kmh = kmh or SPEEDS[hw]
        fwd, bwd = directions(tags)
        nodes = [(n.ref, n.location) for n in w.nodes]
        for (a, la), (b, lb) in zip(nodes, nodes[1:]):
            if not (la.valid() and lb.valid()) or a == b:
                continue
            m = Geodesic.WGS84.Inverse(la.lat, la.lon, lb.lat, lb.lon)["s12"]
            minutes = m / 1000.0 / kmh * 60.0
            self.fastest = max(self.fastest, kmh)
            for (u, v, ok) in ((a, b, fwd), (b, a, bwd)):
                if ok and minutes < self.arcs.get((u, v), float("inf")):
                    self.arcs[(u, v)] = minutes


def parse_ends(text):
    out = []
    for item in text.split():
        node, extra = item.split(":")
        out.append((int(node), float(extra)))
    return out


def main():
    extract, pairs_file = sys.argv[1], sys.argv[2]
    h = Ways()
    h.apply_file(extract, locations=True)
    ids = sorted({u for u, _ in h.arcs} | {v for _, v in h.arcs})
    index = {n: i for i, n in enumerate(ids)}
    rows = [index[u] for u, _ in h.arcs]
    cols = [index[v] for _, v in h.arcs]
    graph = csr_matrix((list(h.arcs.values()), (rows, cols)), shape=(len(ids), len(ids)))

    pairs = list(csv.DictReader(open(pairs_file)))
    sources = sorted({index[n] for p in pairs for n, _ in parse_ends(p["leave"]) if n in index})
    dist = {}
    for k in range(0, len(sources), 64):
        chunk = sources[k : k + 64]
        d = dijkstra(graph, directed=True, indices=chunk)
        for i, s in enumerate(chunk):
            dist[s] = d[i]
    compared, worst, bad, below = 0, 0.0, [], []
    for p in pairs:
        ours = float(p["minutes"])
        ref = float("inf")
        for a, x in parse_ends(p["leave"]):
            for b, y in parse_ends(p["arrive"]):
                if a in index and b in index:
                    ref = min(ref, x + dist[index[a]][index[b]] + y)
        if np.isfinite(ours) or np.isfinite(ref):
            diff = abs(ours - ref) if np.isfinite(ours) and np.isfinite(ref) else float("inf")
            compared += 1
            worst = max(worst, diff)
            if diff > 1e-6:
                bad.append((p["pair"], ours, ref))
        lon_a, lat_a, lon_b, lat_b = (float(p[k]) for k in ("lon_a", "lat_a", "lon_b", "lat_b"))
        geo_m = Geodesic.WGS84.Inverse(lat_a, lon_a, lat_b, lon_b)["s12"]
        floor = geo_m / 1000.0 / h.fastest * 60.0
        if ours < floor - 1e-9:
            below.append((p["pair"], ours, floor))
    print(
        f"pairs={len(pairs)} compared={compared} max_diff={worst:.3e} "
        f"disagree={len(bad)} below_geodesic_floor={len(below)} fastest_kmh={h.fastest} "
        f"nodes={len(ids)} arcs={len(h.arcs)}"
    )
    for b in bad[:10]:
        print("disagree", b)
    for b in below[:10]:
        print("below floor", b)
    sys.exit(1 if bad or below else 0)


if __name__ == "__main__":
    main()
