#!/usr/bin/python3
"""Prints, as JSON, what nibabel reads from Siemens mosaic files.

An independent reference for the Go CSA reader and mosaic split
(audit/header/nibabel_test.go): for each DICOM file (gzipped when its name ends in .gz) named on the
command line, nibabel's csareader gives the CSA values and its
MosaicWrapper the slice geometry (affine) and the pixel data split into
slices. Needs Debian python3-nibabel and python3-pydicom.
"""
import gzip
import json
import sys

import numpy as np
import pydicom
from nibabel.nicom import csareader, dicomwrappers


def describe(path):
    opener = gzip.open if path.endswith('.gz') else open
    with opener(path, 'rb') as f:
        ds = pydicom.dcmread(f)
    csa = csareader.get_csa_header(ds, 'image')
    series = csareader.get_csa_header(ds, 'series')
    w = dicomwrappers.MosaicWrapper(ds)
    aff = w.affine
    data = w.get_data()  # rows x columns x slices, rescaled
    n = int(w.n_mosaic)
    positions = [list(map(float, aff[:3, :3] @ np.array([0.0, 0.0, k]) + aff[:3, 3])) for k in range(n)]
    g = csareader.get_g_vector(csa)
    bm = csareader.get_vector(csa, 'B_matrix', 6)
    b = csareader.get_b_value(csa)
    sn = csareader.get_slice_normal(csa)
    return {
        'csa_type': csa['type'],
        'image_tags': csa['n_tags'],
        'series_tags': series['n_tags'],
        'b_value': None if b is None else float(b),
        'gradient': None if g is None else list(map(float, g)),
        'b_matrix': None if bm is None else list(map(float, bm)),
        'slice_normal': None if sn is None else list(map(float, sn)),
        'n_mosaic': n,
        'tile_rows': int(data.shape[0]),
        'tile_cols': int(data.shape[1]),
        'positions': positions,
        'slice_sums': [float(data[:, :, k].sum()) for k in range(n)],
        'slice_probe': [float(data[data.shape[0] // 2, data.shape[1] // 3, k]) for k in range(n)],
    }


print(json.dumps({p: describe(p) for p in sys.argv[1:]}))
