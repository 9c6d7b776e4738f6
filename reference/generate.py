#!/usr/bin/env python3
"""High-precision reference values for the escapade test-suite.

Self-contained: needs only mpmath.  Run from the repository root:

    python3 reference/generate.py            # writes reference/values.json and reference/profile_2000.csv
    python3 reference/generate.py --check    # recomputes everything at higher precision (and with a second
                                             # quadrature rule) and prints the agreement; writes nothing

Conventions: reduced units, kT = 1, mass m = 1.  Potentials are given in the project formula syntax
(`^` is power, functions exp, sin, cos, sqrt, tanh, ...); the same strings are stored in values.json so
that the Rust tests can feed them to the Rust parser.  Decimal literals in the formulas are interpreted
as exact decimals (mpf('0.4'), not the binary double 0.4); the difference is below 1e-16 relative.

Every input that is stored in values.json (x0, b, x_barrier, ...) is a double; where such an input is the
result of a root search it is rounded to a double first and the reference value is computed for that
double, so the stored numbers are exact references for exactly the stored inputs.  The only exception is
the action integrals (group C), whose end points must be the exact turning points of the orbit.

See SOURCES.md for the formulas and their published sources.
"""

import json
import os
import re
import sys

import mpmath
from mpmath import mp, mpf
from mpmath.calculus.quadrature import GaussLegendre, TanhSinh

DPS = 30            # working precision for groups A, B, C
DPS_MELNIKOV = 40   # working precision for group D

HERE = os.path.dirname(os.path.abspath(__file__))

# --------------------------------------------------------------------------------------------------
# project formula syntax -> mpmath function
# --------------------------------------------------------------------------------------------------

_FLOAT_LITERAL = re.compile(r"(?<![A-Za-z_0-9.])((?:\d+\.\d*|\.\d+|\d+)(?:[eE][+-]?\d+)?)")


def _wrap_literal(m):
    s = m.group(1)
    if re.fullmatch(r"\d+", s):
        return s                      # integers stay Python ints (exact, integer powers)
    return "mpf('%s')" % s            # decimals become exact-decimal mpf at the working precision


def compile_formula(src):
    """Compile a project-syntax formula in x into a function mpf -> mpf."""
    py = _FLOAT_LITERAL.sub(_wrap_literal, src.replace("^", "**"))
    ns = {
        "__builtins__": {},
        "mpf": mpf,
        "exp": mp.exp, "ln": mp.log, "sqrt": mp.sqrt,
        "sin": mp.sin, "cos": mp.cos, "tan": mp.tan,
        "sinh": mp.sinh, "cosh": mp.cosh, "tanh": mp.tanh, "abs": abs,
    }
    fn = eval("lambda x: " + py, ns)

    def f(x):
        ns["pi"] = +mp.pi             # constants at the current precision
        ns["e"] = +mp.e
        return fn(mpf(x))
    f.src = src
    return f


def dbl(x):
    """Round an mpf to the nearest double and return it as an mpf (exactly representable)."""
    return mpf(float(x))


def num(x):
    """JSON number: the correctly rounded double of x (written by json as repr(float))."""
    return float(x)


class _ConservativeError:
    """mp.quad's default error estimate extrapolates |I_k - I_{k-1}| and |I_k - I_{k-2}| assuming the
    number of correct digits doubles with each degree; for some integrands here that declared convergence
    one level too early (true error 3.9e-29, i.e. 3.5e-25 relative, estimated as 1e-35).  This override uses the plain
    difference of the last two levels, so a subinterval is accepted only when I_{k-1} itself already
    agrees with I_k to the tolerance (I_k is then far more accurate than the estimate)."""

    def estimate_error(self, results, prec, epsilon):
        return abs(results[-1] - results[-2])


class ConservativeTanhSinh(_ConservativeError, TanhSinh):
    pass


class ConservativeGaussLegendre(_ConservativeError, GaussLegendre):
    pass


_RULES = {}


def _rule(method):
    """quad `method` argument for a cached (node-reusing) conservative rule instance."""
    if method not in _RULES:
        cls = {"tanh-sinh": ConservativeTanhSinh, "gauss-legendre": ConservativeGaussLegendre}[method]
        _RULES[method] = cls(mp)
    inst = _RULES[method]
    return lambda ctx: inst


