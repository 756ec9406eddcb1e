"""Every exception podwatch raises on purpose, under one base class.

Messages are one line and say what was expected and what arrived, so the
command line can print them as they are; nothing here imports I/O.
"""


class PodwatchError(Exception):
    """Base of every error podwatch reports to a user."""


class ProfileError(PodwatchError):
    """A robot profile that cannot be used: names the file, key and problem."""

    def __init__(self, source: str, key: str, problem: str) -> None:
        self.source = source
        self.key = key
        self.problem = problem
        super().__init__(f"{source}: {key}: {problem}")


class RecordingError(PodwatchError):
    """A recording that cannot be read at all."""


class UsageError(PodwatchError):
    """A command-line request that cannot be carried out as given."""


class RecordingExistsError(RecordingError):
    """A recording file that is already there: podwatch never overwrites or appends to one."""


class LinkError(PodwatchError):
    """A peer on the network that cannot be reached or refused us (a receiver, a broker)."""


def describe(value: object, limit: int = 60) -> str:
    """A value that arrived, as an error message shows it: one short line, whatever it is
    (an integer of thousands of digits, a deep array, a long string)."""
    if isinstance(value, int) and not isinstance(value, bool) and value.bit_length() > 64:
        return f"an integer of {len(str(abs(value))) if value.bit_length() < 14000 else 'thousands of'} digits"
    if isinstance(value, (list, tuple)):
        return f"an array of {len(value)} items"
    if isinstance(value, dict):
        return f"a table of {len(value)} keys"
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."
