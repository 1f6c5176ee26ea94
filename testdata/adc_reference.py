#!/usr/bin/python3
"""Independent two-point ADC of a diffusion series, the reference for the
Go maps of package audit (TestADCMatchesPythonReference).

Reads DICOM files with pydicom and computes, with numpy in float64,

    ADC = ln(S0 / Sb) / (b - b0)   (mm2/s; docs/references.md#mono-exponential)

from the lowest-b images (the b0, or the trace of the lowest b-value when
that is above 0, as in a b50/b800 body protocol) and the isotropic (trace)
images of the high b-value, after Rescale Slope and Intercept (or the per-frame Pixel
Value Transformation). Voxels where S0 or Sb is not positive are NaN.
Classic MR Image Storage (one image per file) and Enhanced MR multi-frame
(per-frame and shared functional groups) are both read. Derived maps
(Image Type or Frame Type value ADC, DIFFUSION_ANISO, DIFFUSION_ATTNTD)
are skipped.

It shares no code with the Go reader: it is meant to catch a mistake in
ours (rescale, slice order, the b-value used), not to repeat it.

Usage: adc_reference.py [--b B] OUT.raw FILE_OR_DIR...

Writes the ADC as raw little-endian float64, C order (slice, row, column)
into OUT.raw, slices in ascending order of Image Position projected on
the slice normal (row x column direction cosines, PS3.3 C.7.6.2.1.1),
and prints JSON to stdout: rows, cols, slices, b, b0, and the Image
Position (Patient) of every slice, so the caller can match slices by
position.

Needs the Debian packages python3-pydicom and python3-numpy.
"""

import json
import os
import sys

import numpy as np
import pydicom

DERIVED = {"ADC", "DIFFUSION_ANISO", "DIFFUSION_ATTNTD", "EADC", "FA"}


def files(args):
    for a in args:
        if os.path.isdir(a):
            for root, _, names in os.walk(a):
                for n in sorted(names):
                    yield os.path.join(root, n)
        else:
            yield a


def item(fg, shared, name):
    """First item of a functional group macro, per-frame before shared."""
    for level in (fg, shared):
        if level is not None and name in level and len(level[name].value) > 0:
            return level[name].value[0]
    return None


def images(ds):
    """Yield (b, directionality, ipp, iop, pixels) for every image of ds."""
    if "PerFrameFunctionalGroupsSequence" in ds:
        shared = ds.SharedFunctionalGroupsSequence[0] if "SharedFunctionalGroupsSequence" in ds else None
        arr = ds.pixel_array
        if arr.ndim == 2:
            arr = arr[np.newaxis]
        for i, fg in enumerate(ds.PerFrameFunctionalGroupsSequence):
            ft = item(fg, shared, "MRImageFrameTypeSequence")
            if ft is not None and DERIVED & set(ft.get("FrameType", [])):
                continue
            diff = item(fg, shared, "MRDiffusionSequence")
            if diff is None or "DiffusionBValue" not in diff:
                continue
            pvt = item(fg, shared, "PixelValueTransformationSequence")
            slope = float(pvt.get("RescaleSlope", 1)) if pvt is not None else 1.0
            icpt = float(pvt.get("RescaleIntercept", 0)) if pvt is not None else 0.0
            pos = item(fg, shared, "PlanePositionSequence").ImagePositionPatient
            ori = item(fg, shared, "PlaneOrientationSequence").ImageOrientationPatient
            yield (float(diff.DiffusionBValue), str(diff.get("DiffusionDirectionality", "")),
                   [float(v) for v in pos], [float(v) for v in ori],
                   arr[i].astype(np.float64) * slope + icpt)
    else:
        if DERIVED & set(ds.get("ImageType", [])) or "DiffusionBValue" not in ds:
            return
        slope = float(ds.get("RescaleSlope", 1))
        icpt = float(ds.get("RescaleIntercept", 0))
        yield (float(ds.DiffusionBValue), str(ds.get("DiffusionDirectionality", "")),
               [float(v) for v in ds.ImagePositionPatient], [float(v) for v in ds.ImageOrientationPatient],
               ds.pixel_array.astype(np.float64) * slope + icpt)


def main(argv):
    want_b = None
    if len(argv) > 2 and argv[0] == "--b":
        want_b, argv = float(argv[1]), argv[2:]
    if len(argv) < 2:
        sys.exit(__doc__)
    out, inputs = argv[0], argv[1:]

    imgs = []
    for path in files(inputs):
        try:
            ds = pydicom.dcmread(path)
        except pydicom.errors.InvalidDicomError:
            continue
        imgs.extend(images(ds))
    if not imgs:
        sys.exit("no diffusion images")

    b0 = min(b for b, _, _, _, _ in imgs)
    trace_bs = sorted({b for b, d, _, _, _ in imgs if d == "ISOTROPIC" and b > b0})
    if not trace_bs:
        sys.exit("no isotropic (trace) images above the lowest b-value")
    b = want_b if want_b is not None else trace_bs[-1]

    iop = np.array(imgs[0][3])
    normal = np.cross(iop[:3], iop[3:])

    def stack(select):
        by_pos = {}
        for bv, d, ipp, _, px in imgs:
            if select(bv, d):
                key = round(float(np.dot(ipp, normal)), 3)
                by_pos.setdefault(key, (ipp, px))  # a repeat keeps the first
        return by_pos

    # A lower b-value above 0 (b50 of a body protocol) is acquired, like
    # the high b, along gradient directions and combined into the
    # scanner's trace: use that trace as S0 when it is there, so both
    # signals are traces. At b = 0 every image is the b0.
    b0_trace = any(bv == b0 and d == "ISOTROPIC" for bv, d, _, _, _ in imgs)
    s0 = stack(lambda bv, d: bv == b0 and (d == "ISOTROPIC" or not b0_trace))
    sb = stack(lambda bv, d: abs(bv - b) <= max(5.0, 0.02 * b) and d == "ISOTROPIC")
    keys = sorted(set(s0) & set(sb))
    if not keys:
        sys.exit("b0 and trace images share no slice position")

    S0 = np.stack([s0[k][1] for k in keys])
    SB = np.stack([sb[k][1] for k in keys])
    adc = np.full(S0.shape, np.nan)
    ok = (S0 > 0) & (SB > 0)
    adc[ok] = np.log(S0[ok] / SB[ok]) / (b - b0)
    adc.astype("<f8").tofile(out)

    json.dump({
        "rows": int(S0.shape[1]), "cols": int(S0.shape[2]), "slices": len(keys),
        "b": b, "b0": b0, "positions": [s0[k][0] for k in keys],
    }, sys.stdout)


if __name__ == "__main__":
    main(sys.argv[1:])
