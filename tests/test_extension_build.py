"""The LibreOffice extension as built from the formula specs, checked without LibreOffice.

What LibreOffice itself makes of it is checked live in tests/test_libreoffice_formulas.py.
"""
from __future__ import annotations

import importlib.util
import inspect
import json
import subprocess
import sys
import zipfile

import pytest

from tailstop.commands import main
from tailstop.extension import build, typelib
from tailstop.extension.libreoffice import is_root
from tailstop.sheet import FORMULAS


@pytest.fixture(scope="module")
def oxt(tmp_path_factory):
    return build.build_extension(tmp_path_factory.mktemp("oxt"))


@pytest.fixture(scope="module")
def unpacked(oxt, tmp_path_factory):
    folder = tmp_path_factory.mktemp("unpacked")
    with zipfile.ZipFile(oxt) as archive:
        archive.extractall(folder)
    return folder


@pytest.fixture(scope="module")
def component(unpacked):
    """The add-in file as LibreOffice loads it, imported here without LibreOffice's uno module."""
    spec = importlib.util.spec_from_file_location("tailstop_calc_under_test", unpacked / build.COMPONENT_FILE)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def optional_arguments(function):
    signature = inspect.signature(function.tailstop_body)
    return {name for name, parameter in signature.parameters.items() if parameter.default is None}


def test_type_library_header_follows_the_published_format(unpacked):
    data = (unpacked / build.TYPE_LIBRARY).read_bytes()
    # check value: LibreOffice source, unoidl/README.md ("7 byte magic header UNOIDL\xFF, version byte 0",
    # then the offset and entry count of the root map, little-endian)
    assert data[:8] == b"UNOIDL\xff\x00"
    root, count = int.from_bytes(data[8:12], "little"), int.from_bytes(data[12:16], "little")
    assert count == 1 and 16 <= root < len(data)


def test_every_formula_is_a_method_with_its_arguments_in_order(unpacked):
    name, methods = typelib.read_interface((unpacked / build.TYPE_LIBRARY).read_bytes())
    assert name == build.INTERFACE
    assert [method.name for method in methods] == list(FORMULAS)
    for method, function in zip(methods, FORMULAS.values()):
        spec = function.tailstop_spec
        assert [parameter for parameter, _ in method.parameters] == list(spec.argument_help)
        for parameter, type_name in method.parameters:
            # only an `any` argument may be left out in Calc; ranges and required arguments are arrays
            wanted = "any" if parameter in optional_arguments(function) and parameter not in spec.ranges else "[][]any"
            assert type_name == wanted, (spec.name, parameter)
        assert method.result == ("[][]any" if spec.returns in ("row", "column", "table") else "any")


def test_the_catalogue_carries_every_help_text_of_the_specs(unpacked):
    catalogue = json.loads((unpacked / "formulas.json").read_text(encoding="utf-8"))
    assert [entry["name"] for entry in catalogue["formulas"]] == list(FORMULAS)
    for entry, function in zip(catalogue["formulas"], FORMULAS.values()):
        spec = function.tailstop_spec
        assert entry["summary"] == spec.summary and entry["help"] == spec.argument_help
        assert set(entry["optional"]) == optional_arguments(function)
    assert catalogue["category"] == "tailstop"


def test_the_package_is_declared_and_bundled(oxt):
    with zipfile.ZipFile(oxt) as archive:
        names = set(archive.namelist())
        manifest = archive.read("META-INF/manifest.xml").decode()
    for declared in (build.TYPE_LIBRARY, "tailstop.components"):
        assert f'manifest:full-path="{declared}"' in manifest and declared in names
    assert "pythonpath/tailstop/sheet/__init__.py" in names and "pythonpath/tailstop/core/rule.py" in names
    assert not any(name.startswith(("pythonpath/tailstop/workbooks", "pythonpath/tailstop/commands")) for name in names)


