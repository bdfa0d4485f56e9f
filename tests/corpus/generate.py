"""Writes the malformed-message corpus of tests/tests/malformed_input.rs: protobuf payloads that
no startmargin.v1 request decodes from, because each is broken at the wire level (a truncated
varint, a length past the end, tag 0, wire types 6 and 7, a truncated fixed-width field, and
valid requests cut short inside a field), plus random bytes kept only when they are broken the
same way. Its random generator has a fixed key, so running it again writes the same files.

Usage: python3 tests/corpus/generate.py
"""

import os
import random

HERE = os.path.dirname(os.path.abspath(__file__))
RNG_KEY = 20250114


def varint(n):
    out = bytearray()
    while True:
        b = n & 0x7F
        n >>= 7
        if n:
            out.append(b | 0x80)
        else:
            out.append(b)
            return bytes(out)


def field(tag, wire_type, payload=b""):
    key = varint((tag << 3) | wire_type)
    if wire_type == 2:
        return key + varint(len(payload)) + payload
    return key + payload


def broken_at_top_level(raw):
    """True when parsing `raw`'s top-level fields fails before any group (wire types 3 and 4,
    which a decoder may skip): then no message type decodes it."""
    i = 0
    while i < len(raw):
        key, i = read_varint(raw, i)
        if key is None:
            return True
        tag, wire_type = key >> 3, key & 7
        if tag == 0 or wire_type in (6, 7):
            return True
        if wire_type in (3, 4):
            return False
        if wire_type == 0:
            value, i = read_varint(raw, i)
            if value is None:
                return True
        elif wire_type == 1:
            i += 8
        elif wire_type == 5:
            i += 4
        elif wire_type == 2:
            length, i = read_varint(raw, i)
            if length is None:
                return True
            i += length
        if i > len(raw):
            return True
    return False


def read_varint(raw, i):
    value, shift = 0, 0
    while i < len(raw) and shift < 64:
        b = raw[i]
        i += 1
        value |= (b & 0x7F) << shift
        if not b & 0x80:
            return value, i
        shift += 7
    return None, i


def fleet_vehicle_item():
    """An AssessFleetRequest{item_id: "item-1", vehicle: VehicleNight{vehicle: VehicleProfile{
    vehicle_id: "truck-0001", engine: EngineSpec{archetype_id: "heavy-di-i6"}}, forecast_zone_id:
    "yard"}} encoded by hand."""
    engine = field(1, 2, b"heavy-di-i6")
    profile = field(1, 2, b"truck-0001") + field(2, 2, engine)
    night = field(1, 2, profile) + field(6, 2, b"yard")
    return field(3, 2, b"item-1") + field(2, 2, night)


def main():
    rng = random.Random(RNG_KEY)
    corpus = {
        "varint-unterminated": b"\x08" + b"\xff" * 10,
        "varint-too-long": b"\x08" + b"\xff" * 11 + b"\x01",
        "key-unterminated": b"\x80",
        "tag-zero": b"\x00\x01",
        "wire-type-6": b"\x0e\x01",
        "wire-type-7": b"\x0f\x01",
        "length-past-end": b"\x0a\x7f" + b"a" * 10,
        "length-huge": b"\x0a" + varint(2**62) + b"abc",
        "fixed64-truncated": b"\x09\x01\x02\x03",
        "fixed32-truncated": b"\x0d\x01",
    }
    item = fleet_vehicle_item()
    cut = 0
    for n in range(1, len(item)):
        if broken_at_top_level(item[:n]):
            corpus[f"truncated-{cut:02d}"] = item[:n]
            cut += 1
            if cut == 12:
                break
    kept = 0
    while kept < 24:
        raw = bytes(rng.randrange(256) for _ in range(rng.randrange(1, 160)))
        if broken_at_top_level(raw):
            corpus[f"random-{kept:02d}"] = raw
            kept += 1
    for name in os.listdir(HERE):
        if name.endswith(".bin"):
            os.remove(os.path.join(HERE, name))
    for name, raw in corpus.items():
        assert broken_at_top_level(raw), name
        with open(os.path.join(HERE, f"{name}.bin"), "wb") as f:
            f.write(raw)
    print(f"{len(corpus)} files in {HERE}")


if __name__ == "__main__":
    main()
