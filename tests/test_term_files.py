"""One reader, with one size limit, for the small files of terms and ids (watchlist, swap terms, id list)."""

from __future__ import annotations

import pytest

from clirun import nbledger
from explain.analysis.risk import read_watchlist
from explain.errors import NbledgerError
from explain.model.input_files import TERM_FILE_LIMIT, term_text


def test_term_text_reads_utf8_with_a_byte_order_mark(tmp_path):
    path = tmp_path / "terms.txt"
    path.write_bytes("\ufeffparcel\ncustoms\n".encode("utf-8"))
    assert term_text(path, "watchlist") == "parcel\ncustoms\n"


@pytest.mark.parametrize("make, expected", [
    (lambda p: p.write_bytes(b"x" * (TERM_FILE_LIMIT + 1)), f"is larger than {TERM_FILE_LIMIT:,} bytes"),
    (lambda p: p.write_bytes(b"caf\xe9\n"), "is not UTF-8 text (byte 0xe9 at offset 3)"),
    (lambda p: p.mkdir(), "it is a folder"),
    (lambda p: None, "No such file or directory"),
])
def test_every_problem_is_one_line_naming_the_file(tmp_path, make, expected):
    path = tmp_path / "terms.txt"
    make(path)
    with pytest.raises(NbledgerError) as raised:
        read_watchlist(path)
    assert "watchlist" in str(raised.value) and str(path) in str(raised.value) and expected in str(raised.value)


def test_a_device_is_refused_unread_by_every_command_that_takes_a_term_file(capsys, tmp_path):
    """/dev/zero never ends: read whole it would fill memory; it is refused as not a regular file."""
    from corpora import make_pipeline
    import skops.io as sio

    model = tmp_path / "m.skops"
    sio.dump(make_pipeline("counts", "multinomial").fit(["fee parcel link", "tea harbour kids"], ["scam", "ok"]), model)
    data = tmp_path / "d.csv"
    data.write_text("id,text\na,fee parcel\n", encoding="utf-8")
    for args, what in ((["why", model, "fee parcel", "--watchlist", "/dev/zero"], "watchlist"),
                       (["why", model, "--data", data, "--ids", "/dev/zero"], "id list"),
                       (["probe", model, data, "--text-col", "text", "--normal-class", "ok", "--swap-terms", "/dev/zero"],
                        "swap-terms file")):
        result = nbledger(capsys, *args)
        assert result.code != 0
        lines = [line for line in result.err.splitlines() if line.strip()]
        assert lines[-1] == f"error: cannot read the {what} /dev/zero: it is not a regular file", result.err
        assert "Traceback" not in result.err
