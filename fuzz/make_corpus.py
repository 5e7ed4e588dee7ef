#!/usr/bin/python3
"""Seed corpora for the fuzz targets (fuzz/fuzz_*.cpp), one folder per target.

Tool: NumPy (numpy.save, numpy.lib.format.write_array with explicit versions, numpy.savez,
numpy.savez_compressed) and Python's zipfile and struct for archives and headers NumPy would
never write. Small valid files are copied from tests/fixtures/npy and tests/fixtures/inspect-run;
the rest are written here: a few valid ones and a few tricky ones each (declared sizes far
beyond the bytes present, truncations, lying zip directories, odd but legal JSON).

fuzz/corpus/
  fuzz_npy/       .npy images
  fuzz_npz/       .npz archives
  fuzz_manifest/  run.json texts
  fuzz_scalars/   scalars.jsonl texts

scripts/fuzz.sh copies these into the build directory before fuzzing; nothing writes here.
Run: /usr/bin/python3 fuzz/make_corpus.py
"""
import io
import json
import pathlib
import shutil
import struct
import zipfile
import zlib

import numpy as np

ROOT = pathlib.Path(__file__).resolve().parent.parent
OUT = ROOT / "fuzz" / "corpus"
FIXTURES = ROOT / "tests" / "fixtures"

TEN_GB_F8 = 10 * 2**30 // 8  # float64 elements in 10 GiB


def npy_bytes(a, version=(1, 0)):
    buf = io.BytesIO()
    np.lib.format.write_array(buf, a, version=version)
    return buf.getvalue()


def npy_raw(header, version=1, payload=b""):
    """An NPY image with a hand-written header dict (padded as NumPy pads, to 64 bytes)."""
    prefix = 10 if version == 1 else 12
    text = header.encode("latin1")
    text += b" " * ((64 - (prefix + len(text) + 1) % 64) % 64) + b"\n"
    size = struct.pack("<H", len(text)) if version == 1 else struct.pack("<I", len(text))
    return b"\x93NUMPY" + bytes([version, 0]) + size + text + payload


def npz_bytes(arrays, compressed=False):
    buf = io.BytesIO()
    (np.savez_compressed if compressed else np.savez)(buf, **arrays)
    return buf.getvalue()


def zip_of(members, method=zipfile.ZIP_STORED):
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", method) as z:
        for name, data in members.items():
            z.writestr(zipfile.ZipInfo(name, date_time=(2020, 1, 1, 0, 0, 0)), data, method)
    return buf.getvalue()


def lie_about_sizes(archive, comp_size, size):
    """Rewrite the sizes of the first member in both its local header and the central directory."""
    b = bytearray(archive)
    # Local file header: signature PK\3\4, sizes at offsets 18 (compressed) and 22 (uncompressed).
    struct.pack_into("<II", b, 18, comp_size, size)
    cd = b.rfind(b"PK\x01\x02")
    struct.pack_into("<II", b, cd + 20, comp_size, size)
    return bytes(b)


def zip64_deflated_lying(name, data, comp_size, size):
    """A one-member zip, written by hand, whose zip64 extra fields (local and central) claim
    comp_size and size for a deflate stream of `data` that is really a few hundred bytes."""
    co = zlib.compressobj(9, zlib.DEFLATED, -15)
    stream = co.compress(data) + co.flush()
    crc = zlib.crc32(data)
    name = name.encode()
    extra = struct.pack("<HHQQ", 0x0001, 16, size, comp_size)
    local = struct.pack("<IHHHHHIIIHH", 0x04034B50, 45, 0, 8, 0, 0x5021, crc,
                        0xFFFFFFFF, 0xFFFFFFFF, len(name), len(extra)) + name + extra
    central = struct.pack("<IHHHHHHIIIHHHHHII", 0x02014B50, 45, 45, 0, 8, 0, 0x5021, crc,
                          0xFFFFFFFF, 0xFFFFFFFF, len(name), len(extra), 0, 0, 0, 0, 0) + name + extra
    body = local + stream
    eocd = struct.pack("<IHHHHIIH", 0x06054B50, 0, 0, 1, 1, len(central), len(body), 0)
    return body + central + eocd


def deflate_claims_1000x():
    """200 KiB of random float64 bytes, deflated honestly (random bytes do not compress, so the
    stream is about 200 KiB), inside zip64 fields and an NPY header that both claim 1000 times
    that. The claim sits inside the 1:1100 ratio the reader allows, so only reading the stream
    can show the lie; a reader that sizes its buffer from the claim asks for about 200 MB."""
    payload = np.random.default_rng(8).bytes(200 * 1024)
    header_len = len(npy_raw("{'descr': '<f8', 'fortran_order': False, 'shape': (1,), }"))
    co = zlib.compressobj(9, zlib.DEFLATED, -15)
    comp = len(co.compress(npy_raw("{'descr': '<f8', 'fortran_order': False, 'shape': (1,), }") + payload) + co.flush())
    claim = 1000 * comp
    elements = (claim - header_len) // 8
    data = npy_raw(f"{{'descr': '<f8', 'fortran_order': False, 'shape': ({elements},), }}") + payload
    assert len(npy_raw(f"{{'descr': '<f8', 'fortran_order': False, 'shape': ({elements},), }}")) == header_len
    co = zlib.compressobj(9, zlib.DEFLATED, -15)
    real = len(co.compress(data) + co.flush())
    return zip64_deflated_lying("x.npy", data, comp_size=real, size=header_len + 8 * elements)


