#!/usr/bin/env python3
"""High-precision reference values for periodic and tilted landscapes (src/theory/periodic.rs).

Self-contained: needs only mpmath.  Run from the repository root:

    python3 reference/periodic.py            # writes reference/periodic_values.json
    python3 reference/periodic.py --check    # recomputes at 10 more digits and by a second route; writes nothing

Reduced units (kT = 1).  The washboard is U(x) = -A cos(2 pi x/L) - F x = V(x) - F x.  Every value for the
cosine family comes from Fourier-Bessel series (e^{z cos t} = sum_n I_n(z) e^{i n t}, Abramowitz & Stegun
9.6.34), not from the double integrals the Rust code evaluates; see SOURCES.md, section "Periodic".
"""

import json
import os
import sys

from mpmath import mp, mpf

DPS = 30
NMAX = 90          # Bessel terms: I_n(10)/I_0(10) < 1e-45 for n > 90
HERE = os.path.dirname(os.path.abspath(__file__))


def bessel_terms(a):
    return [mp.besseli(n, a) for n in range(NMAX + 1)]


def lifson_jackson_cos(v0, d):
    """D_eff = D / I0(V0)^2 (Lifson & Jackson, J. Chem. Phys. 36, 2410 (1962))."""
    return d / mp.besseli(0, v0) ** 2


def drift_cos(a, f, l, d):
    """Stratonovich drift for U = -A cos(kx) - F x, k = 2 pi/L, constant D, by the Fourier-Bessel series

        v = D / [ I0(A)^2/F + 2 sum_{n>=1} (-1)^n I_n(A)^2 F/(F^2 + (k n)^2) ]

    (the double integral of the drift formula done term by term)."""
    k = 2 * mp.pi / l
    i = bessel_terms(a)
    s = i[0] ** 2 / f + 2 * mp.fsum((-1) ** n * i[n] ** 2 * f / (f ** 2 + (k * n) ** 2)
                                    for n in range(1, NMAX + 1))
    return d / s


def i_plus_minus(a, f, l, i, x):
    """I_+(x) = int_0^L dy e^{U(x)-U(x-y)}, I_-(x) = int_0^L dy e^{U(x+y)-U(x)} for the washboard, as
    Fourier-Bessel series in x (each term integrated over y exactly)."""
    k = 2 * mp.pi / l
    c = -mp.expm1(-f * l)
    sp = i[0] / f
    sm = i[0] / f
    for n in range(1, NMAX + 1):
        e = mp.expj(k * n * x)
        # n and -n together: I_{-n} = I_n
        sp += i[n] * (e / (f + 1j * k * n) + 1 / e / (f - 1j * k * n))
        sm += (-1) ** n * i[n] * (e / (f - 1j * k * n) + 1 / e / (f + 1j * k * n))
    ip = mp.exp(-a * mp.cos(k * x)) * c * mp.re(sp)
    im = mp.exp(a * mp.cos(k * x)) * c * mp.re(sm)
    return ip, im


def reimann_cos(a, f, l, d, npts=256):
    """Reimann et al., Phys. Rev. Lett. 87, 010602 (2001):
    D_eff = D L^2 int_0^L I_+^2 I_- dx / (int_0^L I_+ dx)^3.  The x-integrands are periodic and analytic,
    so the trapezoid rule on npts points converges geometrically.  Returns (D_eff, D_eff with the other sign
    choice I_-^2 I_+ / (int I_-)^3, which must agree)."""
    i = bessel_terms(a)
    h = mpf(l) / npts
    s1 = s2 = s3 = s4 = mpf(0)
    for j in range(npts):
        ip, im = i_plus_minus(a, f, l, i, j * h)
        s1 += ip
        s2 += ip * ip * im
        s3 += im
        s4 += im * im * ip
    s1, s2, s3, s4 = s1 * h, s2 * h, s3 * h, s4 * h
    return d * l ** 2 * s2 / s1 ** 3, d * l ** 2 * s4 / s3 ** 3


