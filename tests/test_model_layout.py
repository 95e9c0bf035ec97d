"""The layout of levelwise.model: private modules by role, public names re-exported, no name shadowed."""

import importlib
import inspect
import pkgutil
import types
from pathlib import Path

import levelwise
import levelwise.model


def _model_modules():
    return [info.name for info in pkgutil.iter_modules(levelwise.model.__path__, "levelwise.model.")]


def test_public_names_come_from_the_package_and_from_levelwise():
    for name in ("fit", "Fit", "predict", "slice_grid", "PredictionEngine",
                 "parse_model", "reduce", "refit", "optimize", "Goal", "box_cox", "effects", "lenth"):
        assert getattr(levelwise, name) is getattr(levelwise.model, name), name
    assert inspect.isfunction(levelwise.fit) and inspect.isclass(levelwise.Fit)


def test_no_function_shadows_its_module():
    # `import levelwise.model._fit as m` must give the module, and every module is private (_name).
    for name in _model_modules():
        short = name.rsplit(".", 1)[1]
        assert short.startswith("_"), name
        module = importlib.import_module(name)
        assert isinstance(module, types.ModuleType)
        assert getattr(levelwise.model, short) is module  # the attribute is the module, not a function
    for old in ("fit", "formula", "prediction", "surface", "anova", "diagnostics", "boxcox", "optimize",
                "reduce", "effects"):
        attribute = getattr(levelwise, old, None)
        assert not isinstance(attribute, types.ModuleType), f"levelwise.{old} is still a module"


def test_no_model_module_is_too_long():
    # House rule: about 400 lines, never over 600.
    for path in Path(levelwise.model.__file__).parent.glob("*.py"):
        lines = len(path.read_text(encoding="utf-8").splitlines())
        assert lines <= 600, f"{path.name} has {lines} lines"