def quad(f, pts, method="tanh-sinh"):
    """mp.quad over the subdivision pts with the conservative error estimate.  The maximal degree is two
    above mpmath's default.  Returns (value, estimated absolute error)."""
    rule = _rule(method)
    maxdeg = rule(mp).guess_degree(mp.prec) + 2
    v, e = mp.quad(f, pts, method=rule, error=True, maxdegree=maxdeg)
    if e > mp.eps:
        QUAD_STATS["not_converged"] += 1
    QUAD_STATS["calls"] += 1
    return v, e


QUAD_STATS = {"calls": 0, "not_converged": 0}


# --------------------------------------------------------------------------------------------------
# landscape helpers
# --------------------------------------------------------------------------------------------------

def dU(U):
    return lambda x: mp.diff(U, x)


def stationary_points(U, lo, hi, n=6000):
    """All zeros of U' in [lo, hi] found by scanning U' for sign changes on n intervals and refining each
    bracket with mp.findroot.  Returns a list of dicts {x, kind ('min'|'max'), U, U2} sorted by x."""
    lo, hi = mpf(lo), mpf(hi)
    d = dU(U)
    xs = [lo + (hi - lo) * i / n for i in range(n + 1)]
    ds = [d(x) for x in xs]
    roots = []
    for i in range(n):
        if ds[i] == 0:
            roots.append(xs[i])
        elif ds[i] * ds[i + 1] < 0:
            r = mp.findroot(d, (xs[i], xs[i + 1]), solver="anderson")
            r = mp.findroot(d, r)                      # polish (secant) to full working precision
            roots.append(r)
    if ds[n] == 0:
        roots.append(xs[n])
    out = []
    for r in roots:
        u2 = mp.diff(U, r, 2)
        out.append({"x": r, "kind": "min" if u2 > 0 else "max", "U": U(r), "U2": u2})
    return out


def nearest(stats, kind, target):
    c = [s for s in stats if s["kind"] == kind]
    return min(c, key=lambda s: abs(s["x"] - target))


def breakpoints(lo, hi, stats, widths=(1, 3, 8)):
    """Subdivision points for quadrature on [lo, hi]: the end points, every stationary point of U inside,
    and points s +- k*w around every stationary point s in [lo, hi], w = 1/sqrt|U''(s)| the width of the
    Boltzmann (or inverted-Boltzmann) peak at s."""
    pts = {lo, hi}
    for s in stats:
        x = s["x"]
        if lo <= x <= hi:
            pts.add(x)
            w = 1 / mp.sqrt(abs(s["U2"]))
            for k in widths:
                for p in (x - k * w, x + k * w):
                    if lo < p < hi:
                        pts.add(p)
    return sorted(pts)


def reflect(U, D, stats):
    """x -> -x: mirrored problems are mapped onto the standard (reflecting wall on the left) one."""
    Ur = lambda x: U(-x)
    Dr = lambda x: D(-x)
    sr = [{"x": -s["x"], "kind": s["kind"], "U": s["U"], "U2": s["U2"]} for s in reversed(stats)]
    return Ur, Dr, sr


# --------------------------------------------------------------------------------------------------
# A. exact overdamped MFPT (Pontryagin / Szabo-Schulten-Schulten)
# --------------------------------------------------------------------------------------------------

