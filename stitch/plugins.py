"""Plugin registries: built-in entries plus those other packages declare as entry points."""

from __future__ import annotations

from importlib.metadata import entry_points

from .errors import OptionError

__all__ = ["Registry"]


class Registry:
    """Named callables from a dict of built-ins and an entry-point group.

    Parameters
    ----------
    group : str
        Entry-point group, e.g. ``"stitch.seams"``.
    builtins : dict
        Name -> callable shipped with stitch.
    option : str
        The CLI option that chooses an entry, for error messages.
    """

    def __init__(self, group, builtins, option):
        self.group = group
        self.builtins = dict(builtins)
        self.option = option

    def names(self):
        """Names of built-in and installed entries, sorted."""
        return sorted(set(self.builtins) | {ep.name for ep in entry_points(group=self.group)})

    def get(self, name):
        """The entry registered under ``name``; OptionError listing the choices otherwise."""
        if name in self.builtins:
            return self.builtins[name]
        for ep in entry_points(group=self.group):
            if ep.name == name:
                return ep.load()
        raise OptionError(f"{self.option} {name!r} is unknown; choose one of {', '.join(self.names())}")
