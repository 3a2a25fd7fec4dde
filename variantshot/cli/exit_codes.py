"""Exit statuses, mirroring DESIGN.md's command-line contract."""

from enum import IntEnum


class ExitCode(IntEnum):
    OK = 0
    SHOTS_FAILED = 1  # the batch finished but some shots failed to render or failed QA
    BAD_INPUT = 2  # bad input or usage: nothing rendered, nothing overwritten
    LOCKED = 3  # another run holds the output folder's lock
