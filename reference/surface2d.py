#!/usr/bin/env python3
"""Reference values for the two-coordinate theory (theory::fv2d, theory::langer).

Self-contained: needs only mpmath.  Run from the repository root:

    python3 reference/surface2d.py      # writes reference/surface2d_values.json

The separable surface U(x, y) = E (x^2 - 1)^2 + k y^2 / 2 (kT = 1).  With a diagonal D the
backward equation separates, so every 2-D quantity is the 1-D one of U1(x) = E (x^2 - 1)^2 with
D_xx:

* MFPT from x0 with a reflecting wall at a and an absorbing line x = b (Gardiner, Handbook of
  Stochastic Methods, Sec. 5.2):  T = int_x0^b dy e^{U1(y)}/D int_a^y dz e^{-U1(z)}
* committor between x <= xA and x >= xB:  q(x) = int_xA^x e^{U1} / int_xA^xB e^{U1}
* Kramers' spatial-diffusion (Smoluchowski) rate D sqrt(U1''(-1) |U1''(0)|)/(2 pi) e^{-E}
  (Kramers, Physica 7, 284 (1940))
* harmonic TST (omega_a / 2 pi) e^{-E}, omega_a = sqrt(U1''(-1)/m)
* Kramers' moderate-to-strong-friction rate (lambda_+/omega_b)(omega_a/2 pi) e^{-E},
  lambda_+ = sqrt(gamma^2/4 + omega_b^2) - gamma/2, omega_b = sqrt(|U1''(0)|/m)

Quadrature: mp.quad (tanh-sinh) with the stationary points and the +-1, +-3 widths around them
as subdivision points; every integrand is O(1) after taking out e^{E}.
"""

import json
import os

from mpmath import mp, mpf

mp.dps = 30
HERE = os.path.dirname(os.path.abspath(__file__))

E = mpf(4)          # barrier of U1 (kT)
K = mpf(4)          # y stiffness (cancels from every rate)
MASS = mpf("1.3")
GAMMA = mpf("2.1")
D_SCALAR = mpf(1)
D_DIAG = (mpf("0.7"), mpf(2))


def u1(x):
    return E * (x * x - 1) ** 2


def pts(lo, hi):
    w = 1 / mp.sqrt(8 * E)
    cand = [lo, hi]
    for s in (-1, 0, 1):
        for k in (-3, -1, 1, 3):
            cand.append(s + k * w)
        cand.append(mpf(s))
    return sorted(set(c for c in cand if lo <= c <= hi))


def mfpt(a, x0, b, d):
    # inner(y) = int_a^y e^{-U1}; outer = int_x0^b e^{U1(y) - E} inner(y) dy, times e^{E}/D
    def inner(y):
        return mp.quad(lambda z: mp.exp(-u1(z)), pts(a, y))

    outer = mp.quad(lambda y: mp.exp(u1(y) - E) * inner(y), pts(x0, b))
    return outer * mp.exp(E) / d


def committor(xa, xb, x):
    top = mp.quad(lambda z: mp.exp(u1(z) - E), pts(xa, x))
    bottom = mp.quad(lambda z: mp.exp(u1(z) - E), pts(xa, xb))
    return top / bottom


def main():
    wall, x0, target = mpf(-2), mpf(-1), mpf(1)
    t1 = mfpt(wall, x0, target, mpf(1))
    ua, ub = 8 * E, 4 * E          # U1''(-1), |U1''(0)|
    wa, wb = mp.sqrt(ua / MASS), mp.sqrt(ub / MASS)
    lam = mp.sqrt(GAMMA ** 2 / 4 + wb ** 2) - GAMMA / 2
    xa, xb = mpf("-0.9875"), mpf("1.0125")
    qs = {}
    for x in ("-0.4875", "0.0125", "0.5125"):
        qs[x] = float(committor(xa, xb, mpf(x)))
    out = {
        "separable": {
            "E": float(E), "k": float(K), "mass": float(MASS), "gamma": float(GAMMA),
            "d_scalar": float(D_SCALAR), "d_diag": [float(D_DIAG[0]), float(D_DIAG[1])],
            "box": [[-2.0, 4.0], [-1.5, 1.5]], "wall": float(wall), "x0": float(x0),
            "target": float(target),
            "mfpt_scalar": float(t1 / D_SCALAR),
            "mfpt_diag": float(t1 / D_DIAG[0]),
            "ln_smoluchowski_scalar": float(mp.log(D_SCALAR * mp.sqrt(ua * ub) / (2 * mp.pi)) - E),
            "ln_smoluchowski_diag": float(mp.log(D_DIAG[0] * mp.sqrt(ua * ub) / (2 * mp.pi)) - E),
            "ln_harmonic_tst": float(mp.log(wa / (2 * mp.pi)) - E),
            "ln_kramers": float(mp.log(lam / wb * wa / (2 * mp.pi)) - E),
            "committor_box": [[-2.0, 2.0], [-1.5, 1.5]],
            "committor_a": float(xa), "committor_b": float(xb),
            "committor": qs,
        }
    }
    with open(os.path.join(HERE, "surface2d_values.json"), "w") as f:
        json.dump(out, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