def mfpt(U, D, a, x0, b, stats, method="tanh-sinh"):
    """T = Int_{x0}^{b} dy e^{U(y)}/D(y) Int_{a}^{y} dz e^{-U(z)},  a < x0 < b.

    Shifted form: T = exp(Umax - Umin) * Q with
        Q = Int_{x0}^{b} dy e^{U(y)-Umax}/D(y) J(y),   J(y) = Int_{a}^{y} dz e^{-(U(z)-Umin)},
    Umax = max U on [x0, b], Umin = min U on [a, b] (both taken over end points and stationary points), so
    all integrands are O(1) or smaller.  [x0, b] is cut into panels p_0 = x0 < p_1 < ... < p_n = b at the
    stationary points and at s +- k w; on panel i, J(y) = J(p_i) + Int_{p_i}^{y}, where J(p_i) are
    accumulated panel integrals and the partial integral is a nested mp.quad.
    Returns (T, ln T, error estimate of Q from the outer quad, Umax, Umin)."""
    a, x0, b = mpf(a), mpf(x0), mpf(b)
    inside = [s for s in stats if a <= s["x"] <= b]
    Umin = min([U(a), U(b), U(x0)] + [s["U"] for s in inside])
    Umax = max([U(x0), U(b)] + [s["U"] for s in inside if x0 <= s["x"] <= b])
    pin = lambda z: mp.exp(-(U(z) - Umin))
    pout = lambda y: mp.exp(U(y) - Umax) / D(y)

    # J(x0) over [a, x0]
    J0, _ = quad(pin, breakpoints(a, x0, stats), method)
    panels = breakpoints(x0, b, stats)
    Jp = [J0]
    for i in range(len(panels) - 1):
        v, _ = quad(pin, [panels[i], panels[i + 1]], method)
        Jp.append(Jp[-1] + v)

    Q = mpf(0)
    err = mpf(0)
    for i in range(len(panels) - 1):
        p, Jbase = panels[i], Jp[i]

        def g(y, p=p, Jbase=Jbase):
            if y == p:
                return pout(y) * Jbase
            return pout(y) * (Jbase + quad(pin, [p, y], method)[0])
        v, e = quad(g, [p, panels[i + 1]], method)
        Q += v
        err += e
    lnT = (Umax - Umin) + mp.log(Q)
    return mp.exp(lnT), lnT, err / Q, Umax, Umin


# --------------------------------------------------------------------------------------------------
# B. exact 1-D TST rate (flux over population)
# --------------------------------------------------------------------------------------------------

def tst_rate(U, a, xb, stats, method="tanh-sinh"):
    """k = sqrt(1/(2 pi m)) e^{-U(xb)} / Int_a^{xb} e^{-U}, a < xb.  Returns (k, ln k, rel. error)."""
    a, xb = mpf(a), mpf(xb)
    inside = [s for s in stats if a <= s["x"] <= xb]
    Umin = min([U(a), U(xb)] + [s["U"] for s in inside])
    Z, e = quad(lambda z: mp.exp(-(U(z) - Umin)), breakpoints(a, xb, stats), method)
    lnk = -mp.log(2 * mp.pi) / 2 - U(xb) + Umin - mp.log(Z)
    return mp.exp(lnk), lnk, e / Z


# --------------------------------------------------------------------------------------------------
# C. actions at the barrier energy
# --------------------------------------------------------------------------------------------------

def turning_point(U, E, x_from, direction, step=mpf("0.01")):
    """The first root of U(x) = E met when walking from the well point x_from in `direction` (+1/-1)."""
    x = mpf(x_from)
    while True:
        y = x + direction * step
        if U(y) > E:
            lo, hi = (x, y) if direction > 0 else (y, x)
            r = mp.findroot(lambda t: U(t) - E, (lo, hi), solver="anderson")
            return mp.findroot(lambda t: U(t) - E, r)
        x = y


def action(U, x_left, x_right, E, xmin, simple_end, method="tanh-sinh"):
    """I = 2 Int_{x_left}^{x_right} sqrt(2 m (E - U(x))) dx, split at the well minimum.  Tiny negative
    round-off of E - U at the end points is clipped to 0.

    At the barrier-top end (a double root of E - U) the integrand behaves like |x - x_b| and is analytic
    on the interval.  At the other, simple turning point x_t (`simple_end` = 'left' or 'right') it has a
    square-root singularity:
      * tanh-sinh (the reference rule) integrates it directly (double-exponential end point clustering);
      * for the Gauss-Legendre cross-check the singularity is removed by x = x_t + (x_min - x_t) t^2,
        dx = 2 |x_min - x_t| t dt on t in [0, 1]."""
    f = lambda x: mp.sqrt(2 * max(E - U(x), mpf(0)))
    if method == "tanh-sinh":
        v, e = quad(f, [x_left, xmin, x_right], method)
    else:
        xt, other = (x_left, [xmin, x_right]) if simple_end == "left" else (x_right, [x_left, xmin])
        h = xmin - xt
        g = lambda t: f(xt + h * t * t) * 2 * abs(h) * t
        v1, e1 = quad(g, [0, 1], method)
        v2, e2 = quad(f, other, method)
        v, e = v1 + v2, e1 + e2
    return 2 * v, e / v


