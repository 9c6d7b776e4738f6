"""Stationary points of the Müller-Brown surface (Müller & Brown, Theor. Chim. Acta 53, 75 (1979))
at 30 digits: mpmath.findroot on the analytic gradient from the published 3-digit points, then U
and the Hessian eigenvalues there. Writes reference/muller_brown_values.json.

Run: python3 reference/muller_brown.py (needs mpmath).
"""
import json
import os
import mpmath as mp

mp.mp.dps = 30
# (A, a, b, c, x0, y0) of the four terms, as published
P = [(-200, -1, 0, -10, 1, 0), (-100, -1, 0, -10, 0, mp.mpf("0.5")),
     (-170, mp.mpf("-6.5"), 11, mp.mpf("-6.5"), mp.mpf("-0.5"), mp.mpf("1.5")),
     (15, mp.mpf("0.7"), mp.mpf("0.6"), mp.mpf("0.7"), -1, 1)]


def u(x, y):
    return sum(A * mp.exp(a * (x - x0) ** 2 + b * (x - x0) * (y - y0) + c * (y - y0) ** 2)
               for A, a, b, c, x0, y0 in P)


def grad(x, y):
    return [mp.diff(lambda t: u(t, y), x), mp.diff(lambda t: u(x, t), y)]


def hessian(x, y):
    return mp.matrix([[mp.diff(u, (x, y), (2, 0)), mp.diff(u, (x, y), (1, 1))],
                      [mp.diff(u, (x, y), (1, 1)), mp.diff(u, (x, y), (0, 2))]])


# the published approximate positions (Müller & Brown 1979, Table 1 as commonly quoted)
START = {"minima": [(-0.558, 1.442), (0.623, 0.028), (-0.050, 0.467)],
         "saddles": [(-0.822, 0.624), (0.212, 0.293)]}

out = {"source": "mpmath findroot of grad U = 0 from the published points; U and Hessian eigenvalues at the roots",
       "minima": [], "saddles": []}
for kind, pts in START.items():
    for x0, y0 in pts:
        x, y = mp.findroot(lambda x, y: grad(x, y), (mp.mpf(x0), mp.mpf(y0)))
        ev = sorted(mp.eigsy(hessian(x, y))[0])
        out[kind].append({"x": float(x), "y": float(y), "u": float(u(x, y)),
                          "eigenvalues": [float(e) for e in ev]})
path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "muller_brown_values.json")
with open(path, "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
print(json.dumps(out, indent=1))
