#!/usr/bin/env python3
"""Recomputes the golden feature indices in src/extract.rs (golden_indices_never_change).

An implementation of SipHash-2-4 independent of the Rust crates, written from
Aumasson & Bernstein, "SipHash: a fast short-input PRF" (2012), section 2, and
checked against the paper's Appendix A vector before use. It hashes the byte
strings that the hashing spec in src/hashing.rs and the tag table in
src/extract.rs define, under key 00 01 .. 0f, and keeps the low 22 bits.

Run: python3 make_golden.py   (standard library only)
"""

MASK64 = (1 << 64) - 1


def rotl(x, b):
    return ((x << b) | (x >> (64 - b))) & MASK64


def siphash24(key: bytes, msg: bytes) -> int:
    k0 = int.from_bytes(key[:8], "little")
    k1 = int.from_bytes(key[8:], "little")
    v = [
        k0 ^ 0x736F6D6570736575,
        k1 ^ 0x646F72616E646F6D,
        k0 ^ 0x6C7967656E657261,
        k1 ^ 0x7465646279746573,
    ]

    def sipround():
        v[0] = (v[0] + v[1]) & MASK64
        v[1] = rotl(v[1], 13) ^ v[0]
        v[0] = rotl(v[0], 32)
        v[2] = (v[2] + v[3]) & MASK64
        v[3] = rotl(v[3], 16) ^ v[2]
        v[0] = (v[0] + v[3]) & MASK64
        v[3] = rotl(v[3], 21) ^ v[0]
        v[2] = (v[2] + v[1]) & MASK64
        v[1] = rotl(v[1], 17) ^ v[2]
        v[2] = rotl(v[2], 32)

    full = len(msg) - len(msg) % 8
    blocks = [int.from_bytes(msg[i : i + 8], "little") for i in range(0, full, 8)]
    last = int.from_bytes(msg[full:], "little") | ((len(msg) & 0xFF) << 56)
    for m in blocks + [last]:
        v[3] ^= m
        sipround()
        sipround()
        v[0] ^= m
    v[2] ^= 0xFF
    for _ in range(4):
        sipround()
    return v[0] ^ v[1] ^ v[2] ^ v[3]


KEY = bytes(range(16))
# Appendix A of the paper: 15-byte message 00..0e.
assert siphash24(KEY, bytes(range(15))) == 0xA129CA6149BE45E5

SEP = b"\x1f"
BITS = 22


def padded_tag(tag: str) -> bytes:
    data = tag.encode() + SEP
    while len(data) % 8:
        data += SEP
    return data


def index(tag: str, *parts: bytes) -> int:
    data = padded_tag(tag) + SEP.join(parts)
    return siphash24(KEY, data) & ((1 << BITS) - 1)


GOLDEN = [
    ("GOLDEN_BIAS", index("bias")),
    ("GOLDEN_SUBJECT_OFFER", index("subject.word", b"offer")),
    ("GOLDEN_BODY_PAIR", index("body.pair", b"free", b"entry")),
    ("GOLDEN_BODY_NGRAM", index("body.ngram", b"^fre")),
    ("GOLDEN_BODY_POUND", index("body.symbol", "\u00a3".encode())),
    ("GOLDEN_SENDER_DOMAIN", index("sender.domain", b"b.example")),
    ("GOLDEN_META_REPLY", index("meta", b"is_reply", b"bool", b"false")),
    # The respelling kinds, added later under the same format version.
    ("GOLDEN_SUBJECT_SKELETON_OFFER", index("subject.skeleton", b"offer")),
    ("GOLDEN_BODY_SKELETON_PAY", index("body.skeleton", b"pay")),
    ("GOLDEN_BODY_JOINED_WIN", index("body.joined", b"win")),
    ("GOLDEN_BODY_DIGITMAP_FREE", index("body.digitmap", b"free")),
    ("GOLDEN_BODY_MIXED_ONE", index("body.mixed", b"1")),
]

for name, value in GOLDEN:
    print(f"    const {name}: u32 = {value};")
