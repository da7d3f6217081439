"""A click group whose subcommands are imported only when one is run or listed.

A ``bitsift rank`` then never imports what ``run``, ``report`` or ``select`` need (the history
stores and SQLAlchemy, the HTML report, the redundancy analysis): issue 20's fixed costs.
``bitsift --help`` lists every command, and so imports them all.
"""

from __future__ import annotations

import importlib
from collections.abc import Mapping
from typing import Any

import click


class LazyGroup(click.Group):
    """A :class:`click.Group` with subcommands named ahead as ``module:attribute``."""

    def __init__(self, *args: Any, lazy_commands: Mapping[str, str] | None = None,
                 **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        #: Command name -> ``"module:attribute"`` of the click command, imported on first use.
        self.lazy_commands: dict[str, str] = dict(lazy_commands or {})

    def list_commands(self, ctx: click.Context) -> list[str]:
        return sorted({*super().list_commands(ctx), *self.lazy_commands})

    def get_command(self, ctx: click.Context, cmd_name: str) -> click.Command | None:
        if cmd_name in self.lazy_commands and cmd_name not in self.commands:
            self.add_command(load_command(cmd_name, self.lazy_commands[cmd_name]))
        return super().get_command(ctx, cmd_name)


def load_command(name: str, where: str) -> click.Command:
    """The command ``where`` (``"module:attribute"``) names; it must be called ``name``."""
    module, _, attribute = where.partition(":")
    command = getattr(importlib.import_module(module), attribute)
    if not isinstance(command, click.Command) or command.name != name:
        raise TypeError(f"{where} is not the click command {name!r}")
    return command
