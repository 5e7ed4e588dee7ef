#!/usr/bin/python3
"""NPY and NPZ fixtures for the array readers, written by NumPy itself.

Tool: NumPy (numpy.save, numpy.lib.format.write_array with explicit format versions,
numpy.savez, numpy.savez_compressed) and Python's zipfile to inspect what NumPy wrote.
Every array's expected shape, dtype, order and values (flattened in C order) go to
tests/fixtures/npy/expected.json; non-finite values are spelled "nan", "inf", "-inf".

Run: /usr/bin/python3 tests/reference/make_npy_fixtures.py
"""
import json
import math
import pathlib
import struct
import zipfile

import numpy as np

OUT = pathlib.Path(__file__).resolve().parent.parent / "fixtures" / "npy"

# Bigger than the 64 KiB first read of an NPZ member, so the reader's second read runs.
LARGE_COUNT = 9000  # float64 elements: 72000 payload bytes


def flat_values(a):
    """C-order values as JSON numbers; exact for every dtype used here."""
    out = []
    for v in np.ascontiguousarray(a).reshape(-1).tolist():
        v = float(v)
        if math.isnan(v):
            out.append("nan")
        elif math.isinf(v):
            out.append("inf" if v > 0 else "-inf")
        else:
            out.append(v)
    return out


def describe(a, version, fortran):
    return {
        "descr": a.dtype.str,
        "shape": list(a.shape),
        "fortran_order": fortran,
        "version": list(version),
        "values": flat_values(a),
    }


def npy_cases():
    rng = np.random.default_rng(20240611)
    f8_2d = rng.normal(size=(3, 4))
    cases = {
        "f4_2d": f8_2d.astype("<f4"),
        "f8_2d": f8_2d.astype("<f8"),
        "i4_1d": np.array([0, 1, -1, 2147483647, -2147483648, 12345], dtype="<i4"),
        "i8_1d": np.array([0, -7, 2**53 - 1, -(2**40), 99], dtype="<i8"),
        "u1_2d": np.array([[0, 1, 127], [128, 200, 255]], dtype="|u1"),
        "b1_1d": np.array([True, False, False, True, True], dtype="|b1"),
        "f8_0d": np.array(-2.5, dtype="<f8"),
        "f8_1d": np.linspace(-1.0, 1.0, 7),
        "f8_3d": rng.normal(size=(2, 3, 4)),
        "i4_3d": np.arange(24, dtype="<i4").reshape(2, 3, 4) - 11,
        "f8_empty": np.zeros((0, 3), dtype="<f8"),
        "f8_special": np.array([np.nan, np.inf, -np.inf, -0.0, 5e-324, 1.7976931348623157e308]),
        "f8_big_endian": f8_2d.astype(">f8"),
        "i4_big_endian": np.array([[1, -2, 3], [70000, -80000, 2**31 - 1]], dtype=">i4"),
    }
    return cases


def write_npy(path, a, version=None, fortran=False):
    if fortran:
        a = np.asfortranarray(a)
        assert a.flags.f_contiguous and not a.flags.c_contiguous
    with open(path, "wb") as f:
        np.lib.format.write_array(f, a, version=version)
    return np.load(path)  # what NumPy reads back is the expectation


def header_version(path):
    with open(path, "rb") as f:
        magic = f.read(8)
    assert magic[:6] == b"\x93NUMPY"
    return (magic[6], magic[7])


def zip64_report(path):
    """Which members carry a zip64 extra field (id 0x0001) in their local header."""
    report = {}
    raw = path.read_bytes()
    with zipfile.ZipFile(path) as z:
        for info in z.infolist():
            off = info.header_offset
            sig, = struct.unpack_from("<I", raw, off)
            assert sig == 0x04034B50
            name_len, extra_len = struct.unpack_from("<HH", raw, off + 26)
            extra = raw[off + 30 + name_len: off + 30 + name_len + extra_len]
            ids = []
            pos = 0
            while pos + 4 <= len(extra):
                hid, size = struct.unpack_from("<HH", extra, pos)
                ids.append(hid)
                pos += 4 + size
            report[info.filename] = {
                "zip64_local_extra": 0x0001 in ids,
                "compress_type": "deflated" if info.compress_type == zipfile.ZIP_DEFLATED else "stored",
                "file_size": info.file_size,
                "compress_size": info.compress_size,
            }
    return report


