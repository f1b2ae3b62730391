"""Package layout: imports run only downward through the layers, and functions
fit on a screen (the layer table and the 60-line limit are the contributor
guide's, DEVELOPERS.md "Package map").

Both checks read the source with `ast` (nothing is imported), so they see
imports inside functions as well as at module level.
"""
import ast
import pathlib

import pytest

SRC = pathlib.Path(__file__).resolve().parents[1] / "src"
PACKAGE = SRC / "ventsource"

# Layer of each subpackage; a module may import only from its own layer or below.
LAYERS = {
    "common": 0,
    "chemistry": 1,
    "magma": 2,
    "ascent": 3,
    "forward": 4,
    "inference": 5,
    "workflow": 6,
    "bench": 7,
    "cli": 8,
}
# The top-level ventsource/__init__.py imports the inference lazily (infer()).
TOP_LEVEL_LAYER = LAYERS["inference"]

MAX_FUNCTION_LINES = 60
# Every module is held to the limit except these named functions (path under
# src/ventsource, function name) -> why; DEVELOPERS.md, "Package map", lists them too.
LENGTH_EXCEPTIONS = {}
# numba decorators whose kernels may run long (speed over screen size)
NUMBA_DECORATORS = {"njit", "jit", "numba.njit", "numba.jit"}


class UnknownSubpackage(Exception):
    pass


def module_name(path):
    """Dotted module name of a file under SRC (a package's __init__ is the package)."""
    parts = list(path.relative_to(SRC).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def layer_of(name, where):
    """Layer of the dotted module name `name` ("ventsource" itself: the top level)."""
    parts = name.split(".")
    if len(parts) == 1:
        return TOP_LEVEL_LAYER
    if parts[1] not in LAYERS:
        raise UnknownSubpackage(
            f"{where}: 'ventsource.{parts[1]}' is not in the layer table of tests/test_layers.py; "
            f"add it to LAYERS (and to the package map in DEVELOPERS.md) at the layer it belongs to")
    return LAYERS[parts[1]]


def imported_modules(tree, own_name, is_package):
    """(line, dotted name) of every ventsource module imported anywhere in the tree;
    relative imports are resolved against own_name."""
    package = own_name if is_package else own_name.rpartition(".")[0]
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(node.lineno, a.name) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                anchor = package.split(".")[:len(package.split(".")) - (node.level - 1)]
                base = ".".join(anchor + ([base] if base else []))
            if base == "ventsource":
                # `from ventsource import x`: x may be a subpackage
                found += [(node.lineno, f"ventsource.{a.name}" if a.name in LAYERS else "ventsource")
                          for a in node.names]
            else:
                found.append((node.lineno, base))
    return [(line, name) for line, name in found if name == "ventsource" or name.startswith("ventsource.")]


def layer_violations(source, path):
    """Messages for every import in `source` (the text of file `path`) from a higher layer."""
    own = module_name(path)
    tree = ast.parse(source, filename=str(path))
    own_layer = layer_of(own, path)
    bad = []
    for line, name in imported_modules(tree, own, path.name == "__init__.py"):
        target = layer_of(name, f"{path}:{line}")
        if target > own_layer:
            bad.append(f"{path.relative_to(SRC)}:{line}: {own} (layer {own_layer}) imports {name} "
                       f"(layer {target})")
    return bad


def numba_decorator_names():
    """Names bound at module level to a numba decorator (e.g. `_kernel = njit(...)`)."""
    names = set(NUMBA_DECORATORS)
    for path in PACKAGE.rglob("*.py"):
        for node in ast.parse(path.read_text()).body:
            if (isinstance(node, ast.Assign) and isinstance(node.value, ast.Call)
                    and ast.unparse(node.value.func) in NUMBA_DECORATORS):
                names.update(t.id for t in node.targets if isinstance(t, ast.Name))
    return names


def long_functions(source, path, kernel_decorators, limit=MAX_FUNCTION_LINES, exceptions=()):
    """(name, lines) of functions and methods longer than `limit` lines that are neither
    numba kernels nor named in `exceptions` ((path under the package, name) pairs)."""
    out = []
    where = path.relative_to(PACKAGE).as_posix()
    for node in ast.walk(ast.parse(source, filename=str(path))):
        if not isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            continue
        decorators = {ast.unparse(d.func if isinstance(d, ast.Call) else d) for d in node.decorator_list}
        n_lines = node.end_lineno - node.lineno + 1
        if n_lines > limit and not decorators & kernel_decorators and (where, node.name) not in exceptions:
            out.append((f"{path.relative_to(SRC)}:{node.lineno} {node.name}", n_lines))
    return out


def function_names(source):
    return {node.name for node in ast.walk(ast.parse(source))
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef))}


