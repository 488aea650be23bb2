"""Rules of the project itself: a plain dsp library, and a README that tells the truth."""

import ast
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
UI_MODULES = {"panel", "holoviews", "bokeh", "param", "explorer"}
GLOBAL_RANDOM = {"seed", "rand", "randn", "randint", "random", "normal", "uniform", "choice", "shuffle",
                 "permutation", "standard_normal"}


def _dsp_sources():
    return sorted((ROOT / "dsp").rglob("*.py"))


def _violations(path: Path):
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    rel = path.relative_to(ROOT)
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.level == 0:
            names = [node.module or ""]
        else:
            names = []
        for name in names:
            if name.split(".")[0] in UI_MODULES:
                yield f"{rel}:{node.lineno}: imports {name}"
        if (isinstance(node, ast.Attribute) and node.attr in GLOBAL_RANDOM
                and isinstance(node.value, ast.Attribute) and node.value.attr == "random"
                and isinstance(node.value.value, ast.Name) and node.value.value.id in ("np", "numpy")):
            yield f"{rel}:{node.lineno}: uses numpy's global random state (np.random.{node.attr})"


def test_dsp_is_a_plain_library():
    problems = [v for path in _dsp_sources() for v in _violations(path)]
    assert not problems, "\n".join(problems)


def test_the_rule_checker_catches_a_violation(tmp_path, monkeypatch):
    bad = ROOT / "dsp" / "_probe_for_rule_test.py"
    bad.write_text("import panel as pn\nimport numpy as np\nx = np.random.randn(3)\n")
    try:
        found = list(_violations(bad))
    finally:
        bad.unlink()
    assert len(found) == 2 and "imports panel" in found[0] and "global random" in found[1]


def _readme_commands():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    quick = text.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```(?:bash|sh)\n(.*?)\n```", quick, flags=re.S)


def test_readme_quick_start_has_exactly_two_commands():
    commands = _readme_commands()
    assert len(commands) == 2, commands
    assert "sigtune serve" in commands[0]
    assert "pytest" in commands[1]


def test_ci_runs_the_readme_test_command_verbatim():
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert _readme_commands()[1] in ci.splitlines()
    assert "set -euo pipefail" in ci


def test_the_public_face_lists_what_it_exports():
    import dsp

    missing = [name for name in dsp.__all__ if not hasattr(dsp, name)]
    assert not missing
    for name in ("Channel", "Recording", "Chain", "read", "write", "SigtuneError", "convert_units"):
        assert name in dsp.__all__


@pytest.mark.parametrize("path", _dsp_sources(), ids=lambda p: str(p.relative_to(ROOT)))
def test_modules_stay_small(path):
    assert len(path.read_text(encoding="utf-8").splitlines()) <= 1000  # STYLE.md item 9


def test_readme_python_snippets_run(capsys):
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```python\n(.*?)\n```", text, flags=re.S)
    assert blocks
    for block in blocks:
        exec(compile(block, "README.md", "exec"), {})
    printed = capsys.readouterr().out
    assert "mm/s ['filter', 'integrate']" in printed
    assert "[612.0, 24.6, 49.2]" in printed  # docs/demo.md: the burst, 1x and 2x running speed


def test_the_catalogue_names_only_what_exists():
    import dsp

    listed = re.findall(r"\b([a-z]+_[a-z_0-9]+|[A-Z][A-Za-z]+[a-z][A-Za-z]*|[A-Z_]{4,})\b", dsp.__doc__)
    known_words = {"ValueError", "Data", "Steps", "Conditioning", "Spectra", "Motion", "Evaluation",
                   "Sessions", "Errors", "It", "The", "Every", "IEC", "FORMATS", "UNITS", "QUANTITIES",
                   "CAUTIONS", "INTEGRATION_PRESETS", "CSV", "TSV", "WAV", "HDF5", "NPZ"}
    missing = [n for n in listed if n not in known_words and not hasattr(dsp, n)
               and n not in ("to_dict", "step_from_dict", "fs_out")]
    assert not missing
    for name in ("FORMATS", "UNITS", "QUANTITIES", "CAUTIONS", "INTEGRATION_PRESETS"):
        assert hasattr(dsp, name)