def main():
    OUT.mkdir(parents=True, exist_ok=True)
    expected = {"npy": {}, "npz": {}}

    for name, a in npy_cases().items():
        path = OUT / f"{name}.npy"
        back = write_npy(path, a)
        expected["npy"][path.name] = describe(back, header_version(path), False)

    # Fortran order: the same logical arrays, stored column-major.
    for name in ("f8_2d", "i4_3d", "f4_2d"):
        a = npy_cases()[name]
        path = OUT / f"{name}_fortran.npy"
        back = write_npy(path, a, fortran=True)
        entry = describe(back, header_version(path), True)
        entry["same_values_as"] = f"{name}.npy"
        expected["npy"][path.name] = entry

    # Header versions 2.0 (4-byte header length) and 3.0 (UTF-8 header).
    base = npy_cases()["f8_2d"]
    for version in ((2, 0), (3, 0)):
        path = OUT / f"f8_2d_v{version[0]}.npy"
        back = write_npy(path, base, version=version)
        assert header_version(path) == version
        expected["npy"][path.name] = describe(back, version, False)

    # Archives. Every member numpy.savez writes is opened with force_zip64=True.
    rng = np.random.default_rng(7)
    members = {
        "weights": rng.normal(size=(4, 3)),
        "labels": np.array([0, 2, 1, 1, 0], dtype="<i8"),
        "mask": np.array([True, False, True]),
        "large": np.arange(LARGE_COUNT, dtype="<f8") * 0.25 - 100.0,
        "grad/fc1.weight": np.array([[1.5, -2.0], [0.0, 3.25]]),
    }
    for name, writer in (("plain", np.savez), ("compressed", np.savez_compressed)):
        path = OUT / f"savez_{name}.npz"
        writer(path, **members)
        zips = zip64_report(path)
        assert all(m["zip64_local_extra"] for m in zips.values()), zips
        with np.load(path) as back:
            described = {k: describe(back[k], (1, 0), False) for k in back.files}
        # The large member is an arithmetic sequence: record its rule, not its 9000 values.
        large = described["large"]
        large["values"] = None
        large["arange"] = {"start": -100.0, "step": 0.25, "count": LARGE_COUNT}
        expected["npz"][path.name] = {"members": described, "zip": zips}
    big = expected["npz"]["savez_compressed.npz"]["zip"]["large.npy"]
    assert big["file_size"] > 65536 and big["compress_size"] < big["file_size"]

    # An archive whose member is not an NPY image (plain text named like one).
    with zipfile.ZipFile(OUT / "member_not_npy.npz", "w") as z:
        with z.open("notes.npy", "w", force_zip64=True) as f:
            f.write(b"this member holds text, not an array\n" * 4)
    expected["npz"]["member_not_npy.npz"] = {"members": {}, "zip": zip64_report(OUT / "member_not_npy.npz")}

    # A member whose NPY header declares 10^10 float64 elements over 1 KiB of payload: a
    # reader must refuse it from the header alone, before allocating 80 GB.
    header = "{'descr': '<f8', 'fortran_order': False, 'shape': (100000, 100000), }"
    header += " " * ((64 - (10 + len(header) + 1) % 64) % 64) + "\n"
    image = b"\x93NUMPY\x01\x00" + struct.pack("<H", len(header)) + header.encode("latin1")
    image += bytes(1024)
    with zipfile.ZipFile(OUT / "member_huge_header.npz", "w") as z:
        with z.open("huge.npy", "w", force_zip64=True) as f:
            f.write(image)
    expected["npz"]["member_huge_header.npz"] = {"members": {}, "zip": zip64_report(OUT / "member_huge_header.npz")}

    (OUT / "expected.json").write_text(json.dumps(expected, indent=1, sort_keys=True) + "\n")
    total = sum(p.stat().st_size for p in OUT.iterdir())
    print(f"wrote {len(list(OUT.iterdir()))} files, {total} bytes, to {OUT}")


if __name__ == "__main__":
    main()
