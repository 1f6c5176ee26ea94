#!/usr/bin/python3
"""Independent weighted least-squares ADC fit, the reference for the Go
fit adc.FitWLS (TestFitWLSMatchesNumpyOnNoisyData).

Reads JSON from the file named by the first argument:

    {"b": [b_0, ..., b_k], "signals": [[S(b_0) of voxel 0, ...], ...]}

(signals[k] is the image at b[k], one value per voxel) and prints JSON
{"wls": [...], "ols": [...]}: per voxel the ADC (mm2/s for b in s/mm2) of
the fit ln S = ln S0 - b ADC, weighted with w = S^2 of the measured
signal (one pass, no iteration: the weights the Go fit cites, Chad &
Pasternak, ISMRM 2020 #4415; docs/references.md), and the same fit
unweighted (w = 1), so the caller can see that the two differ on its
data. Points with S <= floor (the second argument, default 0) are left
out; a voxel with fewer than two distinct b-values left is null.

It solves the weighted normal equations with numpy.linalg.lstsq on the
rows scaled by sqrt(w), sharing no code with the Go fit.

Needs the Debian package python3-numpy.
"""

import json
import sys

import numpy as np


def fit(b, s, w):
    X = np.stack([np.ones_like(b), -b], axis=1)
    y = np.log(s)
    sw = np.sqrt(w)
    beta, _, rank, _ = np.linalg.lstsq(X * sw[:, None], y * sw, rcond=None)
    if rank < 2:
        return None
    return float(beta[1])


def main(argv):
    with open(argv[0]) as f:
        data = json.load(f)
    floor = float(argv[1]) if len(argv) > 1 else 0.0
    b = np.array(data["b"], dtype=np.float64)
    sig = np.array(data["signals"], dtype=np.float64)  # (len(b), voxels)
    wls, ols = [], []
    for i in range(sig.shape[1]):
        s = sig[:, i]
        keep = s > floor
        if len(set(b[keep].tolist())) < 2:
            wls.append(None)
            ols.append(None)
            continue
        wls.append(fit(b[keep], s[keep], s[keep] ** 2))
        ols.append(fit(b[keep], s[keep], np.ones(int(keep.sum()))))
    json.dump({"wls": wls, "ols": ols}, sys.stdout)


if __name__ == "__main__":
    main(sys.argv[1:])
