"""Method registry, parameter schemas and the k-means building block."""

import ast
import pathlib

import numpy as np
import pytest
from sklearn.cluster import KMeans
from sklearn.metrics import adjusted_rand_score

from workspace.errors import ParameterError
from workspace.spectral import METHODS, method_names, validate_params
from workspace.spectral.assign import kmeans
from workspace.spectral.result import canonical_labels

ISSUE_METHODS = {"fiedler", "recursive", "shi-malik", "njw", "regularized", "bethe",
                 "leading-eigenvector", "girvan-newman", "greedy-modularity", "louvain",
                 "label-propagation", "directed-walk"}


def test_registry_lists_every_method_with_schema():
    assert set(method_names()) == ISSUE_METHODS
    for name, info in METHODS.items():
        assert info.name == name and info.summary and "(" in info.reference  # year given
        assert info.family in ("spectral", "baseline")
        for spec in info.params:
            assert spec.type in ("int", "float", "choice", "bool") and spec.help
            # defaults satisfy their own schema
            assert spec.convert(spec.default, name) == spec.default
    assert METHODS["bethe"].supports_auto_k and METHODS["fiedler"].fixed_k == 2
    fiedler = METHODS["fiedler"]
    assert fiedler.param("split").choices == ("sign", "median", "sweep")
    assert fiedler.param("laplacian").choices == ("unnormalized", "sym", "rw")
    assert METHODS["njw"].param("assign").choices == ("kmeans", "discretize")
    assert METHODS["njw"].param("components").choices == ("each", "largest", "error")


def test_validate_params_converts_command_line_strings():
    p = validate_params("fiedler", {"split": "sweep", "extra_eigenvalues": "2", "eig_tol": "1e-8"})
    assert p["split"] == "sweep" and p["extra_eigenvalues"] == 2 and p["eig_tol"] == 1e-8
    assert p["laplacian"] == "sym"                    # default filled in
    p = validate_params("recursive", {"max_conductance": "0.5"})
    assert p["max_conductance"] == 0.5
    with pytest.raises(ParameterError, match="max_conductance.*\\[0, 1\\]"):
        validate_params("recursive", {"max_conductance": "1.5"})
    with pytest.raises(ParameterError, match="n_init.*integer"):
        validate_params("njw", {"n_init": "2.5"})
    with pytest.raises(ParameterError, match="n_init.*boolean"):
        validate_params("njw", {"n_init": True})
    with pytest.raises(ParameterError, match="explicit argument"):
        validate_params("njw", {"seed": 3})
    from workspace.spectral.methods import ParamSpec
    flag = ParamSpec("flag", "bool", False, help="x")
    assert flag.convert("true", "m") is True and flag.convert("off", "m") is False
    with pytest.raises(ParameterError, match="flag.*true or false"):
        flag.convert("maybe", "m")


def test_canonical_labels_first_appearance():
    assert canonical_labels(np.array([5, 5, 2, 9, 2, 0])).tolist() == [0, 0, 1, 2, 1, 3]


def test_kmeans_matches_sklearn_on_separated_blobs():
    # reference: sklearn.cluster.KMeans (Lloyd + k-means++), same data
    rng = np.random.default_rng(0)
    centers = rng.normal(scale=10, size=(6, 4))
    truth = rng.integers(0, 6, 3000)
    X = centers[truth] + rng.normal(size=(3000, 4))
    labels, C, inertia, _ = kmeans(X, 6, seed=1)
    ref = KMeans(6, n_init=10, random_state=0).fit(X)
    assert adjusted_rand_score(ref.labels_, labels) == 1.0
    assert inertia == pytest.approx(ref.inertia_, rel=1e-9)
    assert np.bincount(labels).min() > 0


def test_kmeans_subsampled_restarts_keep_quality():
    rng = np.random.default_rng(1)
    centers = rng.normal(scale=6, size=(8, 8))
    truth = rng.integers(0, 8, 120_000)
    X = centers[truth] + rng.normal(size=(120_000, 8))
    labels, _, inertia, info = kmeans(X, 8, seed=0)
    assert info["sampled"]
    ref = KMeans(8, n_init=3, random_state=0).fit(X)
    assert inertia <= ref.inertia_ * (1 + 1e-6)


def test_spectral_package_imports_only_allowed_modules():
    # house rule (DESIGN.md): spectral imports numpy/scipy/networkx and workspace.errors/domain only
    root = pathlib.Path(__file__).resolve().parents[2] / "workspace" / "spectral"
    allowed = {"numpy", "scipy", "networkx", "workspace", "__future__", "dataclasses", "typing",
               "time", "math", "heapq", "os", "concurrent", "threading", "warnings", "ctypes"}
    for path in root.glob("*.py"):
        for node in ast.walk(ast.parse(path.read_text())):
            names = []
            if isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom) and node.level == 0:
                names = [node.module]
            for name in names:
                assert name.split(".")[0] in allowed, (path.name, name)
                if name.startswith("workspace."):
                    assert name in ("workspace.errors", "workspace.domain"), (path.name, name)


def test_argmin_over_rows_is_numpys():
    # reference: numpy.argmin(D, axis=0) and the minima it points at; ties go to the lowest row
    from workspace.spectral.assign import _argmin_rows

    rng = np.random.default_rng(21)
    for c, n in ((1, 5), (2, 1000), (8, 5000), (13, 777)):
        D = rng.integers(0, 4, (c, n)).astype(np.float64)          # many ties
        D[:, :3] = 2.0                                               # a column of equal values
        arg, best = _argmin_rows(D)
        assert np.array_equal(arg, np.argmin(D, axis=0)) and arg.dtype == np.intp
        assert np.array_equal(best, D[arg, np.arange(n)])
        R = rng.standard_normal((c, n))
        assert np.array_equal(_argmin_rows(R)[0], np.argmin(R, axis=0))
