"""The separate loading process: a fork of the caller, or ``python -m explain.model.load_child REQUEST``.

It runs under an address-space limit (``RLIMIT_AS``, set before the file is
opened) and a CPU-time limit, opens the model file with
:func:`explain.model.model_files.read_object` (skops allow-list, pickle only when
allowed), checks the pipeline, and writes its plain form
(:mod:`explain.model.plain_form`) into the folder it was given, with
``result.json`` saying how it went. It never sends a Python object back: a
hostile file can at worst crash this process.
"""

from __future__ import annotations

import json
import resource
import sys
from pathlib import Path


def _peak_bytes() -> int:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024  # Linux reports KiB


def _load(request: dict, out: Path) -> dict:
    from explain.model.model_files import read_object, split_pipeline
    from explain.model.model_view import view_of
    from explain.model import plain_form

    trust = tuple(request["trust"])
    declared: set = set()
    options = dict(allow_pickle=request["allow_pickle"], trust=trust, declared=declared)
    obj, _ = read_object(Path(request["model"]), **options)
    vec_obj = None
    if request["vectorizer"] is not None:
        vec_obj, _ = read_object(Path(request["vectorizer"]), **options)
    featurizer, classifier = split_pipeline(obj, vec_obj)  # refuses a text step that reads files, trusted or not
    accepted = trusted_by_name(trust, declared, Path(request["model"]).name)
    reason = plain_form.code_in(featurizer.vectorizer)
    if reason is not None:
        return {"needs_code": reason, "accepted": accepted}
    view = view_of(classifier, featurizer.tokens, featurizer.feature_kind)
    arrays, settings = plain_form.to_plain(featurizer, view, classifier)
    plain_form.save(out, arrays, settings)
    return {"ok": True, "accepted": accepted}


def trusted_by_name(trust: tuple, declared: set, name: str) -> list:
    """The ``--trust`` names accepted: each must be exactly a type the file declares untrusted."""
    from explain.errors import NbledgerError

    unknown = sorted(set(trust) - declared)
    if unknown:
        listed = ", ".join(sorted(declared)) or "none"
        raise NbledgerError(
            f"--trust {', '.join(unknown)}: {name} declares no such untrusted type (it declares: {listed}); "
            "--trust takes exact type names from that list"
        )
    return sorted(set(trust))


def address_space_bytes() -> int:
    """This process's current virtual memory size (``VmSize``), 0 where it cannot be read."""
    try:
        with open("/proc/self/status", encoding="ascii") as status:
            for line in status:
                if line.startswith("VmSize:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    return 0


def serve(request: dict) -> None:
    """Load as ``request`` says, under its limits, and write ``result.json`` (never raises).

    The process may use ``request["memory"]`` bytes of address space in all
    (a fork counts what it shares with its parent, as a new interpreter counts
    its imports); its CPU time limit counts from its own start.
    """
    memory = int(request["memory"])
    resource.setrlimit(resource.RLIMIT_AS, (memory, memory))
    cpu = int(request["cpu_seconds"])
    resource.setrlimit(resource.RLIMIT_CPU, (cpu, cpu + 1))
    out = Path(request["out"])
    from explain.errors import NbledgerError

    try:
        result = _load(request, out)
    except NbledgerError as exc:
        result = {"error": str(exc)}
    except MemoryError:
        result = {"memory": True}
    except RecursionError:
        result = {"error": f"{Path(request['model']).name} is nested too deeply to load"}
    except Exception as exc:  # a damaged or hostile file can raise anything
        first = str(exc).strip().splitlines()
        result = {"error": f"could not load {Path(request['model']).name}: {type(exc).__name__}"
                  + (f": {first[0]}" if first else "")}
    result["peak_bytes"] = _peak_bytes()
    (out / "result.json").write_text(json.dumps(result, allow_nan=False), encoding="utf-8")


def main(argv: list[str]) -> int:
    serve(json.loads(argv[0]))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
