#!/usr/bin/python3
"""Read the phantom's files in every layout with pydicom and nibabel.

An independent reader of the makers' layouts (layout.go), used by the Go
tests (layout_test.go). ROOT holds one folder per layout (its name is the
layout's, "standard", "siemens-mosaic", "ge", "philips", "canon", "uih"),
each holding studies. pydicom (Debian python3-pydicom) finds every
private block through its private creator (PS3.5 7.8.1,
Dataset.private_block); nibabel (python3-nibabel) parses the Siemens CSA
header (nibabel.nicom.csareader.get_csa_header) and splits the mosaic
(nibabel.nicom.dicomwrappers.wrapper_from_file, MosaicWrapper).

One line per image (per slice of a mosaic), tab-separated:

    relative path (with "#slice" for a mosaic), b-value ("-" for none),
    gradient direction x,y,z ("-" for none or a zero vector),
    Image Position (Patient) x,y,z of the slice, sum of its pixels,
    a layout-specific note ("-" for none)

The first line names the readers' versions.
"""
import os
import sys

import numpy
import pydicom

import nibabel
from nibabel.nicom import csareader, dicomwrappers


def fmt_vec(v):
    if v is None:
        return "-"
    v = [float(x) for x in v]
    if all(abs(x) < 1e-6 for x in v):
        return "-"
    return ",".join("%.4f" % (0.0 if abs(x) < 5e-5 else x) for x in v)


def fmt_b(b):
    return "-" if b is None else "%g" % float(b)


def block(ds, group, creator):
    try:
        return ds.private_block(group, creator)
    except KeyError:
        return None


def elem(blk, offset):
    if blk is None or blk.get_tag(offset) not in blk.dataset:
        return None
    return blk[offset].value


def standard(ds):
    b = ds.get("DiffusionBValue")
    g = None
    if "DiffusionGradientDirectionSequence" in ds:
        g = ds.DiffusionGradientDirectionSequence[0].DiffusionGradientOrientation
    return b, g, "-"


def ge(ds):
    # GEMS_PARM_01 (0043,xx39): the first value is the b-value, on some
    # software versions plus 10^9 (NA-MIC wiki: "might need to be
    # masked"). GEMS_ACQU_01 (0019,xxBB/BC/BD): gradient in frequency,
    # phase, slice axes (dcm2niix's GE notes), which are the patient axes
    # of these axial, column-phase-encoded images.
    v = elem(block(ds, 0x0043, "GEMS_PARM_01"), 0x39)
    b = None
    if v is not None:
        b = int(v[0])
        if b >= 1000000000:
            b -= 1000000000
    acq = block(ds, 0x0019, "GEMS_ACQU_01")
    g = [elem(acq, x) for x in (0xBB, 0xBC, 0xBD)]
    return b, None if None in g else g, "-"


def philips(ds):
    img = block(ds, 0x2001, "Philips Imaging DD 001")
    mr = block(ds, 0x2005, "Philips MR Imaging DD 001")
    b = elem(img, 0x03)
    label = elem(img, 0x04)
    g = [elem(mr, x) for x in (0xB0, 0xB1, 0xB2)]
    return b, None if None in g else g, label or "-"


def canon(ds):
    b, g, _ = standard(ds)
    return b, g, str(ds.get("ImageComments", "-")) or "-"


def uih(ds):
    blk = block(ds, 0x0065, "Image Private Header")
    return elem(blk, 0x09), elem(blk, 0x37), "-"


READERS = {"standard": standard, "ge": ge, "philips": philips, "canon": canon, "uih": uih}


def classic(path, rel, layout):
    ds = pydicom.dcmread(path)
    b, g, note = READERS[layout](ds)
    pos = [float(x) for x in ds.ImagePositionPatient]
    print("\t".join([rel, fmt_b(b), fmt_vec(g), fmt_vec(pos) if any(pos) else "0,0,0",
                     str(int(ds.pixel_array.sum(dtype="int64"))), str(note)]))


def mosaic(path, rel):
    w = dicomwrappers.wrapper_from_file(path)
    if not isinstance(w, dicomwrappers.MosaicWrapper):
        raise SystemExit("%s: nibabel does not see a mosaic (%s)" % (rel, type(w).__name__))
    csa = csareader.get_csa_header(w.dcm_data)
    n = csareader.get_n_mosaic(csa)
    b = csareader.get_b_value(csa)
    g = csareader.get_g_vector(csa)
    q = "-"
    if g is not None:
        # The wrapper's own diffusion vector, from B_matrix in voxel axes.
        q = fmt_vec(w.b_vector) + ";bq=%g" % w.b_value
    data = w.get_data()
    pos0 = numpy.array(w.image_position, dtype=float)
    normal = numpy.array(w.slice_normal, dtype=float)
    step = float(w.dcm_data.SpacingBetweenSlices)
    for i in range(data.shape[2]):
        pos = pos0 + i * step * normal
        print("\t".join([
            "%s#%d" % (rel, i), fmt_b(b), fmt_vec(g), fmt_vec(pos),
            str(int(numpy.rint(data[..., i]).sum(dtype="int64"))),
            "n=%d;shape=%dx%dx%d;q=%s" % (n, data.shape[0], data.shape[1], data.shape[2], q),
        ]))


def main(root):
    print("pydicom", pydicom.__version__, "nibabel", nibabel.__version__)
    for folder, _, names in sorted(os.walk(root)):
        for name in sorted(names):
            if not name.endswith(".dcm"):
                continue
            path = os.path.join(folder, name)
            rel = os.path.relpath(path, root)
            layout = rel.split(os.sep)[0]
            if layout == "siemens-mosaic":
                mosaic(path, rel)
            else:
                classic(path, rel, layout)


if __name__ == "__main__":
    main(sys.argv[1])