# --------------------------------------------------------------------------------------------------
# D. Mel'nikov-Meshkov depopulation factor
# --------------------------------------------------------------------------------------------------

def log1mexp(t):
    """ln(1 - e^{-t}) for t > 0, without cancellation."""
    if t > mp.log(2):
        return mp.log1p(-mp.exp(-t))
    return mp.log(-mp.expm1(-t))


def melnikov_lnA(delta, method="tanh-sinh"):
    """ln A = (1/(2 pi)) Int_{-inf}^{inf} dy ln(1 - e^{-delta (y^2+1/4)})/(y^2+1/4)
            = (1/pi) Int_0^inf (even integrand), split at y = 0, 1/2, 2 and at c/sqrt(delta)."""
    delta = mpf(delta)
    quarter = mpf(1) / 4
    # mp.quad's convergence test is absolute (eps/8 per subinterval), so the integrand is divided by
    # its value at y = 0 (for large delta it is ~ -4 e^{-delta/4}, far below eps) and the constant is
    # multiplied back afterwards.
    scale = abs(log1mexp(delta * quarter) / quarter)
    f = lambda y: log1mexp(delta * (y * y + quarter)) / (y * y + quarter) / scale
    s = 1 / mp.sqrt(delta)
    pts = {mpf(0), mpf(1) / 2, mpf(2)} | {c * s for c in (mpf(1) / 4, mpf(1) / 2, 1, 2, 4, 8, 16, 32)}
    pts = sorted(pts) + [mp.inf]
    v, e = quad(f, pts, method)
    return v * scale / mp.pi, abs(e / v)


def melnikov_lnA_alt(delta, method="tanh-sinh"):
    """Equivalent form ln A = (1/pi) Int dy ln(1 - e^{-delta (1+y^2)/4})/(1+y^2), evaluated after the
    substitution y = tan(theta) on a finite interval:  ln A = (2/pi) Int_0^{pi/2} ln(1 - e^{-delta/(4 cos^2 theta)}) dtheta."""
    delta = mpf(delta)
    scale = abs(log1mexp(delta / 4))          # normalisation, as in melnikov_lnA
    f = lambda th: log1mexp(delta / (4 * mp.cos(th) ** 2)) / scale if th < mp.pi / 2 else mpf(0)
    s = 2 / mp.sqrt(delta)       # y-scale of the second form
    pts = {mpf(0), mp.pi / 2} | {mp.atan(c * s) for c in (mpf(1) / 4, mpf(1) / 2, 1, 2, 4, 8, 16, 32)} | {mp.atan(1)}
    v, e = quad(f, sorted(pts), method)
    return 2 * v * scale / mp.pi


def melnikov_lnA_series(delta):
    """Third, quadrature-free form: ln A = -sum_{n>=1} erfc(sqrt(n delta)/2)/n (term-by-term Gaussian
    integral of the expansion ln(1-q) = -sum q^n/n).  Practical for delta >= 1e-2."""
    delta = mpf(delta)
    s, n = mpf(0), 1
    eps = mp.eps
    while True:
        t = mp.erfc(mp.sqrt(n * delta) / 2) / n
        s += t
        if t < eps * abs(s) * mpf("1e-3") and n * delta > 8:
            break
        n += 1
    return -s


# --------------------------------------------------------------------------------------------------
# case definitions
# --------------------------------------------------------------------------------------------------

M3_U = "6*(x^2-1)^2 + 1.5*x + 0.4*sin(3*x)"
M8_SIN = "0.3"                     # amplitude of the sin term of M8 (0.15 if 0.3 created extra minima)
M8_U_TEMPLATE = "4*(x^2-1)^2 - 0.8*x + {}*sin(5*x)"
MELNIKOV_DELTAS = ["1e-4", "3e-4", "1e-3", "1e-2", "0.1", "0.5", "1", "2", "5", "10", "30", "100",
                   "1000", "1e4"]