def write(target, name, data):
    path = OUT / target / name
    path.write_bytes(data if isinstance(data, bytes) else data.encode("utf-8"))


def npy_corpus():
    for name in ["f8_2d.npy", "f4_2d_fortran.npy", "f8_big_endian.npy", "i4_3d_fortran.npy",
                 "f8_0d.npy", "f8_empty.npy", "u1_2d.npy", "b1_1d.npy", "f8_2d_v2.npy", "f8_2d_v3.npy"]:
        shutil.copy(FIXTURES / "npy" / name, OUT / "fuzz_npy" / name)
    write("fuzz_npy", "i8_fortran_4d.npy",
          npy_bytes(np.asfortranarray(np.arange(24, dtype="<i8").reshape(2, 1, 3, 4))))
    write("fuzz_npy", "f8_zero_middle.npy", npy_bytes(np.zeros((3, 0, 2))))
    # Tricky: 10 GiB declared in well under 1 kB; huge extents after a zero; truncations.
    write("fuzz_npy", "declares_10gb.npy",
          npy_raw(f"{{'descr': '<f8', 'fortran_order': False, 'shape': ({TEN_GB_F8},), }}", payload=b"\0" * 16))
    write("fuzz_npy", "zero_then_huge.npy",
          npy_raw("{'descr': '<f8', 'fortran_order': True, 'shape': (0, 9223372036854775807, 3), }"))
    write("fuzz_npy", "py2_long_shape.npy",
          npy_raw("{'descr': '|u1', 'fortran_order': False, 'shape': (2L, 3L), }", payload=bytes(range(6))))
    write("fuzz_npy", "v2_header_len_huge.npy", b"\x93NUMPY\x02\x00\xff\xff\xff\xff{'descr': '<f8'")
    write("fuzz_npy", "truncated_header.npy", npy_bytes(np.arange(4.0))[:40])
    write("fuzz_npy", "unsupported_dtype.npy", npy_bytes(np.arange(3, dtype="<c16")))


