"""Loading a trained filter from untrusted files.

A model file is hostile until proven otherwise:

- pickle and joblib files can run code while they load. They are refused
  *before* they are opened unless ``allow_pickle`` is set; the format is
  recognised from the first bytes, so nothing is unpickled to find out.
- skops files (the default, and what ``nbledger train`` writes) are zip
  archives: the sizes their members declare once inflated are checked against
  the memory limit before anything is inflated (Python's ``zipfile`` never
  inflates a member past its declared size).
- The file is then opened in a separate process (:mod:`explain.model.load_child`,
  a fork of this one where that is safe, else a new interpreter)
  under a memory limit and a time limit (:class:`LoadLimits`), with skops'
  allow-list: types it does not trust are refused, named, and may be accepted
  one by one (``trust``). That process hands back only plain data
  (:mod:`explain.model.plain_form`); this process rebuilds the scikit-learn
  text step from it and checks that it reproduces the original's features.
- The plain form is cached by the file's SHA-256 (:mod:`explain.model.model_cache`),
  so the next load of the same file is fast.
- A text step that runs code of its own (a custom analyzer, preprocessor or
  tokenizer) cannot travel as data: it is loaded in this process, and only
  when the user trusted its types by name (``trust``) or allowed pickles.

The loaded object must be a scikit-learn ``Pipeline`` whose last step is a
naive Bayes classifier and whose earlier steps make text features, or a
classifier file plus a separate vectorizer file.
"""

from __future__ import annotations

import functools
import hashlib
import json
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
import zipfile
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING, Callable

from explain.errors import NbledgerError
from explain.model.forking import can_fork, flush_standard_streams
from explain.model.input_files import input_file
from explain.model.model_view import ModelView, view_of

if TYPE_CHECKING:
    from explain.model.featurizer import Featurizer

CARD_SUFFIX = ".card.json"
_CARD_LIMIT = 1 << 20
# Byte patterns that start a pickle (protocol 2+) or a compressed joblib file.
_PICKLE_STARTS = (b"\x80", b"\x1f\x8b", b"BZh", b"\xfd7zXZ", b"\x28\xb5\x2f\xfd")
_PICKLE_SUFFIXES = (".pkl", ".pickle", ".joblib", ".jbl", ".sav")
_MAX_MEMBERS = 100_000

#: Defaults of ``--max-model-memory`` and ``--load-timeout`` (stated in the README).
DEFAULT_MAX_MODEL_MEMORY = 8 << 30
DEFAULT_LOAD_TIMEOUT = 300.0


@dataclass(frozen=True)
class LoadLimits:
    """Bounds on opening one model file.

    Attributes
    ----------
    memory : int, bytes of address space the loading process may use; also the
        most a skops archive may declare once inflated.
    timeout : float, seconds the loading process may take (wall clock).
    cache : bool, use and fill the cache of plain forms.
    """

    memory: int = DEFAULT_MAX_MODEL_MEMORY
    timeout: float = DEFAULT_LOAD_TIMEOUT
    cache: bool = True


@dataclass(frozen=True, eq=False)
class LoadedModel:
    """A filter ready to explain: its normalised view and its text steps."""

    view: ModelView
    featurizer: Featurizer
    path: Path
    sha256: str
    file_format: str
    card: dict | None = None
    classifier_settings: dict | None = None
    from_cache: bool = False

    @property
    def classes(self):
        return self.view.classes

    @functools.cached_property
    def fingerprint(self) -> str | None:
        """SHA-256 of what decides (:mod:`explain.model.fingerprint`); None for a text step of custom code."""
        from explain.model.fingerprint import fingerprint

        return fingerprint(self.view, self.featurizer, self.card)

    def named_for(self, texts) -> "LoadedModel":
        """Hashed features: the model with columns named by the tokens of ``texts`` (list of str).

        A column's name is every distinct token of ``texts`` hashed into it,
        joined by `` / ``; other columns keep their numbers. Unchanged for a
        model with a vocabulary.
        """
        if not self.featurizer.hashed:
            return self
        return replace(self, view=self.view.with_names(self.featurizer.hashed_names(texts)))

    def unfitted_copy(self):
        """A new, unfitted pipeline with the same steps and settings (:func:`sklearn.base.clone`).

        The classifier is made afresh from its plain settings
        (:func:`explain.model.plain_form.classifier_settings`): no object of the
        model file reaches this process.
        """
        from sklearn.base import clone
        from sklearn.pipeline import make_pipeline

        from explain.model.plain_form import classifier_from_settings

        vectorizer, tfidf = self.featurizer.vectorizer, self.featurizer.tfidf
        classifier = classifier_from_settings(self.classifier_settings)
        steps = [clone(vectorizer)] + ([] if tfidf is None or tfidf is vectorizer else [clone(tfidf)])
        return make_pipeline(*steps, classifier)


