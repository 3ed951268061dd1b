"""The one exception type the project raises for bad input or an impossible request."""

from __future__ import annotations

from contextlib import contextmanager


class LacunaError(Exception):
    """Bad input or an impossible request, in words a drafter understands.

    ``where`` names the file, layer, entity handle or job key at fault; ``hint`` says how to fix it.
    The command line prints ``str(error)`` and exits with code 2.
    """

    def __init__(self, message: str, *, where: str | None = None, hint: str | None = None):
        self.message = message
        self.where = where
        self.hint = hint
        super().__init__(self.__str__())

    def __str__(self) -> str:
        text = f"{self.where}: {self.message}" if self.where else self.message
        if self.hint:
            text += f" {self.hint}"
        return text


@contextmanager
def naming(drawing, job_path=None):
    """Inside ``with``, a LacunaError whose ``where`` is a bare job key ("[rules] profile", "[[support]]") gets the
    file it is about in front: the job file when there is one, else the drawing (whose markers stand for the
    job's tables). Messages that already name a file are left as they are."""
    try:
        yield
    except LacunaError as error:
        if error.where and error.where.startswith("[") and (job_path or drawing):
            error.where = f"{job_path or drawing} {error.where}"
            error.args = (str(error),)
        raise


def one_paragraph(text: str) -> str:
    """``text`` as one printable line: line breaks become spaces, other control characters their escapes.

    Messages quote names and values from the files they are about; a damaged file's control characters (a
    form feed, an escape sequence) would otherwise break the paragraph or reach the terminal.
    """
    return "".join(c if c.isprintable() else " " if c in "\n\r\t" else repr(c)[1:-1] for c in text)