def m8_formula():
    """Choose the sin amplitude of M8: 0.3 unless it gives other than exactly two minima in [-2.5, 2.5]."""
    for amp in ("0.3", "0.15"):
        src = M8_U_TEMPLATE.format(amp)
        st = stationary_points(compile_formula(src), -2.5, 2.5)
        if sum(1 for s in st if s["kind"] == "min") == 2:
            return src, amp, st
    raise RuntimeError("M8: no admissible sin amplitude")


def stationary_summary(st, lo, hi):
    return {
        "interval": [num(lo), num(hi)],
        "n_minima": sum(1 for s in st if s["kind"] == "min"),
        "n_maxima": sum(1 for s in st if s["kind"] == "max"),
        "minima": [num(s["x"]) for s in st if s["kind"] == "min"],
        "maxima": [num(s["x"]) for s in st if s["kind"] == "max"],
        "U_at_minima": [num(s["U"]) for s in st if s["kind"] == "min"],
        "U_at_maxima": [num(s["U"]) for s in st if s["kind"] == "max"],
    }


def compute(dps, dps_mel, method="tanh-sinh", melnikov=True, log=print):
    """Compute every group at working precision dps (dps_mel for group D).  Returns a dict of results with
    mpf values (serialised by to_json)."""
    mp.dps = dps
    QUAD_STATS.update(calls=0, not_converged=0)
    R = {"mfpt": [], "tst_exact": [], "action": [], "melnikov_A": [], "checks": {}, "diag": {}}

    # ---- landscapes --------------------------------------------------------------------------------
    U3 = compile_formula(M3_U)
    st3 = stationary_points(U3, -3, 3)
    n3min = sum(1 for s in st3 if s["kind"] == "min")
    n3max = sum(1 for s in st3 if s["kind"] == "max")
    if (n3min, n3max) != (2, 1):
        raise RuntimeError("asym: expected 2 minima and 1 maximum in [-3, 3], found %d, %d" % (n3min, n3max))
    R["checks"]["asym_stationary_points"] = stationary_summary(st3, -3, 3)
    m3_left = nearest(st3, "min", -1)
    m3_right = nearest(st3, "min", 1)
    m3_top = nearest(st3, "max", 0)

    M8_U, m8amp, st8 = m8_formula()
    U8 = compile_formula(M8_U)
    R["checks"]["table2000_stationary_points"] = dict(stationary_summary(st8, -2.5, 2.5),
                                                      sin_amplitude=m8amp)
    m8_left = nearest(st8, "min", -1)
    m8_right = nearest(st8, "min", 1)
    m8_top = nearest(st8, "max", 0)

    U4src = "54*(x^2-x^3)"
    U4 = compile_formula(U4src)
    st4 = stationary_points(U4, -1, 1)
    b4 = mp.findroot(lambda x: U4(x) + 2, (mpf(1), mpf("1.2")), solver="anderson")
    b4 = mp.findroot(lambda x: U4(x) + 2, b4)

    # ---- A. MFPT cases -----------------------------------------------------------------------------
    cases = [
        dict(name="dw5", U="5*(x^2-1)^2", D="1", a=-3, x0=-1, b=1, lo=-3, hi=3),
        dict(name="dw10_D05", U="10*(x^2-1)^2", D="0.5", a=-3, x0=-1, b=1, lo=-3, hi=3),
        dict(name="asym", U=M3_U, D="1", a=-3, x0=dbl(m3_left["x"]), b=dbl(m3_right["x"]), st=st3),
        dict(name="asym_mirrored", U=M3_U, D="1", a=3, x0=dbl(m3_right["x"]), b=dbl(m3_left["x"]),
             st=st3, mirrored=True),
        dict(name="cubic8", U=U4src, D="1", a=-1, x0=0, b=dbl(b4), st=st4),
        dict(name="dw6_Dx", U="6*(x^2-1)^2", D="0.8 + 0.4/(1 + x^2)", a=-3, x0=-1, b=1, lo=-3, hi=3),
        dict(name="dw40", U="40*(x^2-1)^2", D="1", a=-2.5, x0=-1, b=1, lo=-2.5, hi=2.5),
        dict(name="dw200", U="200*(x^2-1)^2", D="1", a=-2, x0=-1, b=1, lo=-2, hi=2),
        dict(name="table2000", U=M8_U, D="1", a=-2.5, x0=dbl(m8_left["x"]), b=dbl(m8_right["x"]),
             st=st8, table="profile_2000.csv"),
    ]
    tst_names = ("dw5", "asym", "asym_mirrored", "cubic8", "dw40")
    for c in cases:
        U = compile_formula(c["U"])
        D = compile_formula(c["D"])
        st = c.get("st") or stationary_points(U, c["lo"], c["hi"])
        a, x0, b = mpf(c["a"]), mpf(c["x0"]), mpf(c["b"])
        mirrored = c.get("mirrored", False)
        if mirrored:
            Ur, Dr, sr = reflect(U, D, st)
            ar, x0r, br = -a, -x0, -b
        else:
            Ur, Dr, sr, ar, x0r, br = U, D, st, a, x0, b
        if not (ar < x0r < br):
            raise RuntimeError(c["name"] + ": ordering of a, x0, b")
        tops = [s for s in sr if s["kind"] == "max" and x0r < s["x"] < br]
        if len(tops) != 1:
            raise RuntimeError(c["name"] + ": expected one barrier top between x0 and b")
        xb_r = tops[0]["x"]
        T, lnT, qerr, _, _ = mfpt(Ur, Dr, ar, x0r, br, sr, method)
        xb = dbl(-xb_r if mirrored else xb_r)
        e = {"name": c["name"], "U": c["U"], "D": c["D"], "a": num(a), "x0": num(x0), "b": num(b),
             "x_barrier": num(xb), "T": num(T), "ln_T": num(lnT),
             "U_barrier_minus_U_x0": num(U(xb) - U(x0)),
             "reflecting": "left" if not mirrored else "right"}
        if "table" in c:
            e["table"] = c["table"]
        R["mfpt"].append(e)
        R["diag"]["mfpt/" + c["name"]] = {"T": T, "ln_T": lnT, "quad_err": qerr}
        log("  mfpt %-14s ln T = %s   (outer quad rel. error estimate %s)"
            % (c["name"], mp.nstr(lnT, 20), mp.nstr(qerr, 3)))

        # ---- B. TST for the selected cases -----------------------------------------------------------
        if c["name"] in tst_names:
            xb_in = dbl(xb_r)
            k, lnk, kerr = tst_rate(Ur, ar, xb_in, sr, method)
            R["tst_exact"].append({"name": c["name"], "U": c["U"], "a": num(a), "x_b": num(xb),
                                   "k": num(k), "ln_k": num(lnk),
                                   "reactant_side": "[a, x_b]" if not mirrored else "[x_b, a]"})
            R["diag"]["tst/" + c["name"]] = {"k": k, "ln_k": lnk, "quad_err": kerr}
            log("  tst  %-14s ln k = %s   (quad rel. error estimate %s)"
                % (c["name"], mp.nstr(lnk, 20), mp.nstr(kerr, 3)))

    # ---- C. actions --------------------------------------------------------------------------------
    def orbit(name, src, U, xmin, xtop, side, closed=None):
        E = U(xtop)
        if side == "left":
            xl, xr = turning_point(U, E, xmin, -1), xtop
        else:
            xl, xr = xtop, turning_point(U, E, xmin, +1)
        I, ierr = action(U, xl, xr, E, xmin, side, method)
        e = {"name": name, "U": src, "x_left": num(xl), "x_right": num(xr), "E": num(E), "I": num(I)}
        d = {"I": I, "quad_err": ierr}
        if closed is not None:
            formula, val = closed
            e["closed_form"] = formula
            e["I_closed_form"] = num(val)
            d["closed_rel_diff"] = abs(I / val - 1)
        R["action"].append(e)
        R["diag"]["action/" + name] = d
        log("  action %-20s I = %s   (quad rel. error estimate %s)%s"
            % (name, mp.nstr(I, 20), mp.nstr(ierr, 3),
               "" if closed is None else "   |I/closed - 1| = " + mp.nstr(d["closed_rel_diff"], 3)))

    orbit("asym_reactant", M3_U, U3, m3_left["x"], m3_top["x"], "left")
    orbit("asym_product", M3_U, U3, m3_right["x"], m3_top["x"], "right")
    orbit("table2000_reactant", M8_U, U8, m8_left["x"], m8_top["x"], "left")
    orbit("table2000_product", M8_U, U8, m8_right["x"], m8_top["x"], "right")
    Eb = 8
    orbit("cubic8", U4src, U4, mpf(0), mpf(2) / 3, "left",
          ("36*Eb/(5*omega_a), omega_a = sqrt(27*Eb/2), Eb = 8, L = 1, m = 1",
           36 * mpf(Eb) / (5 * mp.sqrt(mpf(27) * Eb / 2))))
    orbit("quartic5", "5*(x^2-1)^2", compile_formula("5*(x^2-1)^2"), mpf(-1), mpf(0), "left",
          ("(8/3)*a*sqrt(m*Eb), Eb = 5, a = 1, m = 1", mpf(8) / 3 * mp.sqrt(5)))

    # ---- M8 table ----------------------------------------------------------------------------------
    rows = []
    for i in range(2000):
        x = dbl(mpf("-2.5") + mpf(5) * i / 1999)
        rows.append((float(x), float(U8(x))))
    R["table_rows"] = rows
    R["table_formula"] = M8_U

    # ---- D. Mel'nikov ------------------------------------------------------------------------------
    if melnikov:
        mp.dps = dps_mel
        for ds in MELNIKOV_DELTAS:
            delta = mpf(ds)
            lnA, aerr = melnikov_lnA(delta, method)
            lnA2 = melnikov_lnA_alt(delta, method)
            A = mp.exp(lnA)
            one_minus_A = -mp.expm1(lnA)
            R["melnikov_A"].append({"delta": num(delta), "A": num(A), "ln_A": num(lnA),
                                    "one_minus_A": num(one_minus_A),
                                    "ln_one_minus_A": num(mp.log(one_minus_A)),
                                    "ln_minus_ln_A": num(mp.log(-lnA))})
            d = {"ln_A": lnA, "A": A, "quad_err": aerr, "alt_rel_diff": abs(lnA2 / lnA - 1)}
            if delta >= mpf("1e-2"):
                d["series_rel_diff"] = abs(melnikov_lnA_series(delta) / lnA - 1)
            R["diag"]["melnikov/" + ds] = d
            log("  melnikov delta=%-6s ln A = %s   |alt/main-1| = %s%s"
                % (ds, mp.nstr(lnA, 20), mp.nstr(d["alt_rel_diff"], 3),
                   "" if "series_rel_diff" not in d else "   |series/main-1| = " + mp.nstr(d["series_rel_diff"], 3)))
        # small-delta expansion A ~ delta (1 + zeta(1/2)/sqrt(pi) sqrt(delta))
        delta = mpf("1e-4")
        c = mp.zeta(mpf(1) / 2) / mp.sqrt(mp.pi)
        approx = delta * (1 + c * mp.sqrt(delta))
        A = R["diag"]["melnikov/1e-4"]["A"]
        R["checks"]["melnikov_small_delta"] = {
            "delta": num(delta), "coefficient_zeta_half_over_sqrt_pi": num(c),
            "expansion": "delta*(1 + zeta(1/2)/sqrt(pi)*sqrt(delta))",
            "A_expansion": num(approx), "A": num(A), "relative_difference": num(A / approx - 1)}
        log("  melnikov small-delta check: zeta(1/2)/sqrt(pi) = %s, A(1e-4) = %s, expansion = %s, "
            "A/expansion - 1 = %s" % (mp.nstr(c, 12), mp.nstr(A, 15), mp.nstr(approx, 15),
                                      mp.nstr(A / approx - 1, 6)))
    mp.dps = dps
    log("  mp.quad calls: %d, of which not converged to the tolerance: %d"
        % (QUAD_STATS["calls"], QUAD_STATS["not_converged"]))
    return R


