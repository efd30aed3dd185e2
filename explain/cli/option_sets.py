"""Option sets: options several commands share, declared once and handed to each command as one object.

A command asks for a set by naming a parameter after it and decorating itself::

    @app.command()
    @with_option_sets(opening=ModelOptions, reading=DataOptions)
    def assess(model: Path = ..., ..., opening: ModelOptions = None, reading: DataOptions = None):
        loaded = opening.load(model)
        messages = reading.read(data, text_col, label_col, card=loaded.card)

On the command line the set's fields are ordinary options (``--vectorizer``,
``--text-view`` ...) with one declaration each; the command receives them
gathered in the set's frozen object. ``left_out(ModelOptions, "vectorizer_path")``
offers a set without some of its options (they keep their defaults).
"""

from __future__ import annotations

import functools
import inspect
import typing
from copy import copy
from dataclasses import dataclass, field, fields
from pathlib import Path
from typing import ClassVar, List, Optional

from explain.cli.common import (
    ALLOW_PICKLE, LOAD_TIMEOUT, MAX_BYTES, MAX_DATA_BYTES, MAX_MODEL_MEMORY, NO_CACHE, NORMAL_CLASS, TRUST, VECTORIZER,
    fail, model_inputs, parse_size, read_messages_or_fail, warn,
)
from explain.cli.mail_options import LABEL, LABELS_FROM_FOLDERS, RAW_EMAIL, TEXT_VIEW, mail_input


def _option(declaration, cli_type, default=None):
    """A set's field: its default, the option that declares it and the type Typer parses it as."""
    return field(default=default, metadata={"option": declaration, "type": cli_type})


@dataclass(frozen=True)
class ModelOptions:
    """How a command opens its model: the options every model-loading command shares.

    The first four fields are keywords of :func:`explain.model.loading.load_model`;
    the last three bound the loading process (:meth:`load`).
    """

    #: the heading these options stand under in ``--help``
    PANEL: ClassVar[str] = "Opening the model"

    vectorizer_path: Path | None = _option(VECTORIZER, Optional[Path])
    allow_pickle: bool = _option(ALLOW_PICKLE, bool, False)
    trust: tuple[str, ...] = _option(TRUST, Optional[List[str]], ())
    normal_class: str | None = _option(NORMAL_CLASS, Optional[str])
    max_model_memory: str = _option(MAX_MODEL_MEMORY, str, "8G")
    load_timeout: float = _option(LOAD_TIMEOUT, float, 300.0)
    no_cache: bool = _option(NO_CACHE, bool, False)

    def __post_init__(self):
        object.__setattr__(self, "trust", tuple(self.trust or ()))

    def inputs(self, model: Path) -> list[Path]:
        """The files these options read beside the data: the model, its card, the vectorizer (no output may replace them)."""
        return model_inputs(model, self.vectorizer_path)

    def load(self, model: Path):
        """The CLI's one way to load a model: warnings to stderr, errors as one line."""
        from explain.model.loading import LoadLimits, load_model

        if not self.load_timeout > 0:
            fail(f"--load-timeout must be a positive number of seconds, got {self.load_timeout}")
        limits = LoadLimits(
            memory=parse_size(self.max_model_memory, "--max-model-memory"), timeout=self.load_timeout,
            cache=not self.no_cache,
        )
        keywords = {name: getattr(self, name) for name in ("vectorizer_path", "allow_pickle", "trust", "normal_class")}
        return load_model(model, **keywords, on_warning=warn, limits=limits)


@dataclass(frozen=True)
class DataOptions:
    """How a command reads its data set: e-mail settings, the text view and the two size limits."""

    PANEL: ClassVar[str] = "Reading the data"

    text_view: str | None = _option(TEXT_VIEW, Optional[str])
    raw_email: bool = _option(RAW_EMAIL, bool, False)
    labels_from_folders: bool = _option(LABELS_FROM_FOLDERS, bool, False)
    label: str | None = _option(LABEL, Optional[str])
    max_data_bytes: str = _option(MAX_DATA_BYTES, str, "1G")
    max_bytes: int = _option(MAX_BYTES, int, 1 << 20)

    @property
    def describes_mail(self) -> bool:
        """Whether an e-mail option was given (they describe a data set, so need one)."""
        return self.raw_email or self.labels_from_folders or self.label is not None

    def need_data(self, data) -> None:
        """One error line when e-mail options were given without the data set they describe."""
        if data is None and self.describes_mail:
            fail("--raw-email, --labels-from-folders and --label describe --data; give --data")

    def mail(self, card: dict | None, default_view: str | None = None):
        """The e-mail reading settings (:class:`~explain.model.mail_data.MailInput`), the view resolved
        against the model card (``default_view`` when no option and no card give one)."""
        return mail_input(card, self.text_view or default_view, self.raw_email, self.labels_from_folders, self.label)

    def read(self, data: Path, text_col: str | None, label_col: str | None = None, *, mail, id_col=None):
        """The messages of ``data`` within both size limits (one error line otherwise)."""
        return read_messages_or_fail(
            data, text_col, label_col, mail, id_col=id_col, max_data_bytes=self.max_data_bytes, max_bytes=self.max_bytes
        )


@dataclass(frozen=True)
class _Partial:
    """A set offered without some of its options."""

    of: type
    absent: frozenset

    def fields(self):
        return [f for f in fields(self.of) if f.name not in self.absent]


def left_out(option_set: type, *names: str) -> _Partial:
    """``option_set`` without the options ``names`` (the command receives their defaults)."""
    unknown = set(names) - {f.name for f in fields(option_set)}
    if unknown:
        raise TypeError(f"{option_set.__name__} has no option {sorted(unknown)}")
    return _Partial(option_set, frozenset(names))


def with_option_sets(**sets):
    """Offer each set's options on a Typer command and hand the command one object per set.

    ``sets`` maps a parameter of the command to a set (a dataclass of this
    module, or :func:`left_out` of one). Typer reads the signature this
    decorator writes: the command's own parameters, then the sets' options, each set under its own
    heading in ``--help``.
    """
    chosen = {name: s if isinstance(s, _Partial) else _Partial(s, frozenset()) for name, s in sets.items()}

    def decorate(command):
        hints = typing.get_type_hints(command)
        own = [
            p.replace(annotation=hints.get(p.name, p.annotation))
            for p in inspect.signature(command).parameters.values() if p.name not in chosen
        ]
        taken = {p.name for p in own}
        added = []
        for option_set in chosen.values():
            for f in option_set.fields():
                if f.name in taken:
                    raise TypeError(f"{command.__name__} declares {f.name} itself and through an option set")
                taken.add(f.name)
                option = copy(f.metadata["option"])
                option.rich_help_panel = option_set.of.PANEL
                added.append(inspect.Parameter(
                    f.name, inspect.Parameter.KEYWORD_ONLY, default=option, annotation=f.metadata["type"]
                ))

        @functools.wraps(command)
        def run(**given):
            for name, option_set in chosen.items():
                given[name] = option_set.of(**{f.name: given.pop(f.name) for f in option_set.fields()})
            return command(**given)

        run.__signature__ = inspect.Signature(own + added)
        run.__annotations__ = {p.name: p.annotation for p in own + added}
        return run

    return decorate
