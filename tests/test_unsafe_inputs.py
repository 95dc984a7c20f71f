"""Unsafe inputs: no user file is unpickled or executed, no shell runs user text, outputs stay put.

The source checks walk the syntax tree of every module under ``calib/`` (so comments and
docstrings that mention a word do not count, and a call cannot hide behind a line break):

- ``pickle``/``marshal``/``shelve``/``dill`` are imported only by :mod:`calib.sweep.sandbox`, whose
  pickles travel over the pipe between calib and its own worker process and never touch a file;
- every ``numpy.load`` passes ``allow_pickle=False``; ``pandas.read_pickle`` is never called;
- no ``eval``, ``exec``, ``compile`` or ``__import__``; ``importlib.import_module`` only where the
  module name is calib's own (command discovery) or the user's explicit ``CALIB_PLUGINS``;
- no ``os.system``/``os.popen``/``os.exec*``/``os.spawn*``; every ``subprocess`` call gets an
  argument list of constants and ``sys.executable`` (no shell, no user text), never ``shell=True``.

The path rule (docs/spec.md, "Where calib writes"): the store is ``<--out>/<campaign name>.sqlite``
with a validated name, so no spec can place it elsewhere; files named on the command line are
written exactly where the user says, ``..`` included, because the user chose them; a saved
instance's manifest may only name files beside it (tests/test_corpus.py, manifest-path-escape).
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from calib.cli import main

PACKAGE = Path(__file__).resolve().parents[1] / "calib"
PICKLE_MODULES = {"pickle", "marshal", "shelve", "dill", "cloudpickle"}
#: module -> why it may import a pickle module
PICKLE_ALLOWED = {"calib/sweep/sandbox.py": "pipe protocol between calib and its own worker process; no files"}
IMPORT_MODULE_ALLOWED = {"calib/cli.py": "imports calib.commands.<name> for the modules of calib/commands",
                         "calib/sweep/plugins.py": "imports the modules the user lists in CALIB_PLUGINS"}
BANNED_CALLS = {"eval", "exec", "compile", "__import__"}
BANNED_OS = {"system", "popen", "execl", "execle", "execlp", "execv", "execve", "execvp", "execvpe",
             "spawnl", "spawnle", "spawnlp", "spawnv", "spawnve", "spawnvp", "spawnvpe", "posix_spawn", "posix_spawnp"}


def _modules():
    for path in sorted(PACKAGE.rglob("*.py")):
        yield path.relative_to(PACKAGE.parent).as_posix(), ast.parse(path.read_text(encoding="utf-8"))


def _dotted(node) -> str:
    """``a.b.c`` of an attribute chain or name ("" for anything else)."""
    parts = []
    while isinstance(node, ast.Attribute):
        parts.append(node.attr)
        node = node.value
    if isinstance(node, ast.Name):
        parts.append(node.id)
        return ".".join(reversed(parts))
    return ""


def _calls(tree):
    return [node for node in ast.walk(tree) if isinstance(node, ast.Call)]


def test_only_the_worker_pipe_uses_pickle():
    found = {}
    for name, tree in _modules():
        for node in ast.walk(tree):
            modules = [alias.name for alias in node.names] if isinstance(node, ast.Import) else \
                [node.module or ""] if isinstance(node, ast.ImportFrom) else []
            if any(module.split(".")[0] in PICKLE_MODULES for module in modules):
                found.setdefault(name, []).append(node.lineno)
        for call in _calls(tree):
            if _dotted(call.func).endswith("read_pickle"):
                found.setdefault(name, []).append(call.lineno)
    assert set(found) == set(PICKLE_ALLOWED), found


def test_numpy_load_never_allows_pickles():
    loads = []
    for name, tree in _modules():
        for call in _calls(tree):
            if _dotted(call.func) in ("np.load", "numpy.load"):
                flags = {keyword.arg: keyword.value for keyword in call.keywords}
                safe = isinstance(flags.get("allow_pickle"), ast.Constant) and flags["allow_pickle"].value is False
                loads.append((name, call.lineno, safe))
    assert loads and all(safe for *_, safe in loads), loads


def test_no_eval_exec_or_dynamic_imports_of_user_text():
    found = []
    for name, tree in _modules():
        for call in _calls(tree):
            dotted = _dotted(call.func)
            if dotted in BANNED_CALLS or dotted in ("builtins.eval", "builtins.exec"):
                found.append((name, call.lineno, dotted))
            if dotted.endswith("import_module") and name not in IMPORT_MODULE_ALLOWED:
                found.append((name, call.lineno, dotted))
    assert not found, found


def test_no_shell_and_subprocess_arguments_are_constants():
    found = []
    for name, tree in _modules():
        for call in _calls(tree):
            dotted = _dotted(call.func)
            if dotted.startswith("os.") and dotted.split(".")[-1] in BANNED_OS:
                found.append((name, call.lineno, dotted))
            if dotted.startswith("subprocess."):
                shell = [k for k in call.keywords if k.arg == "shell" and not (isinstance(k.value, ast.Constant) and k.value.value is False)]
                argv = call.args[0] if call.args else None
                constant = isinstance(argv, (ast.List, ast.Tuple)) and all(
                    isinstance(item, ast.Constant) or _dotted(item) == "sys.executable" for item in argv.elts)
                if shell or not constant:
                    found.append((name, call.lineno, dotted))
    assert not found, found


@pytest.mark.parametrize("name", ["../up", "/abs", "a/b", "a\\b", ".", "..", "with space", "", "x" * 65, "-dash-first", "nul\0"])
def test_campaign_names_that_could_leave_the_output_folder_are_refused(name):
    from calib.spec_problems import SpecError
    from calib.sweep.spec import parse_spec

    raw = {"campaign": {"name": name, "root_seed": 1}, "families": [{"name": "lp-planted", "sizes": [{"rows": 8, "cols": 16}]}],
           "sweep": {"projectors": ["gaussian"], "k": [2]}}
    with pytest.raises(SpecError) as caught:
        parse_spec(raw)
    assert "campaign.name" in str(caught.value)


@pytest.mark.parametrize("name", ["a", "Z9", "covering-small", "run_2026-12-01", "x" * 64])
def test_store_of_a_valid_campaign_name_lies_directly_in_the_output_folder(tmp_path, name):
    from calib.store.resume import store_path

    for number in (1, 2, 17):
        path = store_path(tmp_path, name, number)
        assert path.parent == tmp_path and path.resolve().parent == tmp_path.resolve()


def test_an_explicit_output_path_is_written_exactly_where_the_user_says(tmp_path, monkeypatch, capsys):
    # `--json ../x.json` is the user's own choice: honoured as given, nothing else is written there
    from calib.sweep.runner import run_campaign
    from calib.sweep.spec import parse_spec

    raw = {"campaign": {"name": "paths", "root_seed": 1}, "families": [{"name": "lp-planted", "sizes": [{"rows": 8, "cols": 16}]}],
           "sweep": {"projectors": ["gaussian"], "k": [2, 4]}}
    store = run_campaign(parse_spec(raw), tmp_path / "results", inline=True).store_path
    work = tmp_path / "work" / "here"
    work.mkdir(parents=True)
    monkeypatch.chdir(work)
    assert main(["tables", str(store), "--json", "../table.json"]) == 0
    capsys.readouterr()
    assert (tmp_path / "work" / "table.json").is_file()
    assert sorted(path.name for path in (tmp_path / "work").iterdir()) == ["here", "table.json"]
    assert not [path for path in (tmp_path / "work").iterdir() if path.name.endswith(".part")]
