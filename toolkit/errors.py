"""The one exception type the project raises for bad input or an impossible request."""

from __future__ import annotations


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
