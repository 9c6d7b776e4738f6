#!/usr/bin/env python3
"""Reference values for the Pollak-Grabert-Hanggi energy loss (src/theory/pgh.rs), cubic well.

Self-contained: needs only mpmath.  Run from the repository root:

    python3 reference/pgh.py            # writes reference/pgh_values.json
    python3 reference/pgh.py --check    # recomputes at 10 more digits; writes nothing

Reduced units (kT = 1).  The cubic family U = (27/4) E_b (s^2 - s^3), s = x/L, has its barrier at
x_b = 2L/3 and |U''(x_b)| = 13.5 E_b/L^2.  Its nonlinear part about the barrier, seen from the well
(r = x_b - x), is the pure cubic V1 = (b/3) r^3 with b = 20.25 E_b/L^3, so the zero-energy orbit of
mass M = m/u00^2 in W(r) = -(1/2) M lam^2 r^2 + (b/3) r^3 is known in closed form:

    r(t) = A sech^2(lam t/2),  A = 3 M lam^2/(2 b)

(substitute: r'' = lam^2 r - (b/M) r^2).  Its Fourier transform is
r~(w) = A pi w/(k^2 sinh(pi w/(2k))), k = lam/2 (Gradshteyn & Ryzhik 3.982.1 for the sech^2 integral;
checked here by direct quadrature in --check).  The energy loss is then the frequency integral

    Delta = (gamma M^2/(pi m)) Int_0^inf dw w^2 (w^2 + lam^2)/(w^2 + (lam+gamma)^2) |r~(w)|^2,

with lam = sqrt(gamma^2/4 + w_b^2) - gamma/2 and u00^2 = 2 lam/(2 lam + gamma).  This route (closed-form
orbit, frequency domain) shares nothing with the Rust code's (numerical orbit, time-domain filter).
The weak-friction limit Delta/gamma -> I_b = 36 E_b/(5 w_b) is checked too.
"""

import json
import os
import sys

from mpmath import mp, mpf

HERE = os.path.dirname(os.path.abspath(__file__))
EB = mpf(6)
L = mpf('1.5')
M_PARTICLE = mpf(1)
RATIOS = ['0.01', '0.1', '0.3', '1', '3', '10', '30']


def delta(ratio):
    kb = mpf('13.5') * EB / L ** 2
    wb = mp.sqrt(kb / M_PARTICLE)
    g = mpf(ratio) * wb
    lam = mp.sqrt(g ** 2 / 4 + wb ** 2) - g / 2
    u00sq = 2 * lam / (2 * lam + g)
    big_m = M_PARTICLE / u00sq
    b = mpf('20.25') * EB / L ** 3
    a = 3 * big_m * lam ** 2 / (2 * b)
    k = lam / 2
    big_l = lam + g

    def rt(w):
        if w == 0:
            return 2 * a / k
        return a * mp.pi * w / (k ** 2 * mp.sinh(mp.pi * w / (2 * k)))

    f = lambda w: w ** 2 * (w ** 2 + lam ** 2) / (w ** 2 + big_l ** 2) * rt(w) ** 2
    # the integrand peaks near w ~ lam and decays as exp(-2 pi w/lam)
    integral = mp.quad(f, [0, lam / 4, lam, 4 * lam, 16 * lam, 64 * lam, mp.inf])
    d = g * big_m ** 2 / (mp.pi * M_PARTICLE) * integral
    return g, lam, u00sq, d, a, k


def main():
    check = '--check' in sys.argv
    mp.dps = 40 if check else 30
    rows = []
    for r in RATIOS:
        g, lam, u00sq, d, a, k = delta(r)
        rows.append({'gamma_over_omega_b': float(mpf(r)), 'gamma': float(g), 'lambda': float(lam),
                     'u00_squared': float(u00sq), 'delta': float(d)})
    wb = mp.sqrt(mpf('13.5') * EB / L ** 2 / M_PARTICLE)
    ib = 36 * EB / (5 * wb)
    if check:
        g, lam, u00sq, d, a, k = delta('1e-8')
        print('Delta/(gamma I_b) at gamma = 1e-8 w_b:', d / (g * ib))
        # the sech^2 transform against direct quadrature
        w = lam * mpf('0.7')
        direct = 2 * mp.quad(lambda t: a * mp.sech(k * t) ** 2 * mp.cos(w * t), [0, mp.inf])
        closed = a * mp.pi * w / (k ** 2 * mp.sinh(mp.pi * w / (2 * k)))
        print('sech^2 transform, closed/direct - 1:', closed / direct - 1)
        stored = json.load(open(os.path.join(HERE, 'pgh_values.json')))
        for s, r in zip(stored['cubic'], rows):
            print(r['gamma_over_omega_b'], 'stored/recomputed - 1:', s['delta'] / r['delta'] - 1)
        return
    out = {'potential': 'cubic family, E_b = 6 kT, L = 1.5 (barrier at x = 1), m = 1, kT = 1',
           'action': float(ib), 'cubic': rows}
    with open(os.path.join(HERE, 'pgh_values.json'), 'w') as fh:
        json.dump(out, fh, indent=1, sort_keys=True)
        fh.write('\n')


if __name__ == '__main__':
    main()
