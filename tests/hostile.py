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
