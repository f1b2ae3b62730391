"""Package layout: imports run only downward through the layers (and through the
sub-layers of inference/), no module imports itself in a circle, modules stay under
400 lines and functions fit on a screen (the layer tables and the limits are the
contributor guide's, DEVELOPERS.md "Package map"; common practice, no source).

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
    "api": 6.5,
    "bench": 7,
    "cli": 8,
}
# The top-level ventsource/__init__.py is the public API: it loads its names lazily
# from api/ (which uses inference, forward and workflow): above workflow, below bench.
TOP_LEVEL_LAYER = LAYERS["api"]
# `from ventsource import __version__` reads a constant the top level sets before any
# import of its own; it counts as common.
VERSION_IMPORT = "ventsource.__version__"
# Inside a layer with sub-layers, a module may import only from its own sub-layer or
# below (the first name under the layer's package; a module directly in the package
# is named by its own name).
SUBLAYERS = {
    "inference": {"priors": 0, "likelihood": 1, "option_rules": 1, "information": 1, "evidence": 2,
                  "engines": 3, "hypotheses": 4, "calibration_flag": 4, "sulfur_flags": 4, "row": 5,
                  "window": 6, "segments": 7},
}

MAX_MODULE_LINES = 400

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
    """(layer, sub-layer) of the dotted module name `name` ("ventsource" itself: the top
    level; the version constant: common)."""
    if name == VERSION_IMPORT:
        return (LAYERS["common"], 0)
    parts = name.split(".")
    if len(parts) == 1:
        return (TOP_LEVEL_LAYER, 0)
    if parts[1] not in LAYERS:
        raise UnknownSubpackage(
            f"{where}: 'ventsource.{parts[1]}' is not in the layer table of tests/test_layers.py; "
            f"add it to LAYERS (and to the package map in DEVELOPERS.md) at the layer it belongs to")
    subs = SUBLAYERS.get(parts[1])
    if subs is None or len(parts) == 2:
        return (LAYERS[parts[1]], 0)
    if parts[2] not in subs:
        raise UnknownSubpackage(
            f"{where}: 'ventsource.{parts[1]}.{parts[2]}' is not in the sub-layer table of "
            f"tests/test_layers.py; add it to SUBLAYERS['{parts[1]}'] (and to DEVELOPERS.md)")
    return (LAYERS[parts[1]], subs[parts[2]])


def _layer_text(layer):
    top, sub = layer
    return f"layer {top:g}" + (f".{sub}" if sub else "")


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
                # `from ventsource import x`: x may be a subpackage, or the version constant
                found += [(node.lineno, f"ventsource.{a.name}" if a.name in LAYERS or a.name == "__version__"
                           else "ventsource") for a in node.names]
            elif base.startswith("ventsource."):
                # `from ventsource.pkg import mod`: mod may be a module of that package
                found += [(node.lineno, f"{base}.{a.name}" if _is_module(f"{base}.{a.name}") else base)
                          for a in node.names]
            else:
                found.append((node.lineno, base))
    return [(line, name) for line, name in found if name == "ventsource" or name.startswith("ventsource.")]


def _is_module(dotted):
    """True when the dotted name is a module or package file under SRC."""
    rel = pathlib.Path(*dotted.split("."))
    return (SRC / rel).with_suffix(".py").is_file() or (SRC / rel / "__init__.py").is_file()


def layer_violations(source, path):
    """Messages for every import in `source` (the text of file `path`) from a higher layer."""
    own = module_name(path)
    tree = ast.parse(source, filename=str(path))
    own_layer = layer_of(own, path)
    bad = []
    for line, name in imported_modules(tree, own, path.name == "__init__.py"):
        target = layer_of(name, f"{path}:{line}")
        upward = target[0] > own_layer[0] or (target[0] == own_layer[0] and target[1] > own_layer[1])
        if upward:
            bad.append(f"{path.relative_to(SRC)}:{line}: {own} ({_layer_text(own_layer)}) imports {name} "
                       f"({_layer_text(target)})")
    return bad


def import_graph(sources):
    """{module: set of ventsource modules it imports} from {path: source text}; the version
    constant is no edge (it is set before the top level imports anything)."""
    graph = {}
    for path, source in sources.items():
        own = module_name(path)
        tree = ast.parse(source, filename=str(path))
        graph[own] = {name for _, name in imported_modules(tree, own, path.name == "__init__.py")
                      if name != VERSION_IMPORT and name != own}
    return graph


def import_circles(graph):
    """Every strongly connected set of two or more modules (Tarjan 1972, SIAM J. Comput. 1:146),
    each as a sorted list; modules outside the graph are leaves."""
    index, low, stack, on_stack, circles = {}, {}, [], set(), []

    def visit(v):  # iterative depth-first search: no recursion limit on deep packages
        work = [(v, iter(sorted(graph.get(v, ()))))]
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is None:
                work.pop()
                if work:
                    low[work[-1][0]] = min(low[work[-1][0]], low[node])
                if low[node] == index[node]:
                    group = []
                    while True:
                        w = stack.pop()
                        on_stack.discard(w)
                        group.append(w)
                        if w == node:
                            break
                    if len(group) > 1:
                        circles.append(sorted(group))
            elif child not in index:
                index[child] = low[child] = len(index)
                stack.append(child)
                on_stack.add(child)
                work.append((child, iter(sorted(graph.get(child, ())))))
            elif child in on_stack:
                low[node] = min(low[node], index[child])

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return sorted(circles)


def module_lines_outside_kernels(source, kernel_decorators):
    """Lines of a module minus those of its numba kernels."""
    kernel_lines = 0
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            decorators = {ast.unparse(d.func if isinstance(d, ast.Call) else d) for d in node.decorator_list}
            if decorators & kernel_decorators:
                first = min([node.lineno] + [d.lineno for d in node.decorator_list])
                kernel_lines += node.end_lineno - first + 1
    return len(source.splitlines()) - kernel_lines


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
    assert len(layer_violations("import ventsource\n", PACKAGE / "workflow" / "x.py")) == 1
    assert layer_violations("import ventsource\n", PACKAGE / "bench" / "x.py") == []
    assert layer_violations("from ventsource import __version__\n", PACKAGE / "workflow" / "x.py") == []
    with pytest.raises(UnknownSubpackage, match="'ventsource.plotting' is not in the layer table"):
        layer_violations("from ventsource.plotting import draw\n", chem)
    with pytest.raises(UnknownSubpackage, match="'ventsource.plotting' is not in the layer table"):
        layer_violations("x = 1\n", PACKAGE / "plotting" / "draw.py")


def test_sublayers_of_inference_run_downward():
    """The checker sees an import from a higher sub-layer of inference, lazy or not."""
    hyp = PACKAGE / "inference" / "hypotheses" / "made_up.py"
    assert len(layer_violations("def f():\n    from ventsource.inference.row import one_measurement\n", hyp)) == 1
    assert len(layer_violations("from ventsource.inference.window.target import WindowTarget\n", hyp)) == 1
    assert layer_violations("from ventsource.inference.priors import load_prior_file\n"
                            "from ventsource.inference.likelihood import Measurement\n", hyp) == []
    row = PACKAGE / "inference" / "row" / "made_up.py"
    assert layer_violations("from ventsource.inference.hypotheses.model_choice import model_flags\n", row) == []
    with pytest.raises(UnknownSubpackage, match="'ventsource.inference.extras' is not in the sub-layer table"):
        layer_violations("from ventsource.inference.extras import x\n", row)


def all_sources():
    return {path: path.read_text() for path in all_modules()}


def test_no_import_circles():
    circles = import_circles(import_graph(all_sources()))
    assert not circles, "import circles (each set imports itself round about):\n" + "\n".join(
        " <-> ".join(c) for c in circles)


def test_the_circle_check_can_fail():
    """Three made-up modules in a ring, one import lazy, one `from package import module`."""
    base = PACKAGE / "workflow"
    sources = {base / "series.py": "from ventsource.workflow.windows import x\n",
               base / "windows.py": "def f():\n    from ventsource.workflow import figures\n",
               base / "figures.py": "import ventsource.workflow.series\n",
               base / "compare.py": "from ventsource.workflow.series import y\n"}
    assert import_circles(import_graph(sources)) == [
        ["ventsource.workflow.figures", "ventsource.workflow.series", "ventsource.workflow.windows"]]
    # the version constant is no edge; the top level importing a module is one
    sources = {PACKAGE / "__init__.py": "def f():\n    from ventsource.workflow import series\n",
               base / "series.py": "from ventsource import __version__\n"}
    assert import_circles(import_graph(sources)) == []
    sources[base / "series.py"] = "import ventsource\n"
    assert import_circles(import_graph(sources)) == [["ventsource", "ventsource.workflow.series"]]


def test_modules_stay_under_the_limit():
    kernels = numba_decorator_names()
    too_long = [(str(path.relative_to(SRC)), n) for path in all_modules()
                if (n := module_lines_outside_kernels(path.read_text(), kernels)) > MAX_MODULE_LINES]
    assert not too_long, f"modules over {MAX_MODULE_LINES} lines outside numba kernels: {too_long}"


def test_the_module_length_check_can_fail():
    body = "".join(f"x{i} = {i}\n" for i in range(401))
    assert module_lines_outside_kernels(body, {"njit"}) == 401
    kernel = "@njit(cache=True)\ndef k():\n" + "".join(f"    y{i} = {i}\n" for i in range(100))
    assert module_lines_outside_kernels(body[:-len("x400 = 400\n")] + kernel, {"njit"}) == 400


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
