"""Hostile files built small on disk, for the tests: zip and gzip bombs."""

from __future__ import annotations

import gzip
import json
import sys
import zipfile
from pathlib import Path

_CHUNK = 1 << 20


def skops_bomb(good: Path, path: Path, inflated_mib: int) -> Path:
    """A copy of the skops file ``good`` whose ``schema.json`` inflates to about ``inflated_mib`` MiB.

    The schema stays valid JSON: its object gains a key holding a list of
    zeros, which takes far more memory parsed than its text does.
    """
    with zipfile.ZipFile(good) as source:
        members = {info.filename: source.read(info) for info in source.infolist()}
    schema = json.loads(members["schema.json"])
    head = json.dumps(schema)[:-1].encode() + b', "padding": [0'
    with zipfile.ZipFile(path, "w", compression=zipfile.ZIP_DEFLATED) as bomb:
        for name, content in members.items():
            if name != "schema.json":
                bomb.writestr(name, content)
        with bomb.open("schema.json", "w", force_zip64=True) as stream:
            stream.write(head)
            for _ in range(inflated_mib):
                stream.write(b",0" * (_CHUNK // 2))
            stream.write(b"]}")
    return path


def gzip_bomb(path: Path, inflated_mib: int) -> Path:
    """A ``.csv.gz`` data file that inflates to about ``inflated_mib`` MiB of one endless message."""
    with gzip.open(path, "wb", compresslevel=9) as stream:
        stream.write(b"id,text,label\n1,")
        for _ in range(inflated_mib):
            stream.write(b"a" * _CHUNK)
        stream.write(b",ok\n")
    return path


PEAK_WRAPPER = (
    "import resource, subprocess, sys\n"
    "done = subprocess.run(sys.argv[1:], capture_output=True, text=True)\n"
    "sys.stderr.write(done.stderr)\n"
    "print(done.returncode, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss * 1024)\n"
)


def run_measured(args, env, timeout=120):
    """Run ``nbledger ARGS`` in a fresh process: (exit code, stderr, peak RSS in bytes of it and its children)."""
    import subprocess

    done = subprocess.run(
        [sys.executable, "-c", PEAK_WRAPPER, sys.executable, "-m", "explain", *map(str, args)],
        capture_output=True, text=True, env=env, timeout=timeout,
    )
    code, peak = done.stdout.split()
    return int(code), done.stderr, int(peak)


def split_words(text: str) -> list[str]:
    """A custom analyzer: code inside a model file, which skops does not trust by default."""
    return text.split()


def many_part_zip(path: Path, parts: int) -> Path:
    """A valid zip of ``parts`` empty stored files (ZIP64 end records), written directly (APPNOTE.TXT 4.3)."""
    import struct

    local, central, offset = [], [], 0
    for i in range(parts):
        name = f"p{i:07d}".encode()
        head = struct.pack("<IHHHHHIIIHH", 0x04034B50, 20, 0, 0, 0, 0, 0, 0, 0, len(name), 0) + name
        local.append(head)
        central.append(struct.pack("<IHHHHHHIIIHHHHHII", 0x02014B50, 45, 20, 0, 0, 0, 0, 0, 0, 0,
                                   len(name), 0, 0, 0, 0, 0, offset) + name)
        offset += len(head)
    directory = b"".join(central)
    end64 = struct.pack("<IQHHIIQQQQ", 0x06064B50, 44, 45, 45, 0, 0, parts, parts, len(directory), offset)
    locator = struct.pack("<IIQI", 0x07064B50, 0, offset + len(directory), 1)
    end = struct.pack("<IHHHHIIH", 0x06054B50, 0, 0, 0xFFFF, 0xFFFF, 0xFFFFFFFF, 0xFFFFFFFF, 0)
    with open(path, "wb") as handle:
        handle.write(b"".join(local))
        handle.write(directory + end64 + locator + end)
    return path


def lying_zip(good: Path, path: Path, declared: int, inflated_mib: int) -> Path:
    """A copy of the skops file ``good`` whose ``schema.json`` declares ``declared`` bytes but inflates to more."""
    import struct

    with zipfile.ZipFile(good) as source:
        members = {info.filename: source.read(info) for info in source.infolist()}
    with zipfile.ZipFile(path, "w", compression=zipfile.ZIP_DEFLATED) as bomb:
        for name, content in members.items():
            if name != "schema.json":
                bomb.writestr(name, content)
        with bomb.open("schema.json", "w") as stream:
            for _ in range(inflated_mib):
                stream.write(b" " * _CHUNK)
    raw = bytearray(path.read_bytes())
    with zipfile.ZipFile(path) as archive:
        info = archive.getinfo("schema.json")
    real = struct.pack("<I", info.file_size)
    lie = struct.pack("<I", declared)
    at = raw.find(b"PK\x01\x02")  # the first central directory entry
    while at >= 0:  # patch the size in the central entry of schema.json, and in its local header
        name_len = struct.unpack("<H", raw[at + 28 : at + 30])[0]
        if raw[at + 46 : at + 46 + name_len] == b"schema.json":
            raw[at + 24 : at + 28] = lie
            (local,) = struct.unpack("<I", raw[at + 42 : at + 46])
            if raw[local + 22 : local + 26] == real:
                raw[local + 22 : local + 26] = lie
            break
        at = raw.find(b"PK\x01\x02", at + 4)
    path.write_bytes(bytes(raw))
    return path
