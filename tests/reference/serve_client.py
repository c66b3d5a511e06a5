"""An independent client for a virtual node served by `gleaner sim serve`.

Written from the wire format in the design notes, with none of the project's
code: pyserial opens the port, the `cobs` package frames, zlib.crc32 checks
(CRC-32/ISO-HDLC, little-endian trailer), and postcard's varints are read by
hand (LEB128; unsigned integers above one byte are varints, enums are a
varint variant index).

client PORT: read frames for a few seconds, send a Ping (request id 4242),
  and print JSON {frames, crc_ok, kinds: {index: count}, pong: bool}.
"""
import json
import sys
import time
import zlib

import serial
from cobs import cobs

UPLINK_REPLY = 4  # Hello, Report, Event, Samples, Reply, ...: wire order
OUTCOME_PONG = 0
COMMAND_PING = 0
REQUEST_ID = 4242


def varint(data, at):
    """Reads one LEB128 varint at `at`: (value, next offset)."""
    value, shift = 0, 0
    while True:
        byte = data[at]
        value |= (byte & 0x7F) << shift
        at += 1
        if byte < 0x80:
            return value, at
        shift += 7


def leb128(value):
    out = bytearray()
    while True:
        byte = value & 0x7F
        value >>= 7
        if value:
            out.append(byte | 0x80)
        else:
            out.append(byte)
            return bytes(out)


def frame(body):
    return cobs.encode(body + zlib.crc32(body).to_bytes(4, "little")) + b"\x00"


def client(path):
    port = serial.Serial(path, 115200, timeout=0.2)
    port.reset_input_buffer()
    buffer, frames, crc_ok, kinds, pong = b"", 0, 0, {}, False
    ping_at = time.monotonic() + 2.0
    sent = False
    deadline = time.monotonic() + 15.0
    while time.monotonic() < deadline and not pong:
        if not sent and time.monotonic() >= ping_at:
            # Downlink { request_id: u16 varint, command: Ping (variant 0) }
            port.write(frame(leb128(REQUEST_ID) + leb128(COMMAND_PING)))
            port.flush()
            sent = True
        buffer += port.read(4096)
        *complete, buffer = buffer.split(b"\x00")
        for raw in complete:
            if not raw:
                continue
            try:
                decoded = cobs.decode(raw)
            except cobs.DecodeError:
                continue
            body, trailer = decoded[:-4], decoded[-4:]
            if len(decoded) < 5 or int.from_bytes(trailer, "little") != zlib.crc32(body):
                continue
            crc_ok += 1
            frames += 1
            # Uplink { seq: u16 varint, uptime_ms: u64 varint, body: enum }
            _, at = varint(body, 0)
            _, at = varint(body, at)
            kind, at = varint(body, at)
            kinds[kind] = kinds.get(kind, 0) + 1
            if kind == UPLINK_REPLY:
                request_id, at = varint(body, at)
                outcome, at = varint(body, at)
                if request_id == REQUEST_ID and outcome == OUTCOME_PONG:
                    pong = True
    print(json.dumps({"frames": frames, "crc_ok": crc_ok, "kinds": kinds, "pong": pong}))


if __name__ == "__main__":
    client(sys.argv[1])