def drift_quadrature(a, f, l, dfun, npts=64):
    """v = L (1 - e^{-FL}) / int_0^L dx int_0^L dy e^{U(x+y)-U(x)}/D(x+y), D periodic.  The outer integrand
    is periodic and analytic in x (trapezoid); the inner one is done by mp.quad on 8 subintervals."""
    k = 2 * mp.pi / l
    u = lambda x: -a * mp.cos(k * x) - f * x
    h = mpf(l) / npts
    tot = mpf(0)
    for j in range(npts):
        x = j * h
        tot += mp.quad(lambda y: mp.exp(u(x + y) - u(x)) / dfun(x + y), mp.linspace(0, l, 9))
    return l * (-mp.expm1(-f * l)) / (tot * h)


def lifson_jackson_quadrature(a, l, dfun):
    """L^2 / [int_0^L e^{V}/D dx int_0^L e^{-V} dx], V = -A cos(kx)."""
    k = 2 * mp.pi / l
    pts = mp.linspace(0, l, 9)
    p = mp.quad(lambda x: mp.exp(-a * mp.cos(k * x)) / dfun(x), pts)
    q = mp.quad(lambda x: mp.exp(a * mp.cos(k * x)), pts)
    return l ** 2 / (p * q)


def hopping_cos(a, f, l, d):
    """Exact overdamped hops out of the minimum x_a to x_a +- L, both absorbing (PHYSICS.md sec. 6):
    pi_+ = Phi(x_a)/Phi(x_+), T = pi_+ K(x_+) - K(x_a), Phi(x) = int_{x_-}^x e^{U}/D,
    K(x) = int_{x_-}^x dy e^{U(y)}/D G(y), G(y) = int_{x_-}^y e^{-U}.  G and Phi from their Fourier-Bessel
    series (exact antiderivatives term by term), K by mp.quad.  This is a different arrangement from the
    Rust code's (Green's function, no cancellation); here the cancellation costs a few of the 30 digits."""
    k = 2 * mp.pi / l
    i = bessel_terms(a)
    xa = mpf(float(mp.asin(f / (a * k)) / k))       # rounded to a double, as the test reads it
    xm, xp = xa - l, xa + l
    u = lambda x: -a * mp.cos(k * x) - f * x

    def anti(sign, x):
        # antiderivative of e^{sign*(A cos kx + F x)} = sum_n (sign)^n I_n(A) e^{(ikn + sign F) x}
        s = mp.exp(sign * f * x) * i[0] / (sign * f)
        for n in range(1, NMAX + 1):
            cn = (sign ** n) * i[n]
            e = mp.expj(k * n * x) * mp.exp(sign * f * x)
            s += cn * (e / (1j * k * n + sign * f) + mp.conj(e) / (-1j * k * n + sign * f))
        return mp.re(s)

    g = lambda y: anti(1, y) - anti(1, xm)           # int_{x_-}^y e^{-U}
    phi = lambda x: (anti(-1, x) - anti(-1, xm)) / d  # int_{x_-}^x e^{U}/D
    xb = (mp.pi - mp.asin(f / (a * k))) / k          # barrier tops at xb - L and xb
    pts = sorted({xm, xb - l, xa, xb, xp})
    kfun = lambda lo, hi: mp.quad(lambda y: mp.exp(u(y)) / d * g(y),
                                  [p for p in pts if lo <= p <= hi])
    k_a = kfun(xm, xa)
    k_p = k_a + kfun(xa, xp)
    pi_p = phi(xa) / phi(xp)
    t = pi_p * k_p - k_a
    return {"x_a": float(xa), "T": t, "pi_plus": pi_p, "k_plus": pi_p / t, "k_minus": (1 - pi_p) / t}


D_X = "1 + 0.5*sin(2*pi*x)"


def washboard(a, f, l):
    """The washboard in the project formula syntax (stored so the Rust tests can parse it)."""
    return "-%s*cos(2*pi*x/%s) - (%s)*x" % (mp.nstr(a, 17), mp.nstr(l, 17), mp.nstr(f, 17))


def d_x(x):
    return 1 + mpf("0.5") * mp.sin(2 * mp.pi * x)


