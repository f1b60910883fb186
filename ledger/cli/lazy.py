"""What keeps one run of one command fast: build only the command asked for, coerce plain text
without a validation library.

A run such as ``refledger log add ...`` used to import every command module and have Typer
build the click command of all of them, and Typer built a pydantic adapter for every
parameter it parsed (importing pydantic) even when the parameter is plain text or absent. Here:

* ``LazyCommands`` is the command table of a group: it knows the names (so ``--help``, typo
  suggestions and the order of the listing are unchanged) and builds a command, importing its
  module, only when that command is looked up;
* ``use_plain_coercion`` lets a parameter whose value is absent, already text for a ``str``
  annotation, or an empty repeatable text or path option skip the adapter (when no custom
  parser is set). Typer's result for these is the value itself (an empty list for the
  repeatable option), so nothing changes but the cost; every other value goes through Typer's
  own coercion, error messages included. tests/cli/test_startup.py compares the two on every
  parameter of every command, so a Typer upgrade that changes this shows up there.
"""

from __future__ import annotations

import copy
from collections.abc import Callable, Iterator, MutableMapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any, get_args

import typer
import typer.core
import typer.main
from typer.models import CommandInfo, TyperInfo


class LazyCommands(MutableMapping[str, Any]):
    """A group's ``commands``: every name known up front, each command built on first use."""

    def __init__(self, names: list[str], build: Callable[[str], Any]) -> None:
        self._names = list(names)
        self._built: dict[str, Any] = {}
        self._build = build

    def __getitem__(self, name: str) -> Any:
        if name not in self._built:
            if name not in self._names:
                raise KeyError(name)
            self._built[name] = self._build(name)
        return self._built[name]

    def __setitem__(self, name: str, command: Any) -> None:
        if name not in self._names:
            self._names.append(name)
        self._built[name] = command

    def __delitem__(self, name: str) -> None:
        self._names.remove(name)
        self._built.pop(name, None)

    def __contains__(self, name: object) -> bool:
        return name in self._names

    def __iter__(self) -> Iterator[str]:
        return iter(list(self._names))

    def __len__(self) -> int:
        return len(self._names)


def command_name(info: CommandInfo) -> str:
    """The name Typer gives a registered command."""
    return info.name or typer.main.get_command_name(info.callback.__name__)  # type: ignore[union-attr]  # registered: has a callback


@dataclass(frozen=True)
class BuildSettings:
    """What the root application passes down to every command it builds."""

    pretty_exceptions_short: bool
    rich_markup_mode: Any
    suggest_commands: bool


def build_command(holder: typer.Typer, name: str, settings: BuildSettings) -> Any:
    """The click command ``name`` registered on ``holder`` (a command, or a sub-app's group)."""
    for info in holder.registered_commands:
        if command_name(info) == name:
            return typer.main.get_command_from_info(
                info,
                pretty_exceptions_short=settings.pretty_exceptions_short,
                rich_markup_mode=settings.rich_markup_mode,
            )
    for group_info in holder.registered_groups:
        if group_info.name == name:
            return lazy_group(group_info, settings)
    raise KeyError(name)


def lazy_group(info: TyperInfo, settings: BuildSettings) -> Any:
    """Typer's group for a sub-app, its subcommands built only when looked up.

    The group itself (name, help, callback, options) is Typer's own, built from the sub-app with
    its command list left out; the commands then come from the sub-app's registrations, in
    registration order, each made by Typer exactly as it would have been.
    """
    sub = info.typer_instance
    assert sub is not None
    if sub.registered_groups:  # nested sub-apps: not used here, so let Typer build it all
        return typer.main.get_group_from_info(
            info,
            pretty_exceptions_short=settings.pretty_exceptions_short,
            rich_markup_mode=settings.rich_markup_mode,
            suggest_commands=settings.suggest_commands,
        )
    shell = copy.copy(sub)
    shell.registered_commands = []
    bare = copy.copy(info)
    bare.typer_instance = shell
    group = typer.main.get_group_from_info(
        bare,
        pretty_exceptions_short=settings.pretty_exceptions_short,
        rich_markup_mode=settings.rich_markup_mode,
        suggest_commands=settings.suggest_commands,
    )
    names = [command_name(c) for c in sub.registered_commands]
    group.commands = LazyCommands(names, lambda name: build_command(sub, name, settings))
    return group


# --- coercion of plain values -----------------------------------------------------------------


def use_plain_coercion() -> None:
    """Have Typer's parameters skip its pydantic adapter where the adapter returns the value.

    Installed once per process (idempotent). If this Typer lacks the hook (another version),
    nothing is changed and Typer coerces as usual.
    """
    try:
        from typer._coercion import RuntimeParam, build_runtime_param
    except ImportError:  # pragma: no cover - a Typer without runtime coercion
        return
    cls = getattr(typer.core, "_TyperParameter", None)
    original = getattr(cls, "get_runtime_param", None)
    if original is None or getattr(original, "_refledger_plain", False):
        return

    @dataclass(frozen=True)
    class PlainRuntimeParam(RuntimeParam):
        """Plain text and empty repeatable options as they are; the rest via Typer's adapter."""

        descriptor: Any

        def _coerce_value(self, value: Any, param: Any, ctx: Any) -> Any:
            descriptor = self.descriptor
            if descriptor.file_annotation is None and descriptor.parameter_info.parser is None:
                if descriptor.annotation is str and type(value) is str:
                    return value
                if (
                    descriptor.is_list
                    and get_args(descriptor.annotation) in ((str,), (Path,))
                    and isinstance(value, list | tuple)
                    and not value
                ):
                    return []
            real = build_runtime_param(descriptor)
            return real._coerce_value(value, param=param, ctx=ctx)

    def get_runtime_param(self: Any) -> Any:
        if self._runtime_param is None:
            descriptor = self.type_descriptor
            self._runtime_param = PlainRuntimeParam(
                parameter_info=descriptor.parameter_info, annotation=descriptor.annotation, descriptor=descriptor
            )
        return self._runtime_param

    get_runtime_param._refledger_plain = True  # type: ignore[attr-defined]  # our marker on a function object
    get_runtime_param.__doc__ = original.__doc__
    cls.get_runtime_param = get_runtime_param  # type: ignore[union-attr]  # Typer's class, patched on purpose
