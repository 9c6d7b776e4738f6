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

`memory_reflected`: the same with a wall cutting the orbit (series transform, mp.dps = 25), at
(gamma/w_b, tau w_b) = (1, 0.5) and (30, 3), the second with a sharp resonance at sqrt(beta).

`memory`: the same for the exponential kernel K^(s) = gamma/(1 + s tau), integrated in the plain form
of `delta_memory` (complex D, no factorisation), at tau w_b = 0.5 and 2.

The formula itself (spectral weight, u00, the unstable mode's potential) is checked by a second,
explicit route, `mode_sum`: an Ohmic bath discretised into N = 1500 oscillators (omega_j = (j + 1/2) dw up
to a cutoff 60 max(w_b, gamma), couplings c_j^2 = (2/pi) gamma omega_j^2 dw, so that
J(w) = (pi/2) sum c_j^2/omega_j delta(w - omega_j) = gamma w, counterterm included), the system-bath
Hessian at the barrier diagonalised through its secular equation
K00 - mu - sum c_j^2/(omega_j^2 - mu) = 0 (bisection between poles), the normal-mode shares
u_k0^2 = 1/(1 + sum c_j^2/(omega_j^2 - mu_k)^2), and the energy handed to each stable mode k by the force
V1'(r(t)) = b r(t)^2 along the orbit, (1/2) u_k0^2 |F~(lambda_k)|^2 with
F~(w) = b A^2 pi nu (nu^2 + 4)/(6 k sinh(pi nu/2)), nu = w/k (the sech^4 transform; --check compares it
with quadrature).  Plain floats: about 20 s per friction.
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


def memory_setup(ratio, tau_wb):
    """w_b, gamma, tau, the Grote-Hynes root lam, u00^2 = [1 + (K^(lam)/lam + K^'(lam))/2]^-1, M = m/u00^2,
    and the sech^2 orbit's amplitude A = 3 M lam^2/(2b) and rate k = lam/2 for the cubic well."""
    kb = mpf('13.5') * EB / L ** 2
    wb = mp.sqrt(kb / M_PARTICLE)
    g = mpf(ratio) * wb
    tau = mpf(tau_wb) / wb
    cubic = lambda x: tau * x ** 3 + x ** 2 + (g - tau * wb ** 2) * x - wb ** 2
    lam = mp.findroot(cubic, (mpf(0), wb), solver='bisect')
    khat = g / (1 + lam * tau)
    khat_p = -g * tau / (1 + lam * tau) ** 2
    u00sq = 1 / (1 + (khat / lam + khat_p) / 2)
    big_m = M_PARTICLE / u00sq
    b = mpf('20.25') * EB / L ** 3
    a = 3 * big_m * lam ** 2 / (2 * b)
    k = lam / 2
    return wb, g, tau, lam, u00sq, big_m, a, k


def delta_memory(ratio, tau_wb):
    """Delta for the exponential memory kernel K^(s) = gamma/(1 + s tau), straight from
    Delta = (1/(pi m)) Int_0^inf w^2 Re K^(-iw) |V1'~(w)|^2/|D(w)|^2 dw, D(w) = -w^2 - w_b^2 - iw K^(-iw),
    V1'~ = M (lam^2 + w^2) r~ (no factorisation of D), with lam the Grote-Hynes root and
    u00^2 = [1 + (K^(lam)/lam + K^'(lam))/2]^-1."""
    wb, g, tau, lam, u00sq, big_m, a, k = memory_setup(ratio, tau_wb)

    def rt(w):
        if w == 0:
            return 2 * a / k
        return a * mp.pi * w / (k ** 2 * mp.sinh(mp.pi * w / (2 * k)))

    def f(w):
        kw = g / (1 - 1j * w * tau)
        d = -w ** 2 - wb ** 2 - 1j * w * kw
        force = big_m * (lam ** 2 + w ** 2) * rt(w)
        return w ** 2 * mp.re(kw) * force ** 2 / abs(d) ** 2

    integral = mp.quad(f, [0, lam / 4, lam, 4 * lam, 16 * lam, 64 * lam, mp.inf])
    return g, tau, lam, u00sq, integral / (mp.pi * M_PARTICLE)


def delta_memory_reflected(ratio, tau_wb, r_wall):
    """As delta_memory, for the orbit cut by a reflecting wall at distance r_wall from the barrier
    (inside the orbit): r(t) = A sech^2(k(|t| + t0)) with sech^2(k t0) = r_wall/A. Its transform comes
    from sech^2(y) = 4 sum_{n>=1} (-1)^(n+1) n e^(-2ny) (y > 0):
    r~(w) = 8A sum_n (-1)^(n+1) n q^n 2nk/((2nk)^2 + w^2), q = e^(-2k t0).  Breakpoints at the
    resonance sqrt(beta) +- multiples of alpha (see memory_integral in pgh.rs)."""
    wb, g, tau, lam, u00sq, big_m, a, k = memory_setup(ratio, tau_wb)
    rw = mpf(r_wall)
    assert rw < a, 'the wall must cut the orbit'
    q = mp.exp(-2 * mp.asech(mp.sqrt(rw / a)))

    def rt(w):
        s, n = mpf(0), 1
        while True:
            term = (-1) ** (n + 1) * n * q ** n * 2 * n * k / ((2 * n * k) ** 2 + w ** 2)
            s += term
            if n > 5 and abs(term) < mpf(10) ** -25 * abs(s):
                return 8 * a * s
            n += 1

    def f(w):
        kw = g / (1 - 1j * w * tau)
        d = -w ** 2 - wb ** 2 - 1j * w * kw
        force = big_m * (lam ** 2 + w ** 2) * rt(w)
        return w ** 2 * mp.re(kw) * force ** 2 / abs(d) ** 2

    alpha = lam + 1 / tau
    root_beta = mp.sqrt(wb ** 2 / (tau * lam))
    pts = [mpf(0), lam / 4, lam, 4 * lam, 16 * lam, 64 * lam, 1 / tau, alpha]
    pts += [p for p in (root_beta + j * alpha / 2 for j in [-30, -10, -3, -1, 0, 1, 3, 10, 30]) if p > 0]
    pts += [10 * wb, 100 * wb, 1000 * wb, 10000 * wb]
    integral = mp.quad(f, sorted(set(pts)) + [mp.inf], maxdegree=10)
    return g, tau, integral / (mp.pi * M_PARTICLE)


def mode_sum(ratio, n=1500, cutoff=60.0):
    """Delta from an explicitly discretised bath (floats; see the module doc)."""
    import math
    eb, l, m = float(EB), float(L), float(M_PARTICLE)
    kb = 13.5 * eb / l ** 2
    wb = math.sqrt(kb / m)
    b = 20.25 * eb / l ** 3
    g = ratio * wb
    wc = cutoff * max(wb, g)
    dw = wc / n
    ws = [(j + 0.5) * dw for j in range(n)]
    c2 = [(2 / math.pi) * g * w * w * dw for w in ws]
    k00 = -wb ** 2 + sum(c / w ** 2 for c, w in zip(c2, ws))

    def sec(mu):
        return k00 - mu - sum(c / (w * w - mu) for c, w in zip(c2, ws))

    def share(mu):
        return 1 / (1 + sum(c / (w * w - mu) ** 2 for c, w in zip(c2, ws)))

    def bisect(a, z, iters):
        fa = sec(a)
        for _ in range(iters):
            mid = 0.5 * (a + z)
            fm = sec(mid)
            if (fm > 0) == (fa > 0):
                a, fa = mid, fm
            else:
                z = mid
        return 0.5 * (a + z)

    mu0 = bisect(-4 * wb ** 2, -1e-12, 200)
    lam = math.sqrt(-mu0)
    u00sq = share(mu0)
    big_m = m / u00sq
    a = 3 * big_m * lam ** 2 / (2 * b)
    k = lam / 2
    edges = [0.0] + [w * w for w in ws]
    total = 0.0
    for i in range(n):
        lo = edges[i] + 1e-12 * (edges[i + 1] - edges[i])
        hi = edges[i + 1] - 1e-12 * (edges[i + 1] - edges[i])
        if (sec(lo) > 0) == (sec(hi) > 0):
            continue
        mu = bisect(lo, hi, 80)
        om = math.sqrt(mu)
        nu = om / k
        if nu > 200:  # |F~|^2 ~ e^{-pi nu}: below 1e-270 of the peak
            continue
        f = b * a * a * math.pi * nu * (nu * nu + 4) / (6 * k * math.sinh(math.pi * nu / 2))
        total += share(mu) * f * f / (2 * m)
    return total, lam


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
        for nu in ['0.3', '1.7', '4']:
            nu = mpf(nu)
            direct = 2 * mp.quad(lambda x: mp.sech(x) ** 4 * mp.cos(nu * x), [0, mp.inf])
            closed = mp.pi * nu * (nu ** 2 + 4) / (6 * mp.sinh(mp.pi * nu / 2))
            print('sech^4 transform at nu =', nu, 'closed/direct - 1:', closed / direct - 1)
        g, tau, lam, u00sq, d = delta_memory('1', '1e-12')
        print('memory form at tau = 1e-12/w_b against the Ohmic one - 1:', d / delta('1')[3] - 1)
        stored = json.load(open(os.path.join(HERE, 'pgh_values.json')))
        for s, r in zip(stored['cubic'], rows):
            print(r['gamma_over_omega_b'], 'stored/recomputed - 1:', s['delta'] / r['delta'] - 1)
        return
    memory = []
    for r in ['0.3', '1', '3']:
        for tw in ['0.5', '2']:
            g, tau, lam, u00sq, d = delta_memory(r, tw)
            memory.append({'gamma_over_omega_b': float(mpf(r)), 'tau_omega_b': float(mpf(tw)),
                           'gamma': float(g), 'memory_time': float(tau), 'lambda': float(lam),
                           'u00_squared': float(u00sq), 'delta': float(d)})
    reflected = []
    for r, tw, rw in [('1', '0.5', '0.5'), ('30', '3', '0.5')]:
        mp.dps = 25
        g, tau, d = delta_memory_reflected(r, tw, rw)
        mp.dps = 30
        reflected.append({'gamma_over_omega_b': float(mpf(r)), 'tau_omega_b': float(mpf(tw)),
                          'gamma': float(g), 'memory_time': float(tau), 'wall_distance': float(mpf(rw)),
                          'delta': float(d)})
    modes = []
    for r in ['0.1', '1', '3']:
        d, lam = mode_sum(float(r))
        modes.append({'gamma_over_omega_b': float(r), 'delta': d, 'lambda': lam, 'bath_modes': 1500})
    out = {'potential': 'cubic family, E_b = 6 kT, L = 1.5 (barrier at x = 1), m = 1, kT = 1',
           'action': float(ib), 'cubic': rows, 'memory': memory, 'memory_reflected': reflected,
           'mode_sum': modes}
    with open(os.path.join(HERE, 'pgh_values.json'), 'w') as fh:
        json.dump(out, fh, indent=1, sort_keys=True)
        fh.write('\n')


if __name__ == '__main__':
    main()
