"""The import graph follows the layers of shared/DESIGN.md: no arrow points upward."""

import ast
from pathlib import Path

import pwsolid

PACKAGE = Path(pwsolid.__file__).parent
LAYERS = {
    0: {"units", "errors", "resources", "_version", "progress", "safe_files",
        "atomic_masses"},
    1: {"eigensolver", "mixing", "occupations", "xc", "eos", "dos", "optimize", "elasticity"},
    2: {"crystal", "symmetry", "kpoints", "basis", "fft", "bandpath",
        "force_constants", "phonon_spectra"},
    3: {"pseudo", "electrostatics", "hamiltonian", "energies", "xc_grid"},  # pseudo/atom.py too
    4: {"scf", "parallel", "settings", "store", "warm_start", "preflight", "forces", "stress"},
    5: {"workflows"},
    6: {"config", "results", "plots", "cli", "commands", "relaxation_keys", "interop",
        "phonon_keys", "elastic_keys"},
}
LAYERS[1].add("thermodynamics")   # harmonic thermodynamics kernels (arrays in, arrays out)
LAYERS[6].add("thermal_keys")     # the [thermal] table of the quasi-harmonic command
LAYER_OF = {name: layer for layer, names in LAYERS.items() for name in names}


def _top(module_path: Path) -> str:
    rel = module_path.relative_to(PACKAGE)
    return rel.parts[0].removesuffix(".py")


def _imports(path: Path):
    tree = ast.parse(path.read_text())
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.level:
            base = path.relative_to(PACKAGE).parts[:-1]
            parts = list(base[: len(base) - (node.level - 1)]) if node.level > 1 else list(base)
            target = parts + (node.module.split(".") if node.module else [])
            if target:
                yield target[0]
            else:
                for alias in node.names:
                    yield alias.name
        elif isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("pwsolid."):
            yield node.module.split(".")[1]


def test_every_module_has_a_layer():
    for path in PACKAGE.rglob("*.py"):
        if path.name == "__init__.py" and path.parent == PACKAGE:
            continue
        assert _top(path) in LAYER_OF, f"{path} is not assigned to a layer"


def test_no_module_imports_from_a_higher_layer():
    bad = []
    for path in PACKAGE.rglob("*.py"):
        if path.name == "__init__.py" and path.parent == PACKAGE:
            continue
        own = LAYER_OF[_top(path)]
        for target in _imports(path):
            if target in LAYER_OF and LAYER_OF[target] > own:
                bad.append(f"{path.relative_to(PACKAGE)} imports {target}")
    assert not bad, bad
