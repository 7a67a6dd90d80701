"""A fresh clone with nothing but Python passes the README's test command (issue 15, item 1).

These checks read the project's own files: the CI script, the test extra, the README and ``.gitignore``. The
PDF report itself is rendered and read back by the report tests through the ``pdf_tools`` fixture.
"""

import re
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _python_sources(folder):
    return [p for p in folder.rglob("*.py") if "__pycache__" not in p.parts]


def test_ci_script_installs_nothing_from_the_system():
    script = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    commands = [ln.strip() for ln in script.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    for word in ("apt-get", "apt ", "sudo", "dnf", "yum", "brew", "poppler"):
        assert not any(word in c for c in commands), word
    # the README's test command, as the README prints it
    assert 'python -m pip install ".[test]" && python -m pytest' in commands
    assert "export MPLBACKEND=Agg" in commands


def test_the_pdf_reader_of_the_tests_comes_from_the_test_extra():
    project = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]
    extra = " ".join(project["optional-dependencies"]["test"])
    assert "pypdfium2" in extra
    # no test calls a system program to read a PDF (pdftoppm/pdftotext were Debian's poppler-utils)
    for path in _python_sources(ROOT / "tests"):
        text = path.read_text(encoding="utf-8")
        if path.name == Path(__file__).name:
            continue
        for tool in ("pdftoppm", "pdftotext", "shutil.which"):
            assert tool not in text, f"{path.relative_to(ROOT)} uses {tool}"


def test_readme_states_the_python_version_and_the_virtual_environment():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    required = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]["requires-python"]
    version = re.fullmatch(r">=\s*(\d+\.\d+)", required).group(1)
    assert f"Python {version} or newer" in readme
    assert "python3 -m venv" in readme
    assert 'python -m pip install ".[test]" && python -m pytest' in readme


def test_gitignore_keeps_the_demo_output_and_virtual_environments_out():
    ignored = (ROOT / ".gitignore").read_text(encoding="utf-8").split()
    # the demo's default folder, as the command line declares it
    import typer.main

    from flatcheck.cli.main import app

    demo = typer.main.get_command(app).commands["demo"]
    default = str(next(p.default for p in demo.params if "--out" in p.opts))
    assert f"/{default}/" in ignored or f"{default}/" in ignored
    assert ".venv/" in ignored and "venv/" in ignored
