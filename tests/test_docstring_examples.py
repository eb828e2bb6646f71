"""Every docstring example of the installed package runs and prints what it says.

Outside reference: Python's ``doctest`` (finder and runner of the standard library). The
modules are those of the installed ``slopescreen`` package, found with ``pkgutil`` over
``slopescreen.__path__``, so the test reads the same files whether the package was installed
in place (``pip install -e``) or copied (``pip install .``, as CI does). Warnings raised by an
example are errors here, as everywhere in the suite.
"""

import doctest
import importlib
import pkgutil

import pytest

import slopescreen

# Running ``slopescreen.__main__`` starts the command line; it holds no examples.
SKIPPED = {"slopescreen.__main__"}

# The package holds 186 examples; a count below this floor means modules or docstrings were
# missed (a collection mistake), not that the examples pass. Lower it only when examples are
# removed on purpose.
MIN_EXAMPLES = 180

FLAGS = doctest.NORMALIZE_WHITESPACE


def _module_names():
    walk = pkgutil.walk_packages(slopescreen.__path__, prefix="slopescreen.")
    return sorted({slopescreen.__name__, *(info.name for info in walk)} - SKIPPED)


MODULES = _module_names()


def _doctests(name):
    """The docstrings of module ``name`` (its own objects, not imported ones) that hold examples."""
    module = importlib.import_module(name)
    return [t for t in doctest.DocTestFinder().find(module) if t.examples]


@pytest.mark.parametrize("name", MODULES)
def test_examples_of_module(name):
    runner = doctest.DocTestRunner(optionflags=FLAGS)
    report = []
    for test in _doctests(name):
        runner.run(test, out=report.append)
    result = runner.summarize(verbose=False)
    assert result.failed == 0, "".join(report)


def test_every_module_is_found_and_examples_are_counted():
    assert "slopescreen.terrain" in MODULES and "slopescreen._kernels.storm" in MODULES
    assert len(MODULES) >= 60
    total = sum(len(t.examples) for name in MODULES for t in _doctests(name))
    assert total >= MIN_EXAMPLES
