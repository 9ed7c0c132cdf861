"""The public entry points are one import away (``from workers import analyse, ...``), and
``import workers`` itself imports none of the subpackages (they load on first use)."""

import importlib
import subprocess
import sys

import workers


def test_every_public_name_resolves_to_its_definition():
    assert len(workers.__all__) == len(set(workers.__all__)) >= 30
    for name in workers.__all__:
        value = getattr(workers, name)
        module = importlib.import_module(workers._WHERE[name])
        assert value is getattr(module, name), name


def test_unknown_name_is_an_attribute_error():
    try:
        workers.no_such_entry_point
    except AttributeError as exc:
        assert "no_such_entry_point" in str(exc)
    else:
        raise AssertionError("no AttributeError")


def test_import_workers_loads_no_subpackage():
    code = "import sys, workers; print([m for m in sys.modules if m.startswith('workers.')])"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"