def all_modules():
    return sorted(PACKAGE.rglob("*.py"))


def test_every_subpackage_has_a_layer():
    subpackages = {p.name for p in PACKAGE.iterdir() if p.is_dir() and (p / "__init__.py").exists()}
    top_modules = {p.stem for p in PACKAGE.glob("*.py")} - {"__init__"}
    unknown = sorted((subpackages | top_modules) - set(LAYERS))
    assert not unknown, (f"ventsource.{', ventsource.'.join(unknown)} not in the layer table of "
                         f"tests/test_layers.py: add each to LAYERS at the layer it belongs to")


def test_imports_run_only_downward():
    bad = []
    for path in all_modules():
        bad += layer_violations(path.read_text(), path)
    assert not bad, "imports from a higher layer:\n" + "\n".join(bad)


def test_the_checker_sees_upward_relative_unknown_and_lazy_imports():
    """The checks above can fail: feed them made-up modules."""
    chem = PACKAGE / "chemistry" / "made_up.py"
    lazy_upward = "def f():\n    from ventsource.inference.priors import load_prior_file\n"
    assert layer_violations(lazy_upward, chem) == [
        "ventsource/chemistry/made_up.py:2: ventsource.chemistry.made_up (layer 1) imports "
        "ventsource.inference.priors (layer 5)"]
    assert len(layer_violations("from ventsource import magma\nimport ventsource.cli.main\n", chem)) == 2
    assert layer_violations("from ..common import caution\nfrom . import species\n", chem) == []
    assert len(layer_violations("from ..forward import model\n", chem)) == 1
    # the top level counts as the inference layer
    assert len(layer_violations("import ventsource\n", chem)) == 1
    assert layer_violations("from ventsource import __version__\n", PACKAGE / "workflow" / "x.py") == []
    with pytest.raises(UnknownSubpackage, match="'ventsource.plotting' is not in the layer table"):
        layer_violations("from ventsource.plotting import draw\n", chem)
    with pytest.raises(UnknownSubpackage, match="'ventsource.plotting' is not in the layer table"):
        layer_violations("x = 1\n", PACKAGE / "plotting" / "draw.py")


def test_functions_fit_on_a_screen():
    kernels = numba_decorator_names()
    assert "_kernel" in kernels  # the degassing kernels' decorator is recognised
    too_long = []
    for path in all_modules():
        too_long += long_functions(path.read_text(), path, kernels, exceptions=LENGTH_EXCEPTIONS)
    assert not too_long, f"functions over {MAX_FUNCTION_LINES} lines outside numba kernels: {too_long}"


def test_every_length_exception_names_an_existing_function():
    # a renamed or removed function must leave the list, or the exception would go stale
    missing = [f"{where} {name}" for where, name in LENGTH_EXCEPTIONS
               if not (PACKAGE / where).is_file() or name not in function_names((PACKAGE / where).read_text())]
    assert not missing, f"LENGTH_EXCEPTIONS names functions that do not exist: {missing}"


def test_the_length_check_can_fail():
    body = "".join(f"    x{i} = {i}\n" for i in range(61))
    path = PACKAGE / "magma" / "made_up.py"
    kernels = {"njit", "_kernel"}
    assert long_functions("def f():\n" + body, path, kernels) == [("ventsource/magma/made_up.py:1 f", 62)]
    assert long_functions("@_kernel\ndef f():\n" + body, path, kernels) == []
    assert long_functions("@njit(cache=True)\ndef f():\n" + body, path, kernels) == []
    # an exception covers only its own function in its own file
    exceptions = {("magma/made_up.py", "f")}
    assert long_functions("def f():\n" + body, path, kernels, exceptions=exceptions) == []
    assert long_functions("def g():\n" + body, path, kernels, exceptions=exceptions) == [
        ("ventsource/magma/made_up.py:1 g", 62)]
    assert long_functions("def f():\n" + body, PACKAGE / "cli" / "made_up.py", kernels,
                          exceptions=exceptions) == [("ventsource/cli/made_up.py:1 f", 62)]
