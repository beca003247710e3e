"""Errors of the history store: each is one line a person can act on."""

from __future__ import annotations

from pathlib import Path

from rtanalyzer.errors import RtaError


class StoreError(RtaError):
    """A history store that cannot be opened, read or written, or a snapshot that is not there."""


class StoreUnusable(StoreError):
    """The file given as the store is not an rtanalyzer history (corrupt, foreign or not SQLite).

    The file is never changed or deleted because of this error; front ends offer to move it
    aside (:func:`rtanalyzer.store.db.back_up_unusable`) and start a new store.
    """

    def __init__(self, path: Path, reason: str) -> None:
        self.path = Path(path)
        self.reason = reason
        super().__init__(f"{self.path} is not a usable rtanalyzer history store: {reason}")