def compute():
    out = {"lifson_jackson": [], "drift": [], "reimann": [], "hopping": []}
    for v0 in (1, 4, 10):
        dd = lifson_jackson_cos(v0, 1)
        out["lifson_jackson"].append({
            "V0": v0, "D": 1.0, "U": "%d*cos(2*pi*x)" % v0, "D_eff": dd, "ln_D_eff": mp.log(dd),
            "exp_minus_V0_I0": mp.exp(-v0) * mp.besseli(0, v0)})
    # position-dependent D: direct quadrature (no series)
    dd = lifson_jackson_quadrature(3, 1, d_x)
    out["lifson_jackson"].append({"V0": 3, "D": D_X, "U": "-3*cos(2*pi*x)", "D_eff": dd, "ln_D_eff": mp.log(dd)})
    for a, f, l in ((2, mpf("1.5"), 1), (2, mpf("-1.5"), 1), (10, 2, 1), (1, mpf("0.5"), 2)):
        v = drift_cos(a, f, l, 1)
        out["drift"].append({"A": a, "F": f, "L": l, "D": 1.0, "U": washboard(a, f, l), "v": v, "ln_abs_v": mp.log(abs(v))})
    v = drift_quadrature(2, mpf("1.5"), 1, d_x)
    out["drift"].append({"A": 2, "F": mpf("1.5"), "L": 1, "D": D_X, "U": washboard(2, mpf("1.5"), 1), "v": v, "ln_abs_v": mp.log(v)})
    for a, f, l in ((2, mpf("1.5"), 1), (1, 5, 1), (3, 1, 1)):
        r, r2 = reimann_cos(a, f, l, 1)
        out["reimann"].append({"A": a, "F": f, "L": l, "D": 1.0, "U": washboard(a, f, l), "D_eff": r, "D_eff_other_sign": r2})
    for a, f, l in ((3, 1, 1), (2, mpf("0.5"), 1)):
        h = hopping_cos(a, f, l, 1)
        h.update({"A": a, "F": f, "L": l, "D": 1.0, "U": washboard(a, f, l)})
        out["hopping"].append(h)
    return out


def to_json(r):
    def conv(v):
        if isinstance(v, dict):
            return {k: conv(x) for k, x in v.items()}
        if isinstance(v, list):
            return [conv(x) for x in v]
        if isinstance(v, str):
            return v
        return float(v)
    return conv(r)


def check():
    mp.dps = DPS
    r0 = compute()
    mp.dps = DPS + 10
    r1 = compute()
    worst = 0
    for grp in r0:
        for c0, c1 in zip(r0[grp], r1[grp]):
            for key in c0:
                if isinstance(c0[key], str) or key in ("A", "F", "L", "D", "V0", "x_a"):
                    continue
                rel = abs(c0[key] / c1[key] - 1)
                worst = max(worst, rel)
                print("%-15s %-18s dps %d vs %d: %.1e" % (grp, key, DPS, DPS + 10, rel))
    print("worst relative change with 10 more digits: %.1e" % worst)
    mp.dps = DPS
    # second routes: drift by quadrature vs series; Reimann at F -> 0 vs Lifson-Jackson; sign choices
    v_q = drift_quadrature(2, mpf("1.5"), 1, lambda x: 1)
    v_s = drift_cos(2, mpf("1.5"), 1, 1)
    print("drift A=2 F=1.5: series %s quadrature %s rel %.1e" % (mp.nstr(v_s, 20), mp.nstr(v_q, 20),
                                                                 abs(v_q / v_s - 1)))
    r, r2 = reimann_cos(2, mpf("1e-8"), 1, 1)
    print("Reimann F=1e-8 vs Lifson-Jackson: %.1e" % abs(r / lifson_jackson_cos(2, 1) - 1))
    r, r2 = reimann_cos(2, mpf("1.5"), 1, 1, npts=512)
    print("Reimann npts 512 vs 256, sign choices: %.1e %.1e" % (
        abs(r / reimann_cos(2, mpf("1.5"), 1, 1)[0] - 1), abs(r / r2 - 1)))
    lj = lifson_jackson_quadrature(4, 1, lambda x: 1)
    print("Lifson-Jackson V0=4 quadrature vs 1/I0^2: %.1e" % abs(lj / lifson_jackson_cos(4, 1) - 1))


def main():
    if "--check" in sys.argv[1:]:
        check()
        return
    mp.dps = DPS
    out = to_json(compute())
    with open(os.path.join(HERE, "periodic_values.json"), "w") as fh:
        json.dump(out, fh, indent=2, sort_keys=True)
        fh.write("\n")


if __name__ == "__main__":
    main()
