"""The README's Python runs: every ```python block, in order, in one namespace, in a temporary folder."""

from __future__ import annotations

import ast
import re
import warnings
from pathlib import Path

import pytest

README = Path(__file__).resolve().parents[1] / "README.md"
BLOCK = re.compile(r"^```python\n(.*?)^```", re.DOTALL | re.MULTILINE)


def python_blocks() -> list[str]:
    return BLOCK.findall(README.read_text(encoding="utf-8"))


def test_the_readme_has_python_blocks_to_run():
    blocks = python_blocks()
    assert len(blocks) >= 3  # the fit, the study and the designs
    assert all(block.strip() for block in blocks)


def test_no_block_has_a_placeholder():
    for number, block in enumerate(python_blocks(), start=1):
        tree = ast.parse(block, filename=f"README block {number}")
        ellipses = [node.lineno for node in ast.walk(tree) if isinstance(node, ast.Constant) and node.value is ...]
        assert not ellipses, f"README block {number} has '...' as code on line(s) {ellipses}"


def test_every_python_block_of_the_readme_runs_in_order(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    namespace: dict = {"__name__": "__readme__"}
    for number, block in enumerate(python_blocks(), start=1):
        code = compile(block, f"README.md python block {number}", "exec")
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")  # a warning is shown to a reader, not an error in the docs
                exec(code, namespace)  # noqa: S102 - running the documentation is the point of the test
        except Exception as exc:  # name the block that failed
            pytest.fail(f"README python block {number} raised {type(exc).__name__}: {exc}")
    written = sorted(p.name for p in tmp_path.iterdir())
    assert "cure.study.json" in written and "runs.xlsx" in written  # the blocks did their work here


def test_the_readme_study_block_gives_the_study_it_describes(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    namespace: dict = {"__name__": "__readme__"}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for number, block in enumerate(python_blocks(), start=1):
            exec(compile(block, f"README.md python block {number}", "exec"), namespace)  # noqa: S102
    from levelwise import Study

    study = Study.load(tmp_path / "cure.study.json")
    data = namespace["data"]
    recorded = study.data(apply_exclusions=False)["Impact"]
    assert dict(recorded) == dict(zip(data["run"], data["Impact"]))  # the invented results, by run id
    assert list(study.exclusions["run"]) == [5]


def test_the_readme_jupyterlab_block_builds_the_views_on_the_saved_study(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    namespace: dict = {"__name__": "__readme__"}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for number, block in enumerate(python_blocks(), start=1):
            exec(compile(block, f"README.md python block {number}", "exec"), namespace)  # noqa: S102
    shared = namespace["shared"]
    assert shared.settings["Oven"] == 200
    assert shared.study.title == "Cure study" and 5 in shared.exclusions  # the study saved above, as saved
    assert namespace["sliders"].widget is not None and namespace["inspector"].shared is shared
    assert namespace["own"].factor_names == ["Oven", "Dwell"] and len(namespace["own"].run_ids) == 7
