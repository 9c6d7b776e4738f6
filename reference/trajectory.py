#!/usr/bin/env python3
"""Independent synthetic trajectories for the observed-trajectory tests (pure Python 3, no numpy).

Overdamped Langevin dynamics dx = -D U'(x) dt + D'(x) dt + sqrt(2 D(x)) dW (kT = 1, Ito), integrated
by Euler-Maruyama with Python's own generator (random.Random, Mersenne Twister, Box-Muller via
random.gauss), so neither the generator nor the integrator shares code with escapade.

Cases (reduced units, kT = 1):
  dw3_const.npy  U(x) = 3 (x^2 - 1)^2, D(x) = 1,               reflecting walls at +-2
  dw3_ramp.npy   U(x) = 3 (x^2 - 1)^2, D(x) = 1 + 0.25 (x + 1), reflecting walls at +-2
Each file: 200 000 positions (float32, NumPy .npy v1.0, little endian), sampled every 0.05 time
units from steps of 1e-3 (50 steps per sample), started at x = -1 after a 100-time-unit burn-in.

The step is small against the fastest relaxation time 1/(D U''(+-1)) = 1/24 (D dt U'' = 0.024), so
the Euler-Maruyama bias of the stationary density is of order 1% in the wells (common practice, no
source); the tests allow for it. Re-running rewrites both files byte for byte (fixed seeds).

    python3 reference/trajectory.py      # about 20 seconds
"""

import math
import os
import random
import struct

EB = 3.0
WALL = 2.0
DT = 1e-3
EVERY = 50
SAMPLES = 200_000
BURN = 100_000  # steps


def du(x):
    return 4.0 * EB * x * (x * x - 1.0)


CASES = {
    "dw3_const": (lambda x: 1.0, lambda x: 0.0, 20261203),
    "dw3_ramp": (lambda x: 1.0 + 0.25 * (x + 1.0), lambda x: 0.25, 20261204),
}


def reflect(x):
    # reflecting walls: fold a step that crossed a wall back inside
    while x < -WALL or x > WALL:
        if x < -WALL:
            x = -2.0 * WALL - x
        if x > WALL:
            x = 2.0 * WALL - x
    return x


def run(d, dd, seed):
    rng = random.Random(seed)
    gauss = rng.gauss
    x = -1.0
    out = []
    sq = math.sqrt(2.0 * DT)
    for i in range(BURN + SAMPLES * EVERY):
        dx = x
        x = reflect(dx + (-d(dx) * du(dx) + dd(dx)) * DT + sq * math.sqrt(d(dx)) * gauss(0.0, 1.0))
        if i >= BURN and (i - BURN + 1) % EVERY == 0:
            out.append(x)
    return out


def write_npy(path, values):
    header = "{'descr': '<f4', 'fortran_order': False, 'shape': (%d,), }" % len(values)
    # magic + version + header length, header padded with spaces to a multiple of 64, ending in \n
    pad = 64 - (10 + len(header) + 1) % 64
    header = header + " " * pad + "\n"
    with open(path, "wb") as f:
        f.write(b"\x93NUMPY\x01\x00")
        f.write(struct.pack("<H", len(header)))
        f.write(header.encode("latin1"))
        f.write(struct.pack("<%df" % len(values), *values))


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    for name, (d, dd, seed) in CASES.items():
        xs = run(d, dd, seed)
        write_npy(os.path.join(here, name + ".npy"), xs)
        print(name, len(xs), "samples, mean", sum(xs) / len(xs))


if __name__ == "__main__":
    main()