def test_arguments_arrive_as_xlwings_passes_them(component):
    # property: the values pass through unchanged, only their nesting follows xlwings' (a scalar, a 2-D list)
    assert component.to_argument(((3.0,),), is_range=False) == 3.0
    assert component.to_argument(((3.0,),), is_range=True) == [[3.0]]
    assert component.to_argument(((1.0, ""), ("1500+", 2.0)), is_range=True) == [[1.0, ""], ["1500+", 2.0]]
    assert component.to_argument(None, is_range=False) is None


def test_results_leave_as_calc_takes_them(component):
    # property: the values pass through unchanged, only their nesting follows Calc's (tuples of rows)
    assert component.to_result(0.25, "number") == 0.25
    assert component.to_result(None, "text") == ""
    assert component.to_result([0.1, 0.4], "row") == ((0.1, 0.4),)
    assert component.to_result([["a"], ["b"]], "column") == (("a",), ("b",))
    assert component.to_result([["n*", 11], ["coverage", None]], "table") == (("n*", 11), ("coverage", ""))
    # a message from an array formula fills the whole array (Calc repeats a 1×1 result)
    assert component.to_result("#TAILSTOP! accuracy must be > 1", "row") == (("#TAILSTOP! accuracy must be > 1",),)


def test_without_numpy_every_formula_says_what_to_install(unpacked):
    script = (
        "import sys; sys.modules['numpy'] = None\n"
        f"sys.path.insert(0, {str(unpacked / 'pythonpath')!r}); sys.path.insert(0, {str(unpacked)!r})\n"
        "import tailstop_calc as c\n"
        "print(repr(c.call_formula('TAIL_PROB', (((1000.0,),), ((2.0,),), ((400.0,),)))))\n"
        "print(repr(c.call_formula('PLAN_SUMMARY_FROM_P', (((0.3,),), ((2.0,),), ((0.9,),), ((5.0,),)))))\n"
    )
    done = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=120)
    scalar, table = [eval(line) for line in done.stdout.splitlines()]  # noqa: S307 - our own repr output
    assert scalar.startswith("#TAILSTOP! LibreOffice's Python") and "cannot import numpy" in scalar
    assert "apt install python3-numpy python3-scipy" in scalar
    assert table == ((scalar,),)


def test_build_command_writes_the_extension(tmp_path, capsys):
    assert main(["extension", "build", "--out", str(tmp_path)]) == 0
    assert (tmp_path / build.EXTENSION_NAME).is_file()
    assert str(tmp_path / build.EXTENSION_NAME) in capsys.readouterr().out


@pytest.mark.skipif(not is_root(), reason="the refusal concerns root only")
def test_install_as_root_says_what_to_do(capsys):
    assert main(["extension", "install"]) == 1
    message = capsys.readouterr().err
    assert "--shared" in message and "as the user who runs LibreOffice" in message


def test_the_missing_package_is_named_also_through_libreoffices_import_hook(component):
    # the text LibreOffice's uno.py puts in place of a failed `from x import y` (python3-uno, Debian 12)
    replaced = ImportError("No module named 'scipy' (or 'estimate.TAIL_PROB' is unknown)")
    assert "cannot import scipy:" in component.import_problem(replaced)
    assert "cannot import numpy:" in component.import_problem(ModuleNotFoundError("x", name="numpy.linalg"))


def test_an_optional_zero_the_formula_refuses_counts_as_left_empty(component):
    spec = {"arguments": ["threshold", "check_every", "seed"], "optional": ["check_every", "seed"]}

    def formula(threshold, check_every=None, seed=None):
        if check_every is not None and check_every < 1:
            return f"#TAILSTOP! check_every must be at least 1 (got {check_every:g})"
        return (threshold, check_every, seed)

    # property: an optional 0 the formula refuses counts as left empty (Calc passes a blank as 0); others stay
    assert component._evaluate(formula, spec, [5.0, 0.0, 0.0]) == (5.0, None, None)
    assert component._evaluate(formula, spec, [5.0, 2.0, 0.0]) == (5.0, 2.0, 0.0)  # an accepted 0 stays
    assert component._evaluate(formula, spec, [5.0, -1.0, None]).startswith("#TAILSTOP! check_every")
