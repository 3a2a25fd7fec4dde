"""The exception hierarchy: every error a user can see names where it happened."""

from __future__ import annotations


class VariantshotError(Exception):
    """Base class of every error variantshot raises on purpose."""


class InputError(VariantshotError):
    """Bad input: names the file, and where it applies the row and column, and what is accepted.

    Parameters
    ----------
    message : str
        What is wrong, in one sentence.
    file : str, optional
        The file at fault (as the user named it).
    row, column : int or str, optional
        For tabular input: the 1-based row number as the user sees it in an editor
        (the header is row 1) and the column name.
    accepted : str, optional
        What would have been accepted.
    """

    def __init__(self, message, file=None, row=None, column=None, accepted=None):
        self.message = message
        self.file = None if file is None else str(file)
        self.row = row
        self.column = column
        self.accepted = accepted
        super().__init__(self.format())

    @property
    def where(self) -> str:
        parts = [p for p in (self.file, self.row, self.column) if p is not None]
        return ":".join(str(p) for p in parts)

    def format(self) -> str:
        text = f"{self.where}: {self.message}" if self.where else self.message
        if self.accepted:
            text += f" (accepted: {self.accepted})"
        return text


class InputErrors(InputError):
    """Several input errors found in one pass (a catalog reports every bad cell at once)."""

    def __init__(self, errors: list[InputError]):
        self.errors = list(errors)
        first = self.errors[0] if self.errors else None
        super().__init__(
            "\n".join(e.format() for e in self.errors) or "invalid input",
            file=None if first is None else None,
        )

    def format(self) -> str:  # one line per error
        return "\n".join(e.format() for e in getattr(self, "errors", [])) or "invalid input"


class SceneError(InputError):
    """A glTF file that cannot be loaded: the message names the file and the glTF object.

    Example: ``bottle.gltf: meshes[2].primitives[0]: accessor 7 reads past the end of buffer 0``.
    """

    def __init__(self, file, path: str | None, message: str):
        self.object_path = path
        full = f"{path}: {message}" if path else message
        super().__init__(full, file=file)


class RenderError(VariantshotError):
    """A render that could not complete (bad settings, a scene with nothing to render, ...)."""


class LockedError(VariantshotError):
    """Another run holds the output folder's lock."""

    def __init__(self, lock_path, pid: int, started: str):
        self.lock_path = str(lock_path)
        self.pid = pid
        self.started = started
        super().__init__(
            f"{self.lock_path}: another variantshot run (pid {pid}, started {started}) holds this "
            "output folder; wait for it to finish or stop it"
        )