def to_json(R, dps, dps_mel):
    meta = {
        "generator": "reference/generate.py",
        "regenerate": "python3 reference/generate.py",
        "mpmath_version": mpmath.__version__,
        "mp_dps": dps,
        "mp_dps_melnikov": dps_mel,
        "units": "reduced units: kT = 1, m = 1",
        "number_format": "JSON numbers are the correctly rounded doubles of the mpmath results (repr of float)",
        "inputs": "x0, b, x_barrier computed by root search are rounded to doubles before the reference "
                  "values are computed; the references are for exactly the stored inputs",
        "sources": "see reference/SOURCES.md",
    }
    return {"meta": meta, "mfpt": R["mfpt"], "tst_exact": R["tst_exact"], "action": R["action"],
            "melnikov_A": R["melnikov_A"], "checks": R["checks"]}


def write_outputs(R):
    out = to_json(R, DPS, DPS_MELNIKOV)
    with open(os.path.join(HERE, "values.json"), "w", encoding="utf-8", newline="\n") as fh:
        json.dump(out, fh, indent=2, sort_keys=True)
        fh.write("\n")
    with open(os.path.join(HERE, "profile_2000.csv"), "w", encoding="utf-8", newline="\n") as fh:
        fh.write("# x, U (kT); sampled from %s on 2000 uniform points in [-2.5, 2.5]; generated by generate.py\n"
                 % R["table_formula"])
        fh.write("x,U\n")
        for x, u in R["table_rows"]:
            fh.write("%.17g,%.17g\n" % (x, u))


