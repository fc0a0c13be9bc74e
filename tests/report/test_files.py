"""Where reports are written: a path refused before any long work, in the words the operating system uses, and the name of
a file written beside another."""

from __future__ import annotations

import errno
import os

import pytest

from netloop.errors import OutputError
from netloop.report.files import refuse_unwritable, tagged_path


@pytest.mark.parametrize("make, code", [(lambda d: d / "a-file", errno.ENOTDIR), (lambda d: d / "missing", errno.ENOENT)])
def test_a_folder_that_is_a_file_or_missing_is_refused_as_the_system_says(tmp_path, make, code):
    """A report path inside a file, or inside a folder that does not exist, is refused with the reason the operating system
    gives for it (reference: os.strerror of ENOTDIR and ENOENT), naming the folder; a path that is a folder, too."""
    (tmp_path / "a-file").write_text("x")
    folder = make(tmp_path)
    with pytest.raises(OutputError) as caught:
        refuse_unwritable(folder / "report.html", "HTML report")
    assert str(caught.value) == (f"cannot write the HTML report to {str(folder / 'report.html')!r}: {os.strerror(code)} "
                                 f"({str(folder)!r})")
    with pytest.raises(OutputError, match=os.strerror(errno.EISDIR)):
        refuse_unwritable(tmp_path, "HTML report")
    refuse_unwritable(None, "HTML report")
    refuse_unwritable(tmp_path / "report.html", "HTML report")


def test_a_file_written_beside_another_takes_the_tag_before_its_own_extension():
    """FILE.ext -> FILE-tag.ext, FILE -> FILE-tag, never in a folder's dotted name (the docstring's own examples)."""
    assert tagged_path("out/t.csv", "a2") == "out/t-a2.csv"
    assert tagged_path("runs/2026.12/t", "a2") == "runs/2026.12/t-a2"
