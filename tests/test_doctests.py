"""Run the examples in every docstring of the installed package, under the modules' real names.

The examples are imported as ``lowgmap.*`` (never through the source folders, so no module is loaded
twice) and run with the standard library's doctest runner, one test per module.
"""
import doctest
import importlib
import pkgutil

import pytest

import lowgmap

#: modules whose import needs an optional extra
OPTIONAL = {"lowgmap.__main__"}


def _modules() -> list[str]:
    names = ["lowgmap"]
    for info in pkgutil.walk_packages(lowgmap.__path__, "lowgmap."):
        names.append(info.name)
    for sub in ("physics", "app"):
        pkg = importlib.import_module(f"lowgmap.{sub}")
        names.append(pkg.__name__)
        names += [i.name for i in pkgutil.walk_packages(pkg.__path__, f"{pkg.__name__}.")]
    return sorted(set(names) - OPTIONAL)


MODULES = _modules()


def test_every_source_folder_is_walked():
    # catches a walker that stops at the top package (the folders are mapped separately)
    assert "lowgmap.physics.chart.margins" in MODULES and "lowgmap.app.files.casefile" in MODULES
    assert "lowgmap.app.dashboard.state" in MODULES


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    module = importlib.import_module(name)
    finder = doctest.DocTestFinder(exclude_empty=True)
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    out = []
    for test in finder.find(module, name):
        runner.run(test, out=out.append)
    result = runner.summarize(verbose=False)
    assert result.failed == 0, "".join(out)


def test_examples_are_found():
    # catches a finder that silently finds nothing (e.g. a wrong module name passed to it)
    finder = doctest.DocTestFinder(exclude_empty=True)
    count = sum(len(t.examples) for name in MODULES for t in finder.find(importlib.import_module(name), name))
    assert count > 300
