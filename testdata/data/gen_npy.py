#!/usr/bin/python3
"""Write the reference fixtures for stria's data package.

Run from the repository root:  /usr/bin/python3 testdata/data/gen_npy.py

Every valid .npy/.npz here is written by numpy itself (numpy.save,
numpy.lib.format.write_array, numpy.savez, numpy.savez_compressed), and the
expected values in expected.json are what numpy.load returns for it, so the Go
reader is checked against numpy's reading of numpy's writing. The tables'
expected values come from numpy.genfromtxt. The broken files are made by
cutting or editing the bytes of valid files, as described next to each one.
"""
import io
import json
import os
import platform
import struct
import sys
import zipfile

import numpy as np
from numpy.lib import format as npformat

HERE = os.path.dirname(os.path.abspath(__file__))
rng = np.random.default_rng(20261201)
expected = {
    "generator": "testdata/data/gen_npy.py",
    "python": platform.python_version(),
    "numpy": np.__version__,
    "npy": {},
    "npz": {},
    "tables": {},
}


def path(name):
    return os.path.join(HERE, name)


def write(name, arr, version=None, fortran=False):
    """Write arr with numpy; record what numpy.load gives back."""
    a = np.asfortranarray(arr) if fortran else np.ascontiguousarray(arr)
    with open(path(name), "wb") as f:
        npformat.write_array(f, a, version=version)
    back = np.load(path(name))
    with open(path(name), "rb") as f:
        major, minor = npformat.read_magic(f)
    assert back.flags.f_contiguous if fortran else back.flags.c_contiguous
    expected["npy"][name] = {
        "shape": list(back.shape),
        "dtype": back.dtype.str,
        "fortran_order": bool(fortran and back.ndim == 2),
        "version": [major, minor],
        # C-order values as float64 (exact for every dtype used here).
        "values": [float(v) for v in back.astype(np.float64).ravel(order="C")],
    }


m34 = rng.normal(size=(3, 4))
write("f4_c_le_v1.npy", m34.astype("<f4"))
write("f4_c_be_v1.npy", m34.astype(">f4"))
write("f4_f_le_v1.npy", m34.astype("<f4"), fortran=True)
write("f4_f_be_v1.npy", m34.astype(">f4"), fortran=True)
write("f8_c_le_v1.npy", m34.astype("<f8"))
write("f8_c_be_v1.npy", m34.astype(">f8"))
write("f8_f_le_v1.npy", m34.astype("<f8"), fortran=True)
write("f8_f_be_v2.npy", m34.astype(">f8"), version=(2, 0), fortran=True)
write("f4_c_le_v2.npy", m34.astype("<f4"), version=(2, 0))
write("f4_c_le_v3.npy", m34.astype("<f4"), version=(3, 0))
write("f2_c_le_v1.npy", m34.astype("<f2"))

# Integer and bool counts, 2 x 5, with the extremes of the small types.
ints = {
    "i1": [[-128, -1, 0, 1, 127], [5, 6, 7, 8, 9]],
    "i2": [[-32768, -2, 0, 3, 32767], [10, 20, 30, 40, 50]],
    "i4": [[-2147483648, -3, 0, 4, 2147483647], [1, 2, 3, 4, 5]],
    "i8": [[-(2**40), -4, 0, 5, 2**40], [6, 7, 8, 9, 10]],
    "u1": [[0, 1, 2, 254, 255], [9, 8, 7, 6, 5]],
    "u2": [[0, 1, 2, 65534, 65535], [3, 3, 3, 3, 3]],
    "u4": [[0, 1, 2, 4294967040, 16777216], [4, 4, 4, 4, 4]],
    "u8": [[0, 1, 2, 2**40, 2**50], [1, 1, 1, 1, 1]],
}
for code, vals in ints.items():
    for order in "<>":
        dt = np.dtype(order + code)
        if dt.itemsize == 1 and order == ">":
            continue
        name = "%s_%s.npy" % (code, "le" if order == "<" else "be")
        write(name, np.array(vals, dtype=dt))
write("u2_f_be.npy", np.array(ints["u2"], dtype=">u2"), fortran=True)
write("b1.npy", np.array([[True, False, True], [False, False, True]]))

# A 1-D stimulus (heading in deg, float64) and a column vector.
stim = np.array([0.0, 5.999, 6.0, 359.9, 360.0, -0.1, 720.5, 123.456789012345])
write("stim_1d.npy", stim)
write("stim_col.npy", stim.reshape(-1, 1).astype("<f4"))
write("empty_0x3.npy", np.zeros((0, 3), dtype="<f4"))

# .npz archives: responses + stimulus + condition, stored and deflated.
resp = rng.poisson(3.0, size=(6, 4)).astype(np.float32)
stim6 = np.array([10.0, 100.0, 190.0, 280.0, 11.0, 101.0])
cond6 = np.array([0, 1, 2, 3, 0, 1], dtype=np.int64)
np.savez(path("rec.npz"), resp=resp, stim=stim6, cond=cond6)
np.savez_compressed(path("rec_compressed.npz"), resp=resp, stim=stim6, cond=cond6)
np.savez(path("single.npz"), only=m34.astype("<f8"))
for name in ["rec.npz", "rec_compressed.npz", "single.npz"]:
    with np.load(path(name)) as z:
        expected["npz"][name] = {
            k: {"shape": list(z[k].shape), "dtype": z[k].dtype.str,
                "values": [float(v) for v in z[k].astype(np.float64).ravel()]}
            for k in sorted(z.files)
        }

