"""Error types raised at bondscope's public boundary."""

__all__ = ["CheckpointError", "ConvergenceError", "MemoryLimitError", "EXIT_USAGE",
           "EXIT_CHECKPOINT", "EXIT_MEMORY", "EXIT_FAILED", "EXIT_SOME_FAILED", "one_line"]

EXIT_USAGE = 2
EXIT_CHECKPOINT = 3
EXIT_MEMORY = 4
EXIT_FAILED = 1
# batch: it ran, and some checkpoints failed (their count is in the summary)
EXIT_SOME_FAILED = 5


class CheckpointError(ValueError):
    """A checkpoint (or saved profile) that cannot be read as it stands.

    The message names the file, dataset or site and says what was expected,
    what was found and, where there is one, how to fix it.
    """


class ConvergenceError(CheckpointError):
    """An iterative solver did not converge on a checkpoint's state (no number is reported)."""


class MemoryLimitError(MemoryError):
    """Work refused before it starts because its memory estimate exceeds the limit."""


def one_line(message):
    """An error (or any text) as one line: whitespace runs folded to single spaces.

    Examples
    --------
    >>> one_line(ValueError("bad   bond"))
    'bad bond'
    >>> one_line(KeyError())
    'KeyError'
    """
    text = " ".join(str(message).split())
    return text or (type(message).__name__ if isinstance(message, BaseException) else "")