def npz_corpus():
    shutil.copy(FIXTURES / "inspect-run" / "data.npz", OUT / "fuzz_npz" / "inspect_data.npz")
    shutil.copy(FIXTURES / "inspect-run" / "snapshots" / "step-0.npz", OUT / "fuzz_npz" / "inspect_step0.npz")
    for name in ["member_not_npy.npz", "member_huge_header.npz"]:
        shutil.copy(FIXTURES / "npy" / name, OUT / "fuzz_npz" / name)
    shutil.copy(FIXTURES / "bad" / "data_truncated_compressed.npz", OUT / "fuzz_npz" / "truncated_compressed.npz")
    small = {"x": np.arange(6.0).reshape(2, 3), "y": np.array([1, 0], dtype="<i8"),
             "w": np.asfortranarray(np.arange(6, dtype=">f4").reshape(3, 2))}
    write("fuzz_npz", "savez_small.npz", npz_bytes(small))
    write("fuzz_npz", "savez_compressed_small.npz", npz_bytes(small, compressed=True))
    # Tricky: a member declaring 10 GiB in a file of a few hundred bytes, stored and deflated.
    ten_gb = npy_raw(f"{{'descr': '<f8', 'fortran_order': False, 'shape': ({TEN_GB_F8},), }}", payload=b"\0" * 64)
    write("fuzz_npz", "member_declares_10gb.npz", zip_of({"x.npy": ten_gb}))
    write("fuzz_npz", "member_declares_10gb_deflated.npz", zip_of({"x.npy": ten_gb}, zipfile.ZIP_DEFLATED))
    # Tricky: a zip directory claiming a ~4 GiB member (compressed and uncompressed) in a small file.
    write("fuzz_npz", "directory_lies_4gb.npz", lie_about_sizes(zip_of({"x.npy": ten_gb}), 0xFFFFFFF0, 0xFFFFFFF0))
    write("fuzz_npz", "directory_lies_ratio.npz",
          lie_about_sizes(zip_of({"x.npy": ten_gb}, zipfile.ZIP_DEFLATED), 60, 0xFFFFFFF0))
    # Tricky: 10 GiB claimed by zip64 fields around a deflate stream of 128 KiB of zeros (a few
    # hundred bytes) whose NPY header also declares 10 GiB; the ratio 1:1024 looks plausible.
    lying = npy_raw(f"{{'descr': '<f8', 'fortran_order': False, 'shape': ({TEN_GB_F8},), }}",
                    payload=b"\0" * 131072)
    write("fuzz_npz", "zip64_claims_10gb.npz",
          zip64_deflated_lying("x.npy", lying, comp_size=10 * 2**30 // 1024, size=10 * 2**30 + 128))
    write("fuzz_npz", "empty_archive.npz", zip_of({}))
    write("fuzz_npz", "duplicate_stems.npz", zip_of({"x.npy": npy_bytes(np.arange(2.0)), "x": npy_bytes(np.arange(3.0))}))


MANIFEST = json.loads((FIXTURES / "inspect-run" / "run.json").read_text())


def manifest_corpus():
    shutil.copy(FIXTURES / "inspect-run" / "run.json", OUT / "fuzz_manifest" / "inspect_run.json")
    full = dict(MANIFEST, parameterization="standard", loss="cross-entropy", weight_layout="in_out",
                notes="caf\u00e9 \u2603 \"quoted\"")
    full["layers"] = [dict(MANIFEST["layers"][0], multiplier=0.5, trainable=False),
                      {"weight": "head.weight", "bias": None, "activation": "relu", "multiplier": 1e308}]
    write("fuzz_manifest", "all_fields.json", json.dumps(full, ensure_ascii=True))
    minimal = {"format": "plaudit-run/1", "parameterization": "mean-field", "loss": "logistic",
               "layers": [{"weight": "w", "activation": "identity"}]}
    write("fuzz_manifest", "minimal.json", json.dumps(minimal, separators=(",", ":")))
    # Tricky: duplicate names, wrong types, deep nesting, non-finite literal, not an object.
    dup = dict(minimal, layers=[{"weight": "w", "bias": "w", "activation": "tanh"}])
    write("fuzz_manifest", "duplicate_name.json", json.dumps(dup))
    write("fuzz_manifest", "wrong_types.json", json.dumps(dict(minimal, layers=[{"weight": 3, "activation": []}])))
    write("fuzz_manifest", "deep_notes.json", json.dumps(minimal)[:-1] + ', "notes": ' + "[" * 2000 + "]" * 2000 + "}")
    write("fuzz_manifest", "multiplier_nan.json", json.dumps(minimal).replace('"identity"}', '"identity", "multiplier": NaN}'))
    write("fuzz_manifest", "array_top.json", "[1, 2, 3]")


def scalars_corpus():
    shutil.copy(FIXTURES / "inspect-run" / "scalars.jsonl", OUT / "fuzz_scalars" / "inspect.jsonl")
    write("fuzz_scalars", "extras.jsonl",
          '{"step": 0, "loss": 1.5, "lr": 0.1, "grad_norm": 3e-4}\n{"step": 10, "loss": 1.25, "tag": "x"}\n')
    write("fuzz_scalars", "non_finite.jsonl",
          '{"step": 0, "loss": NaN}\n{"step": 1, "loss": Infinity}\n{"step": 2, "loss": -Infinity, "g": NaN}\n'
          '{"step": 3, "loss": null}\n{"step": 4, "loss": "nan"}\n')
    write("fuzz_scalars", "crlf_blank_partial.jsonl", '{"step": 0, "loss": 2}\r\n\r\n   \n{"step": 5, "loss": 1')
    # Tricky: the NaN words inside strings and after escaped quotes, huge and negative steps.
    write("fuzz_scalars", "words_in_strings.jsonl",
          '{"step": 0, "loss": 1, "note": "NaN \\" Infinity"}\n{"step": 1, "loss": 2, "k\\\\": "-Infinity"}\n')
    write("fuzz_scalars", "big_steps.jsonl",
          '{"step": 18446744073709551615, "loss": 1}\n{"step": -1, "loss": 1}\n{"step": 1e3, "loss": 1}\n')
    write("fuzz_scalars", "not_objects.jsonl", '[1]\n"x"\n{"step": 0}\n')


def main():
    for target in ["fuzz_npy", "fuzz_npz", "fuzz_manifest", "fuzz_scalars"]:
        shutil.rmtree(OUT / target, ignore_errors=True)
        (OUT / target).mkdir(parents=True)
    npy_corpus()
    npz_corpus()
    manifest_corpus()
    scalars_corpus()
    # Too large for a seed (it would slow every fuzz run); a regression fixture only.
    (FIXTURES / "fuzz" / "npz_deflate_claims_1000x.npz").write_bytes(deflate_claims_1000x())
    shutil.copy(OUT / "fuzz_npz" / "duplicate_stems.npz", FIXTURES / "fuzz" / "npz_duplicate_stems.npz")
    # A stored (uncompressed) member whose directory claims 64 bytes more than it occupies.
    member = npy_bytes(np.arange(4.0))
    (FIXTURES / "fuzz" / "npz_stored_size_lies.npz").write_bytes(
        lie_about_sizes(zip_of({"x.npy": member}), len(member), len(member) + 64))
    for target in sorted(p.name for p in OUT.iterdir()):
        files = list((OUT / target).iterdir())
        print(f"{target}: {len(files)} files, {sum(f.stat().st_size for f in files)} bytes")


if __name__ == "__main__":
    main()
