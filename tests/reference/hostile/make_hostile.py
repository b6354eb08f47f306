"""Writes the committed hostile-input corpus under tests/hostile/ (invented, broken on purpose).

Every run file here is the h5py fixture tests/reference/h5py/run_f32_gzip.h5 (an invented
4-site chain, see its own script) cut short or with bytes overwritten; the noise records are
the valid record tests/reference/noise/valid/chain-detuning.json with one hostile change each.
What each file must make quassay say is in tests/hostile.rs, beside its name.

Made with (from the repository root):

    python3 tests/reference/hostile/make_hostile.py

with h5py 3.16.0 (bundled HDF5 2.0.0), used only to find where a chunk lies in the file
(`DatasetID.get_chunk_info`, so no offset is guessed). Byte positions in the superblock are
those of superblock version 0 in the HDF5 File Format Specification (version 3.0), section
II.A: signature 0-7, superblock version at 8, size of offsets at 13, end-of-file address at
40-47, root group object header address at 64-71.
"""

import json
import pathlib

import h5py

HERE = pathlib.Path(__file__).resolve().parent
REPO = HERE.parent.parent.parent
OUT = REPO / "tests" / "hostile"
FIXTURE = REPO / "tests" / "reference" / "h5py" / "run_f32_gzip.h5"
RECORD = REPO / "tests" / "reference" / "noise" / "valid" / "chain-detuning.json"


def patched(data, at, new):
    b = bytearray(data)
    b[at : at + len(new)] = new
    return bytes(b)


def runs():
    data = FIXTURE.read_bytes()
    assert data[:8] == b"\x89HDF\r\n\x1a\n" and data[8] == 0, "superblock version 0 expected"
    # Cut points: inside the signature, inside the superblock, inside the object headers, in
    # the middle, one byte short.
    for cut in [4, 60, 3000, len(data) // 2, len(data) - 1]:
        (OUT / f"run-truncated-{cut}.h5").write_bytes(data[:cut])
    (OUT / "run-superblock-version.h5").write_bytes(patched(data, 8, b"\xff"))
    (OUT / "run-superblock-offset-size.h5").write_bytes(patched(data, 13, b"\x03"))
    eof = int.from_bytes(data[40:48], "little")
    assert eof == len(data)
    (OUT / "run-superblock-eof.h5").write_bytes(
        patched(data, 40, (eof // 8).to_bytes(8, "little"))
    )
    root = int.from_bytes(data[64:72], "little")
    (OUT / "run-superblock-root.h5").write_bytes(
        patched(data, 64, (root + 1).to_bytes(8, "little"))
    )
    # Bytes inside the first gzip-compressed chunk of /observables/Z_1/values.
    with h5py.File(FIXTURE, "r") as f:
        info = f["observables/Z_1/values"].id.get_chunk_info(0)
    mid = info.byte_offset + info.size // 2
    (OUT / "run-chunk-corrupt.h5").write_bytes(patched(data, mid, b"\x00\xff\x00\xff"))
    (OUT / "run-empty.h5").write_bytes(b"")
    (OUT / "run-is-json.h5").write_bytes(RECORD.read_bytes())


def records():
    text = RECORD.read_text(encoding="utf-8")
    record = json.loads(text)
    assert '"amplitude": 0.02' in text and '"mean_offset": 0.0' in text, "edit points moved"

    def with_text(name, new_text):
        (OUT / name).write_text(new_text, encoding="utf-8")

    with_text("noise-amplitude-1e400.json", text.replace('"amplitude": 0.02', '"amplitude": 1e400'))
    with_text(
        "noise-offset-minus-1e400.json",
        text.replace('"mean_offset": 0.0', '"mean_offset": -1e400'),
    )
    # 1e308 * 10 written out in digits: 1 followed by 309 zeros.
    with_text(
        "noise-amplitude-309-digits.json",
        text.replace('"amplitude": 0.02', '"amplitude": 1' + "0" * 309),
    )
    with_text("noise-amplitude-nan.json", text.replace('"amplitude": 0.02', '"amplitude": NaN'))
    with_text(
        "noise-amplitude-infinity.json",
        text.replace('"amplitude": 0.02', '"amplitude": Infinity'),
    )
    with_text(
        "noise-duplicate-amplitude.json",
        text.replace('"amplitude": 0.02', '"amplitude": 0.02,\n      "amplitude": 0.0'),
    )
    # Latin-1 bytes in a name (not UTF-8), and a UTF-16 byte-order mark.
    bad = text.encode("utf-8").replace(b'"calibration"', b'"calibr\xe9tion"')
    (OUT / "noise-latin1-bytes.json").write_bytes(bad)
    (OUT / "noise-utf16-bom.json").write_bytes(b"\xff\xfe" + text.encode("utf-16-le"))
    # A UTF-8 byte-order mark is allowed (RFC 8259 section 8.1); two are not.
    (OUT / "noise-utf8-bom.json").write_bytes(b"\xef\xbb\xbf" + text.encode("utf-8"))
    (OUT / "noise-two-utf8-boms.json").write_bytes(b"\xef\xbb\xbf" * 2 + text.encode("utf-8"))
    (OUT / "noise-empty.json").write_bytes(b"")
    assert record["format"] == "quassay-noise"


def certificates():
    # Valid JSON, but not a certificate quassay reads: a misspelt format and a future version.
    base = {
        "body": {},
        "digest": "0" * 64,
        "digest_method": "SHA-256 of the RFC 8785 (JSON Canonicalization Scheme) form of body",
        "envelope": {},
        "format": "quassay-certificate",
        "format_version": 1,
    }
    for name, change in [
        ("cert-wrong-format.json", {"format": "quassay-certficate"}),
        ("cert-version-2.json", {"format_version": 2}),
    ]:
        doc = dict(base, **change)
        (OUT / name).write_text(json.dumps(doc, indent=2, sort_keys=True) + "\n")


if __name__ == "__main__":
    OUT.mkdir(parents=True, exist_ok=True)
    runs()
    records()
    certificates()