def sha256_of(path: Path) -> str:
    with open(path, "rb") as handle:
        return hashlib.file_digest(handle, "sha256").hexdigest()


def card_path_for(model_path: Path) -> Path:
    """Where the model card of ``m.v1.skops`` lives: ``m.v1.card.json`` (the whole name, less its last suffix)."""
    model_path = Path(model_path)
    return model_path.with_name(model_path.stem + CARD_SUFFIX)


def sniff_format(path: Path) -> str:
    """``"skops"``, ``"pickle"`` or ``"unknown"``, from the file's first bytes."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(8)
    except OSError as exc:
        raise NbledgerError(f"cannot read the model file {path}: {exc.strerror or exc}") from None
    if head.startswith(b"PK\x03\x04"):
        return "skops"
    if head.startswith(_PICKLE_STARTS) or Path(path).suffix.lower() in _PICKLE_SUFFIXES:
        return "pickle"
    return "unknown"


def read_object(
    path: Path,
    *,
    allow_pickle: bool = False,
    trust: tuple[str, ...] = (),
    on_warning: Callable[[str], None] | None = None,
):
    """Load one Python object from a skops file, or a pickle when allowed."""
    path = input_file(path, "model file")
    kind = checked_format(path, allow_pickle, on_warning)
    if kind == "skops":
        return _read_skops(path, tuple(trust)), kind
    if kind == "pickle":
        import joblib

        try:
            return joblib.load(path), kind
        except Exception as exc:  # a broken or truncated pickle can raise anything
            raise NbledgerError(f"could not read {path.name} as a pickle: {_first_line(exc)}") from None


def checked_format(path: Path, allow_pickle: bool, on_warning=None) -> str:
    """``"skops"`` or (when allowed, with a warning) ``"pickle"``; refuses anything else unopened."""
    kind = sniff_format(path)
    if kind == "pickle":
        if not allow_pickle:
            raise NbledgerError(
                f"{path.name} is a pickle/joblib file, and loading one runs code from the file; "
                "it was not opened. Use a skops file, or pass --allow-pickle if you trust its source"
            )
        if on_warning is not None:
            on_warning(f"loading {path.name} as a pickle runs any code it contains; only do this for files you trust")
    elif kind != "skops":
        raise NbledgerError(
            f"{path.name} is not a model file this tool reads; supported: skops files "
            "(written by 'nbledger train'), or pickle/joblib files with --allow-pickle"
        )
    return kind


def check_archive(path: Path, limit: int) -> None:
    """Refuse a skops archive whose members declare more than ``limit`` bytes once inflated."""
    try:
        with zipfile.ZipFile(path) as archive:
            members = archive.infolist()
    except (zipfile.BadZipFile, OSError, ValueError, EOFError) as exc:
        raise NbledgerError(f"{path.name} is not a readable skops file: {_first_line(exc)}") from None
    declared = sum(m.file_size for m in members)
    if len(members) > _MAX_MEMBERS or declared > limit:
        raise NbledgerError(
            f"{path.name} would inflate to {declared:,} bytes in {len(members):,} parts, more than the "
            f"loading limit of {limit:,} bytes (--max-model-memory); it was not opened"
        )


def _read_skops(path: Path, trust: tuple[str, ...]):
    import skops.io as sio

    try:
        untrusted = sio.get_untrusted_types(file=path)
    except (zipfile.BadZipFile, KeyError, ValueError, json.JSONDecodeError, EOFError, OSError) as exc:
        raise NbledgerError(f"{path.name} is not a readable skops file: {_first_line(exc)}") from None
    refused = sorted(set(untrusted) - set(trust))
    if refused:
        raise NbledgerError(
            f"{path.name} contains types that are not trusted: {', '.join(refused)}; "
            "if you trust them, pass each with --trust TYPE"
        )
    try:
        return sio.load(path, trusted=list(untrusted))
    except Exception as exc:  # skops raises many kinds on damaged archives
        raise NbledgerError(f"could not load {path.name}: {_first_line(exc)}") from None


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return f"{type(exc).__name__}: {text[0]}" if text else type(exc).__name__


def read_card(model_path: Path, sha256: str, on_warning=None) -> dict | None:
    """The model card beside ``model_path``, if there is one and it matches."""
    path = card_path_for(model_path)
    if not os.path.lexists(path):
        return None
    try:
        input_file(path, "model card")
        if path.stat().st_size > _CARD_LIMIT:
            raise ValueError("larger than 1 MiB")
        card = json.loads(path.read_text(encoding="utf-8"), parse_constant=_refuse_constant)
        if not isinstance(card, dict):
            raise ValueError("not a JSON object")
    except OSError as exc:
        raise NbledgerError(f"the model card {path} cannot be read: {exc.strerror}") from None
    except (ValueError, UnicodeDecodeError) as exc:
        raise NbledgerError(f"the model card {path.name} is not valid: {_first_line(exc)}") from None
    recorded = (card.get("model") or {}).get("sha256")
    if recorded != sha256:
        if on_warning is not None:
            on_warning(f"the model card {path.name} does not match this model file (SHA-256 differs); ignoring it")
        return None
    return card


def _refuse_constant(name: str):
    raise ValueError(f"{name} is not JSON")


def split_pipeline(obj, vectorizer_obj=None):
    """(text steps, classifier) of a supported pipeline, or a one-line error."""
    from sklearn.feature_extraction.text import TfidfTransformer
    from sklearn.pipeline import Pipeline

    from explain.model.featurizer import Featurizer

    if isinstance(obj, Pipeline):
        steps = [step for _, step in obj.steps if step not in (None, "passthrough")]
        if vectorizer_obj is not None:
            raise NbledgerError("the model file is already a whole pipeline; drop the separate vectorizer file")
        *text_steps, classifier = steps
    else:
        classifier = obj
        if vectorizer_obj is None:
            raise NbledgerError(
                f"the file holds a {type(obj).__name__}, not a pipeline; pass the vectorizer file too "
                "(--vectorizer FILE), or save a Pipeline(vectorizer, naive Bayes)"
            )
        text_steps = (
            [s for _, s in vectorizer_obj.steps] if isinstance(vectorizer_obj, Pipeline) else [vectorizer_obj]
        )
    names = " -> ".join(type(s).__name__ for s in [*text_steps, classifier])
    supported = (
        "supported: CountVectorizer, TfidfVectorizer or HashingVectorizer "
        "(optionally CountVectorizer or HashingVectorizer -> TfidfTransformer) "
        "followed by MultinomialNB, ComplementNB or BernoulliNB"
    )
    if len(text_steps) == 1:
        vectorizer, tfidf = text_steps[0], None
    elif len(text_steps) == 2 and type(text_steps[1]) is TfidfTransformer:
        vectorizer, tfidf = text_steps
    else:
        raise NbledgerError(f"found {names}; {supported}")
    try:
        featurizer = Featurizer(vectorizer, tfidf)
    except NbledgerError as exc:
        raise NbledgerError(f"found {names}; {exc}") from None
    if tfidf is not None and not hasattr(tfidf, "idf_") and tfidf.use_idf:
        raise NbledgerError("the TfidfTransformer in this file has not been fitted")
    return featurizer, classifier


def load_model(
    path,
    *,
    vectorizer_path=None,
    allow_pickle: bool = False,
    trust: tuple[str, ...] = (),
    normal_class: str | None = None,
    on_warning: Callable[[str], None] | None = None,
    limits: LoadLimits | None = None,
) -> LoadedModel:
    """Load a filter safely and build its normalised view.

    ``normal_class`` overrides the one recorded in the model card; ``limits``
    bounds the loading process and says whether to use the cache.
    """
    from explain.model import model_cache, plain_form

    limits = limits or LoadLimits()
    path = input_file(path, "model file")
    kind = checked_format(path, allow_pickle, on_warning)
    files = [path]
    if vectorizer_path is not None:
        files.append(input_file(vectorizer_path, "vectorizer file"))
        checked_format(files[1], allow_pickle)
    for file in files:
        if sniff_format(file) == "skops":
            check_archive(file, limits.memory)
    digest = model_cache.file_sha256(path, limits.cache, on_warning)
    if len(files) > 1:
        second = model_cache.file_sha256(files[1], limits.cache, on_warning)
        key = hashlib.sha256(f"{digest}+{second}".encode()).hexdigest()
    else:
        key = digest
    size = sum(os.stat(f).st_size for f in files)
    card = read_card(path, digest, on_warning)
    if normal_class is None and card is not None:
        normal_class = (card.get("settings") or {}).get("normal_class")

    cached = model_cache.read(key, key, size, limits.memory, on_warning) if limits.cache else None
    if cached is not None:
        try:
            featurizer, view = plain_form.rebuild(*cached)
        except (NbledgerError, KeyError, ValueError, TypeError) as exc:
            cached = None  # an entry of another version of nbledger or scikit-learn: load afresh
            if on_warning is not None:
                on_warning(f"the cached copy of this model was not used ({_first_line(exc)}); loading the model file afresh")
        else:
            return LoadedModel(
                view.with_normal_class(normal_class), featurizer, path, digest, kind, card,
                cached[1].get("classifier"), from_cache=True,
            )
    outcome = load_in_child(files, allow_pickle=allow_pickle, trust=tuple(trust), limits=limits)
    if "needs_code" in outcome:
        if not (trust or allow_pickle):
            raise NbledgerError(
                f"{path.name}: the text step cannot be checked as plain data ({outcome['needs_code']}); "
                "it can only be loaded in this process if you trust its types by name (--trust TYPE)"
            )
        obj, _ = read_object(path, allow_pickle=allow_pickle, trust=trust)
        vec_obj = read_object(files[1], allow_pickle=allow_pickle, trust=trust)[0] if len(files) > 1 else None
        featurizer, classifier = split_pipeline(obj, vec_obj)
        view = view_of(classifier, featurizer.tokens, featurizer.feature_kind)
        classifier_settings = plain_form.classifier_settings(classifier)
    else:
        arrays, settings = outcome["plain"]
        featurizer, view = plain_form.rebuild(arrays, settings)
        classifier_settings = settings.get("classifier")
        if limits.cache:
            model_cache.write(key, arrays, settings, key, size)
    return LoadedModel(
        view.with_normal_class(normal_class), featurizer, path, digest, kind, card, classifier_settings
    )


def _package_root() -> str:
    import explain

    return str(Path(explain.__file__).resolve().parent.parent)


def load_in_child(files: list[Path], *, allow_pickle: bool, trust: tuple, limits: LoadLimits) -> dict:
    """Open the model (and vectorizer) file in a separate, limited process.

    Returns ``{"plain": (arrays, settings), "peak_bytes": n}``, or
    ``{"needs_code": reason}`` for a text step that runs code of its own.
    Everything else ends in an :class:`NbledgerError`. The process is a fork
    of this one where that is safe and leaves room under the memory limit
    (it starts in milliseconds), else a new interpreter.
    """
    name = files[0].name
    folder = Path(tempfile.mkdtemp(prefix="nbledger-load-"))
    request = {
        "model": str(files[0].resolve()),
        "vectorizer": str(files[1].resolve()) if len(files) > 1 else None,
        "allow_pickle": allow_pickle,
        "trust": list(trust),
        "memory": int(limits.memory),
        "cpu_seconds": max(1, int(limits.timeout) + 1),
        "out": str(folder),
    }
    child = None
    try:
        if _fork_fits(limits.memory):
            started, child = time.monotonic(), _fork_loader(request, folder)
            child.join(timeout=max(0.0, limits.timeout - (time.monotonic() - started)))
            if child.is_alive():
                raise NbledgerError(
                    f"loading {name} took longer than {limits.timeout:g} s (--load-timeout); it was stopped"
                )
            returncode = child.exitcode
        else:
            started, returncode = _spawned_loader(request, folder, name, limits)
        return _outcome(folder, name, limits, started, returncode)
    finally:
        if child is not None and child.is_alive():
            child.kill()
            child.join()
        shutil.rmtree(folder, ignore_errors=True)


#: Address space a fork must have left under the limit to load a file in (else a new interpreter is started).
FORK_HEADROOM = 256 << 20


def _fork_fits(memory: int) -> bool:
    """Whether to fork the loading process: safe here, and this process leaves room under ``memory``."""
    from explain.model.load_child import address_space_bytes

    return can_fork() and address_space_bytes() + FORK_HEADROOM <= memory


def _fork_loader(request: dict, folder: Path):
    """Start the loading process as a fork of this one (see :mod:`explain.model.forking`).

    Everything the loading imports is imported here first, so that the fork
    shares it instead of importing it again (this process needs most of it
    anyway, to rebuild the text step).
    """
    import multiprocessing

    import skops.io  # noqa: F401
    import sklearn.feature_extraction.text  # noqa: F401
    import sklearn.naive_bayes  # noqa: F401
    import sklearn.pipeline  # noqa: F401

    from explain.model import load_child, model_view, plain_form  # noqa: F401

    flush_standard_streams()
    child = multiprocessing.get_context("fork").Process(
        target=_run_forked, args=(request, folder), daemon=True, name="nbledger-loader"
    )
    child.start()
    return child


def _run_forked(request: dict, folder: Path) -> None:
    """The forked loading process: its own session, quiet standard streams, then :func:`load_child.serve`."""
    from explain.model import load_child

    os.setsid()
    for signum in (signal.SIGINT, signal.SIGTERM):
        signal.signal(signum, signal.SIG_DFL)
    with open(os.devnull, "rb") as nothing, open(folder / "stderr.txt", "wb") as errors:
        os.dup2(nothing.fileno(), 0)
        os.dup2(errors.fileno(), 1)
        os.dup2(errors.fileno(), 2)
    sys.stdout = sys.stderr = open(2, "w", closefd=False)
    load_child.serve(request)


def _spawned_loader(request: dict, folder: Path, name: str, limits: LoadLimits) -> tuple[float, int]:
    """Run the loading process as a new interpreter; returns (start time, exit status)."""
    env = dict(os.environ)
    # The child imports what this process would (a trusted custom type's module included).
    env["PYTHONPATH"] = os.pathsep.join([_package_root(), *(p for p in sys.path if p and os.path.isdir(p))])
    # One thread each: numerical libraries reserve address space per thread.
    env.update(OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1", MKL_NUM_THREADS="1")
    child = None
    try:
        with open(folder / "stderr.txt", "wb") as errors:
            child = subprocess.Popen(
                [sys.executable, "-m", "explain.model.load_child", json.dumps(request)],
                stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=errors,
                env=env, cwd=folder, start_new_session=True,
            )
            started = time.monotonic()
            # While the child starts its interpreter and imports, this process
            # imports what the rebuild needs: the two overlap on a second core.
            import sklearn.feature_extraction.text  # noqa: F401

            try:
                child.wait(timeout=max(0.0, limits.timeout - (time.monotonic() - started)))
            except subprocess.TimeoutExpired:
                raise NbledgerError(
                    f"loading {name} took longer than {limits.timeout:g} s (--load-timeout); it was stopped"
                ) from None
        return started, child.returncode
    finally:
        if child is not None and child.poll() is None:
            os.killpg(child.pid, signal.SIGKILL)
            child.wait()


def _outcome(folder: Path, name: str, limits: LoadLimits, started: float, returncode: int) -> dict:
    """What the loading process left in ``folder``, or the one-line error it comes to."""
    from explain.model import plain_form

    result_file = folder / "result.json"
    if not result_file.exists():
        how = f"signal {signal.Signals(-returncode).name}" if returncode < 0 else f"exit status {returncode}"
        tail = (folder / "stderr.txt").read_bytes()[-2000:].decode("utf-8", "replace").strip().splitlines()
        if returncode == -signal.SIGXCPU or (time.monotonic() - started) >= limits.timeout:
            raise NbledgerError(f"loading {name} took longer than {limits.timeout:g} s (--load-timeout); it was stopped")
        raise NbledgerError(
            f"loading {name} stopped ({how}{'; ' + tail[-1] if tail else ''}); "
            f"it may need more than {limits.memory:,} bytes (--max-model-memory)"
        )
    result = json.loads(result_file.read_text(encoding="utf-8"))
    if result.get("memory"):
        raise NbledgerError(
            f"loading {name} needed more than {limits.memory:,} bytes (--max-model-memory); it was stopped"
        )
    if "error" in result:
        raise NbledgerError(result["error"])
    if "needs_code" in result:
        return result
    result["plain"] = plain_form.load(folder)
    return result
