"""Registries: the one place each kind of plug-in (source, sink, stage, ordering strategy,
built-in shape) is looked up by name. Adding one is a single `register` call."""

from __future__ import annotations

from .errors import InputError

__all__ = ["Registry"]


class Registry:
    """Named entries of one kind. Looking up an unknown name is an `InputError` that lists the
    known names; registering a name twice is a programming error (`ValueError`).

    Examples
    --------
    >>> r = Registry("colour")
    >>> r.register("green", 0x00ff00)
    >>> r["green"] == 0x00ff00, "green" in r, r.names()
    (True, True, ['green'])
    """

    def __init__(self, kind: str):
        self.kind = kind
        self._items: dict = {}

    def register(self, name: str, item, replace: bool = False) -> None:
        key = name.lower()
        if key in self._items and not replace:
            raise ValueError(f"{self.kind} {name!r} is registered already")
        self._items[key] = item

    def unregister(self, name: str) -> None:
        self._items.pop(name.lower(), None)

    def __contains__(self, name) -> bool:
        return isinstance(name, str) and name.lower() in self._items

    def __getitem__(self, name: str):
        try:
            return self._items[str(name).lower()]
        except KeyError:
            raise InputError(f"unknown {self.kind} {name!r}: choose from "
                             + ", ".join(self.names())) from None

    def get(self, name: str, default=None):
        return self._items.get(str(name).lower(), default)

    def names(self) -> list[str]:
        return list(self._items)

    def items(self):
        return list(self._items.items())