def rel(a, b):
    if a == b:
        return mpf(0)
    return abs(a - b) / max(abs(a), abs(b))


def check():
    """Self-consistency: dps 30 vs dps 40 (Mel'nikov 40 vs 50), and tanh-sinh vs Gauss-Legendre at dps 30."""
    print("reference run (dps %d / %d, tanh-sinh):" % (DPS, DPS_MELNIKOV))
    R0 = compute(DPS, DPS_MELNIKOV)
    print("high-precision run (dps %d / %d, tanh-sinh):" % (DPS + 10, DPS_MELNIKOV + 10))
    R1 = compute(DPS + 10, DPS_MELNIKOV + 10)
    print("second quadrature rule (dps %d, gauss-legendre; groups A-C):" % DPS)
    R2 = compute(DPS, DPS_MELNIKOV, method="gauss-legendre", melnikov=False)
    mp.dps = DPS + 10
    print()
    print("columns: quantity compared (ln T, ln k: absolute difference; I, ln A: relative difference);")
    print("  ref_vs_hi = reference run vs run with 10 more digits (A-C: dps 30 vs 40, D: dps 40 vs 50);")
    print("  TS_vs_GL = tanh-sinh vs Gauss-Legendre at dps 30; digits = -log10(ref_vs_hi)")
    print("%-26s %-14s %-14s %-14s" % ("quantity", "ref_vs_hi", "TS_vs_GL", "digits"))
    worst = mpf(0)
    for key, d0 in R0["diag"].items():
        d1 = R1["diag"][key]
        qty = [q for q in ("ln_T", "ln_k", "I", "ln_A") if q in d0][0]
        r = rel(d0[qty], d1[qty])
        if qty == "ln_T":
            r = abs(d0[qty] - d1[qty])            # absolute error of ln T = relative error of T
        elif qty == "ln_k":
            r = abs(d0[qty] - d1[qty])
        elif qty == "ln_A":
            r = rel(d0[qty], d1[qty])             # relative error of ln A (and of 1 - A)
        worst = max(worst, r)
        r2 = ""
        if key in R2["diag"]:
            d2 = R2["diag"][key]
            x = abs(d0[qty] - d2[qty]) if qty in ("ln_T", "ln_k") else rel(d0[qty], d2[qty])
            r2 = mp.nstr(x, 3)
        digits = "inf" if r == 0 else mp.nstr(-mp.log10(r), 4)
        print("%-26s %-14s %-14s %-14s" % (key, mp.nstr(r, 3), r2, digits))
    print("worst reference-vs-high-precision difference: %s" % mp.nstr(worst, 3))
    # float agreement of everything written
    j0 = json.dumps(to_json(R0, DPS, DPS_MELNIKOV), sort_keys=True)
    j1 = json.dumps(to_json(R1, DPS, DPS_MELNIKOV), sort_keys=True)
    print("values.json content identical at dps 30 and dps 40:", j0 == j1)
    mp.dps = DPS


def main():
    if "--check" in sys.argv[1:]:
        check()
        return
    R = compute(DPS, DPS_MELNIKOV)
    write_outputs(R)
    print("wrote values.json and profile_2000.csv next to generate.py")


if __name__ == "__main__":
    main()