# Tables. Written as text by hand; expected values from numpy.genfromtxt.
tables = {
    "rec.csv": "stim,cond,block,n0,n1,n2\n"
               "0,0,0,1.5,2,0\n90,1,0,2.5,3,0\n180,2,1,3.5,4,0\n270,3,1,4.5,5e-1,0\n",
    "rec.tsv": "stim\tn0\tn1\n0\t1\t2\n90\t3\t4\n180\t5\t6\n",
    "bom.csv": "\ufeffstim,n0\n1,2\n3,4\n",
    "missing.csv": "stim,n0,n1\n1,2,\n3,NaN,4\n",
    "floatint.csv": "stim,cond\n1,0.0\n2,3.0\n3,1\n",
}
for name, text in tables.items():
    with open(path(name), "w", encoding="utf-8", newline="") as f:
        f.write(text)
    delim = "\t" if name.endswith(".tsv") else ","
    arr = np.genfromtxt(path(name), delimiter=delim, names=True, encoding="utf-8-sig",
                        dtype=np.float64, missing_values="", filling_values=np.nan)
    cols = {}
    for k in arr.dtype.names:
        cols[k] = [None if np.isnan(v) else float(v) for v in np.atleast_1d(arr[k])]
    expected["tables"][name] = {"columns": list(arr.dtype.names), "values": cols}

# Tables that must be refused (expected error text fragments in the Go test).
bad_tables = {
    "bad_cell.csv": "stim,n0,n1\n1,2,3\n2,abc,4\n",          # line 3, column n0
    "ragged.csv": "stim,n0\n1,2\n3\n",                     # line 3 has one field
    "dup.csv": "stim,n0,n0\n1,2,3\n",                      # duplicate column name
    "pandas_index.csv": ",stim,n0\n0,1,2\n1,3,4\n",        # unnamed index column
    "badint.csv": "stim,cond\n1,0\n2,1.5\n",               # 1.5 is not an id
}
for name, text in bad_tables.items():
    with open(path(name), "w", encoding="utf-8", newline="") as f:
        f.write(text)

# Hand-broken .npy files, each derived from a valid one.
good = open(path("f4_c_le_v1.npy"), "rb").read()
hdr_end = good.index(b"\n") + 1
open(path("broken_truncated.npy"), "wb").write(good[:-5])            # 5 data bytes cut
open(path("broken_magic.npy"), "wb").write(b"\x93NUMPZ" + good[6:])  # magic spoiled
open(path("broken_version.npy"), "wb").write(good[:6] + b"\x04\x00" + good[8:])
open(path("broken_extra.npy"), "wb").write(good + b"\x00\x00\x00\x00")


def with_header(dict_text, data, major=1):
    """Build a .npy by hand with the given header dict text."""
    h = dict_text.encode("latin1")
    pre = 10 if major == 1 else 12
    pad = (64 - (pre + len(h) + 1) % 64) % 64
    h = h + b" " * pad + b"\n"
    if major == 1:
        head = b"\x93NUMPY\x01\x00" + struct.pack("<H", len(h))
    else:
        head = b"\x93NUMPY" + bytes([major, 0]) + struct.pack("<I", len(h))
    return head + h + data


data = good[hdr_end:]
# Header claims 4600 x 24000 float32 but only 48 bytes of data follow.
open(path("broken_lying_shape.npy"), "wb").write(
    with_header("{'descr': '<f4', 'fortran_order': False, 'shape': (4600, 24000), }", data))
# Header length field claims 4 GiB.
open(path("broken_header_len.npy"), "wb").write(b"\x93NUMPY\x02\x00\xff\xff\xff\xff" + b"{}")
open(path("broken_3d.npy"), "wb").write(
    with_header("{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3, 2), }", data))
open(path("broken_complex.npy"), "wb").write(
    with_header("{'descr': '<c8', 'fortran_order': False, 'shape': (3, 2), }", data))
open(path("broken_structured.npy"), "wb").write(
    with_header("{'descr': [('a', '<f4'), ('b', '<f4')], 'fortran_order': False, 'shape': (6,), }", data))
open(path("broken_nokey.npy"), "wb").write(
    with_header("{'descr': '<f4', 'shape': (3, 4), }", data))
open(path("broken_dict.npy"), "wb").write(
    with_header("{'descr': '<f4', 'fortran_order': False, 'shape': (3, 4) ", data))
# A pickled object array, as numpy.save writes for dtype=object.
np.save(path("broken_object.npy"), np.array([{"a": 1}, None], dtype=object), allow_pickle=True)
# A zip whose entry is not a .npy, and a file that is not a zip at all.
with zipfile.ZipFile(path("broken_entry.npz"), "w") as z:
    z.writestr("resp.npy", b"\x93NUMPY\x01\x00garbage")
open(path("broken_notzip.npz"), "wb").write(b"PK\x03\x04 this is not really a zip archive")

with open(path("expected.json"), "w") as f:
    json.dump(expected, f, indent=1, sort_keys=True)
    f.write("\n")
print("wrote fixtures to", HERE, "with numpy", np.__version__, file=sys.stderr)
