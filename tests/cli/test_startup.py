"""A run builds and imports only the command it names, and parses plain text without pydantic."""

from __future__ import annotations

import gc
import json
import pkgutil
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
import typer
import typer.main
from typer.testing import CliRunner

import ledger.cli
from ledger.cli import lazy
from ledger.cli.main import COMMANDS, app
from ledger.store.db import Location

runner = CliRunner()


def _run(location: Location, *args: str):  # type: ignore[no-untyped-def]
    return runner.invoke(app, ["--db", location.url, *args])


def _system(loc: Location) -> None:
    assert _run(loc, "site", "add", "DE-1", "--name", "Store", "--country", "DE").exit_code == 0
    assert _run(loc, "tech", "add", "Ada Novak", "--certificate", "C-1", "--scheme", "EU cat I").exit_code == 0
    out = _run(
        loc, "system", "add", "DE-1/RACK", "--refrigerant", "R-404A", "--charge", "20 kg",
        "--application", "commercial-refrigeration", "--in-service", "2022-04-01",
    )  # fmt: skip
    assert out.exit_code == 0, out.output


def _main_in_a_process(argv: list[str]) -> tuple[dict[str, Any], subprocess.CompletedProcess[str]]:
    """Run the console entry point in a fresh interpreter; report what it left behind."""
    code = (
        "import gc, json, sys\n"
        f"sys.argv = {['refledger', *argv]!r}\n"
        "from ledger.cli.main import main\n"
        "try:\n    main()\nexcept SystemExit as exc:\n    status = exc.code\nelse:\n    status = 0\n"
        "print(json.dumps({'status': status, 'gc': gc.isenabled(),\n"
        "    'pydantic': sorted(m for m in sys.modules if m.split('.')[0] == 'pydantic'),\n"
        "    'commands': sorted(m for m in sys.modules if m.startswith('ledger.cli.') and m.endswith('_cmd'))}),\n"
        "    file=sys.stderr)\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return json.loads(done.stderr.strip().splitlines()[-1]), done


def test_log_add_process_loads_only_its_command(sqlite_location: Location) -> None:
    _system(sqlite_location)
    gc.collect()  # close this process's connections: the WAL file goes with the last one
    path = sqlite_location.sqlite_path
    assert path is not None and not Path(f"{path}-wal").exists()
    report, done = _main_in_a_process(
        ["--db", sqlite_location.url, "log", "add", "DE-1/RACK", "--on", "2024-03-01", "--mass", "1 kg",
         "--tech", "Ada Novak"]
    )  # fmt: skip
    assert report["status"] in (0, None), done.stderr
    assert "recorded: add on DE-1/RACK" in done.stdout
    assert report["commands"] == ["ledger.cli.log_cmd"]
    assert report["pydantic"] == []
    assert report["gc"], "the collector must be back on once the command uses the database"
    # the process closed its connection at exit as before (SQLite folds the WAL file back)
    assert not Path(f"{path}-wal").exists()
    shown = json.loads(_run(sqlite_location, "system", "show", "DE-1/RACK", "--json").stdout)
    assert [e["kind"] for e in shown["events"]] == ["in-service", "add"]


def test_a_run_without_the_database_ends_with_the_collector_on() -> None:
    report, done = _main_in_a_process(["refrigerant", "show", "R-404A", "--json"])
    assert report["status"] in (0, None), done.stderr
    assert report["commands"] == ["ledger.cli.refrigerant_cmd"]
    assert report["gc"]


def test_command_table_names_every_command_of_every_module() -> None:
    modules = {m.name for m in pkgutil.iter_modules(ledger.cli.__path__) if m.name.endswith("_cmd")}
    assert {module for module, _ in COMMANDS.values()} == modules
    for module_name in modules:
        module = __import__(f"ledger.cli.{module_name}", fromlist=["_"])
        holder = typer.Typer()
        if hasattr(module, "register"):
            module.register(holder)
        registered = [lazy.command_name(c) for c in holder.registered_commands]
        listed = [name for name, (mod, sub_app) in COMMANDS.items() if mod == module_name and sub_app is None]
        assert registered == listed, module_name
        for name, (mod, sub_app) in COMMANDS.items():
            if mod == module_name and sub_app is not None:
                assert isinstance(getattr(module, sub_app), typer.Typer), name


def test_root_lists_the_table_in_order_and_builds_each_command() -> None:
    root = typer.main.get_command(app)
    ctx = typer.Context(root)
    assert root.list_commands(ctx) == list(COMMANDS)
    for name in COMMANDS:
        assert root.get_command(ctx, name).name == name
    assert root.get_command(ctx, "nope") is None


def test_unknown_command_still_suggests_the_near_one() -> None:
    result = runner.invoke(app, ["lgo", "add"])
    assert result.exit_code == 2
    assert "No such command 'lgo'. Did you mean 'log'?" in result.output


def _walk(command: Any, ctx: Any) -> Any:
    yield command, ctx
    for name in getattr(command, "commands", {}) or {}:
        sub = command.commands[name]
        yield from _walk(sub, typer.Context(sub, info_name=name, parent=ctx))


def _outcome(runtime: Any, value: Any, param: Any, ctx: Any) -> Any:
    try:
        return "ok", runtime.coerce(value, param=param, ctx=ctx)
    except Exception as exc:  # compare the failure too: type and message
        return "error", type(exc).__name__, str(exc)


@pytest.mark.parametrize("value", ["DE-1/RACK", "", "2.5 kg", "ünïcödé", "\udcff", None, (), [], ("a", "b"), b"x", 3])
def test_plain_coercion_gives_what_typer_gives(value: Any, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    build_runtime_param = pytest.importorskip("typer._coercion").build_runtime_param
    monkeypatch.chdir(tmp_path)  # relative path values resolve in an empty folder
    root = typer.main.get_command(app)
    checked = 0
    for command, ctx in _walk(root, typer.Context(root, info_name="refledger")):
        for param in command.get_params(ctx):
            descriptor = getattr(param, "type_descriptor", None)
            if descriptor is None:
                continue
            param._runtime_param = None
            ours = _outcome(param.get_runtime_param(), value, param, ctx)
            typers = _outcome(build_runtime_param(descriptor), value, param, ctx)
            assert ours == typers, (command.name, param.name, value)
            checked += 1
    assert checked > 100
