"""Independent framing checks with Python's `cobs` package and zlib/crcmod CRCs.

decode FILE: split a byte stream at 0x00, COBS-decode each frame with the
  `cobs` package, check the CRC-32/ISO-HDLC trailer with zlib.crc32 and with
  crcmod's catalogue 'crc-32'; print JSON {frames, crc_ok, bodies: [hex]}.
encode FILE_IN FILE_OUT: read hex payloads (one per line), append the
  little-endian zlib.crc32, COBS-encode with `cobs`, add 0x00, write the stream.
"""
import json
import sys
import zlib

import crcmod.predefined
from cobs import cobs

CRC32 = crcmod.predefined.mkCrcFun("crc-32")


def decode(path):
    data = open(path, "rb").read()
    bodies, ok = [], 0
    for raw in data.split(b"\x00"):
        if not raw:
            continue
        decoded = cobs.decode(raw)
        body, trailer = decoded[:-4], decoded[-4:]
        crc = int.from_bytes(trailer, "little")
        if crc == zlib.crc32(body) == CRC32(body):
            ok += 1
        bodies.append(body.hex())
    # The catalogue's check value, through both libraries.
    assert zlib.crc32(b"123456789") == 0xCBF43926 == CRC32(b"123456789")
    print(json.dumps({"frames": len(bodies), "crc_ok": ok, "bodies": bodies}))


def encode(path_in, path_out):
    out = bytearray()
    for line in open(path_in):
        line = line.strip()
        if not line:
            continue
        body = bytes.fromhex(line)
        out += cobs.encode(body + zlib.crc32(body).to_bytes(4, "little")) + b"\x00"
    open(path_out, "wb").write(bytes(out))


if __name__ == "__main__":
    if sys.argv[1] == "decode":
        decode(sys.argv[2])
    else:
        encode(sys.argv[2], sys.argv[3])
