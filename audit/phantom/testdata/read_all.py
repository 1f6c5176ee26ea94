#!/usr/bin/python3
"""Read every DICOM file under a folder with pydicom and print what it saw.

An independent reader of the phantom's files, used by the Go tests
(phantom_test.go): pydicom (Debian python3-pydicom) parses each file and
decodes its pixel data with numpy (python3-numpy). One line per file,
tab-separated:

    relative path, SOP Class UID, frames, rows, columns,
    pixel array shape (x-joined), sum of all pixel values,
    b-values of the frames (comma-joined, "-" for none)

b-values come from Diffusion b-value (0018,9087) at top level (classic MR
Image) or in the MR Diffusion Sequence (0018,9117) of the per-frame or
shared functional groups (Enhanced MR Image), PS3.3 C.8.13.5.9.
"""
import os
import sys

import pydicom


def bvalues(ds):
    if "PerFrameFunctionalGroupsSequence" not in ds:
        return [ds.DiffusionBValue] if "DiffusionBValue" in ds else []
    shared = ds.SharedFunctionalGroupsSequence[0]
    out = []
    for frame in ds.PerFrameFunctionalGroupsSequence:
        for group in (frame, shared):
            if "MRDiffusionSequence" in group:
                out.append(group.MRDiffusionSequence[0].DiffusionBValue)
                break
    return out


def main(root):
    print("pydicom", pydicom.__version__)
    for folder, _, names in sorted(os.walk(root)):
        for name in sorted(names):
            if not name.endswith(".dcm"):
                continue
            path = os.path.join(folder, name)
            ds = pydicom.dcmread(path)
            arr = ds.pixel_array
            frames = int(ds.get("NumberOfFrames", 1))
            bs = ",".join("%g" % b for b in bvalues(ds)) or "-"
            print("\t".join([
                os.path.relpath(path, root), ds.SOPClassUID, str(frames),
                str(ds.Rows), str(ds.Columns),
                "x".join(str(n) for n in arr.shape), str(int(arr.sum(dtype="int64"))), bs,
            ]))


if __name__ == "__main__":
    main(sys.argv[1])
