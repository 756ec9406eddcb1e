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
