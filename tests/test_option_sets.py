"""Option sets: the options commands share are declared once and reach a command as one object each."""

from __future__ import annotations

from dataclasses import fields
from pathlib import Path

import pytest
import typer
from typer.testing import CliRunner

from explain.cli import app
from explain.cli.option_sets import DataOptions, ModelOptions, left_out, with_option_sets

OPENING = {"why", "ledger", "assess", "vocab", "report", "probe", "serve", "compare"}
READING = {"assess", "vocab", "report", "probe", "serve", "train", "compare"}


def _flags(option_set, leave=()) -> set[str]:
    return {f.metadata["option"].param_decls[0] for f in fields(option_set) if f.name not in leave}


def _help(name: str) -> str:
    result = CliRunner().invoke(app, [name, "--help"], env={"COLUMNS": "200", "NO_COLOR": "1"})
    assert result.exit_code == 0, result.output
    return result.output


@pytest.mark.parametrize("name", sorted(OPENING | READING))
def test_each_command_offers_its_sets_under_their_headings(name):
    shown = _help(name)
    leave = ("vectorizer_path", "normal_class") if name == "compare" else ()
    if name in OPENING:
        assert ModelOptions.PANEL in shown
        assert all(flag in shown for flag in _flags(ModelOptions, leave))
    if name in READING:
        assert DataOptions.PANEL in shown
        assert all(flag in shown for flag in _flags(DataOptions))


def test_a_command_receives_one_object_per_set_with_the_values_given():
    demo = typer.Typer()
    seen = {}

    @demo.command()
    @with_option_sets(opening=ModelOptions, reading=DataOptions)
    def run(model: Path = typer.Argument(...), opening: ModelOptions = None, reading: DataOptions = None):
        seen.update(model=model, opening=opening, reading=reading)

    given = ["m.skops", "--trust", "a.B", "--trust", "c.D", "--no-cache", "--max-bytes", "5", "--label", "ok",
             "--vectorizer", "v.skops"]
    result = CliRunner().invoke(demo, given)
    assert result.exit_code == 0, result.output
    assert seen["model"] == Path("m.skops")
    assert seen["opening"] == ModelOptions(vectorizer_path=Path("v.skops"), trust=("a.B", "c.D"), no_cache=True)
    assert seen["reading"] == DataOptions(max_bytes=5, label="ok")
    assert seen["reading"].describes_mail and not DataOptions().describes_mail


def test_a_set_without_some_options_gives_their_defaults_and_does_not_offer_them():
    demo = typer.Typer()
    seen = {}

    @demo.command()
    @with_option_sets(opening=left_out(ModelOptions, "vectorizer_path"))
    def run(opening: ModelOptions = None):
        seen["opening"] = opening

    assert CliRunner().invoke(demo, ["--allow-pickle"]).exit_code == 0
    assert seen["opening"] == ModelOptions(allow_pickle=True)
    refused = CliRunner().invoke(demo, ["--vectorizer", "v.skops"])
    assert refused.exit_code != 0 and "No such option" in refused.output


def test_an_option_declared_twice_or_an_unknown_one_is_a_defect_found_at_import():
    with pytest.raises(TypeError, match="normal_class"):
        @with_option_sets(opening=ModelOptions)
        def twice(normal_class: str = typer.Option(None, "--normal-class"), opening: ModelOptions = None):
            pass
    with pytest.raises(TypeError, match="no option"):
        left_out(DataOptions, "vectorizer_path")
