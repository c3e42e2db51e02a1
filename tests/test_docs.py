"""The README and DEVELOPERS.md: their commands, their examples, and no stale names."""

import contextlib
import io
import pathlib
import re

import networkx as nx
import pytest

from tnsim.cli import build_parser

ROOT = pathlib.Path(__file__).resolve().parent.parent
README = (ROOT / "README.md").read_text(encoding="utf-8")


def _blocks(text: str, language: str) -> list[str]:
    return re.findall(rf"```{language}\n(.*?)```", text, flags=re.S)


def test_readme_has_two_setup_commands_and_ci_runs_the_second():
    head = README.split("## Use", 1)[0]
    setup = _blocks(head, "bash")
    assert len(setup) == 2
    assert setup[0].strip().endswith("tnsim demo")
    test_command = setup[1].strip()
    for step in ("ruff check .", "ruff format --check .", "mypy", "python -m pytest"):
        assert step in test_command
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8").strip().splitlines()
    assert ci[-1] == test_command


def test_readme_usage_example_runs():
    code = _blocks(README, "python")[0]
    with contextlib.redirect_stdout(io.StringIO()):
        exec(code, {"graph": nx.cycle_graph(6)})  # the example's networkx graph


# Names replaced in this release (see CHANGELOG.md); the changelog names them on purpose.
OLD_NAMES = [
    r"\bTensorNetwork\b",
    r"\bContractionTree\b",
    r"\bslice_and_replan\b",
    r"\bPlanReport\b",
    r"tnsim\.plan\(",
    r"\.to_qasm\(",
    r"\brunconfig\b",
    r"\bcli_queries\b",
    r"\bcost_cli\b",
    r"\bslice_memory_limit\b",
    r"\bmeasure_matmul_rate\b",
    r"objective=\"(flops|time|size|combo)\"",
    r"\"combo\"",
    r"tnsim/(execute|network|queries|sampling|runconfig|bench)\.py",
]


def _texts():
    files = [ROOT / "README.md", ROOT / "DEVELOPERS.md"]
    files += sorted((ROOT / "tnsim").rglob("*.py")) + sorted((ROOT / "benchmarks").glob("*.py"))
    for path in files:
        yield path.relative_to(ROOT).as_posix(), path.read_text(encoding="utf-8")
    parser = build_parser()
    helps = [parser.format_help()]
    sub = next(a for a in parser._actions if a.dest == "command")
    helps += [p.format_help() for p in sub.choices.values()]
    yield "tnsim --help texts", "\n".join(helps)


@pytest.mark.parametrize("pattern", OLD_NAMES)
def test_old_names_are_gone_from_code_docs_and_help(pattern):
    found = [name for name, text in _texts() if re.search(pattern, text)]
    assert found == []
