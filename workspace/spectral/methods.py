"""Method registry and parameter schemas.

One table (:data:`METHODS`) declares, for every method id a user can type,
its parameters with type, default, range and help text. The command line
help, the TUI form and saved parameter sets all read this table, and
:func:`validate_params` is the one place where parameters are checked and
defaults filled in. ``k`` and ``seed`` are explicit arguments of
:func:`workspace.spectral.partition`, not schema entries.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from workspace.errors import ParameterError

__all__ = ["ParamSpec", "MethodInfo", "METHODS", "validate_params", "method_names",
           "GIRVAN_NEWMAN_MAX_NODES", "GIRVAN_NEWMAN_MAX_EDGES"]

#: Girvan–Newman recomputes all edge betweenness after every removal,
#: O(m^2 n) overall; above these sizes it is refused (minutes to hours).
GIRVAN_NEWMAN_MAX_NODES = 1000
GIRVAN_NEWMAN_MAX_EDGES = 3000


@dataclass(frozen=True)
class ParamSpec:
    """One parameter of a method.

    Attributes
    ----------
    name : str
    type : {"int", "float", "choice", "bool"}
    default : int, float, str or bool
    minimum, maximum : float or None
        Inclusive bounds for "int" and "float".
    choices : tuple of str or None
        Allowed values for "choice".
    help : str
        One line for command-line help and form tooltips.
    """

    name: str
    type: str
    default: Any
    minimum: float | None = None
    maximum: float | None = None
    choices: tuple[str, ...] | None = None
    help: str = ""

    def allowed(self) -> str:
        """Human-readable description of the allowed values."""
        if self.type == "choice":
            return "one of " + ", ".join(self.choices or ())
        if self.type == "bool":
            return "true or false"
        lo = "-inf" if self.minimum is None else f"{self.minimum:g}"
        hi = "inf" if self.maximum is None else f"{self.maximum:g}"
        return f"{'an integer' if self.type == 'int' else 'a number'} in [{lo}, {hi}]"

    def convert(self, value: Any, method: str) -> Any:
        """Check and convert one value (strings from a command line accepted).

        Raises
        ------
        workspace.errors.ParameterError
            Naming the method, the key and the allowed values.
        """
        def bad(why: str) -> ParameterError:
            return ParameterError(f"{method}: parameter {self.name}={value!r} {why}; "
                                  f"allowed: {self.allowed()}")

        if self.type == "bool":
            if isinstance(value, bool):
                return value
            if isinstance(value, str) and value.strip().lower() in _TRUE | _FALSE:
                return value.strip().lower() in _TRUE
            if isinstance(value, int) and value in (0, 1):
                return bool(value)
            raise bad("is not a boolean")
        if self.type == "choice":
            if isinstance(value, str) and value.strip() in (self.choices or ()):
                return value.strip()
            raise bad("is not a known choice")
        if isinstance(value, bool):
            raise bad("is a boolean, not a number")
        if self.type == "int":
            if isinstance(value, str):
                try:
                    value_c = int(value.strip())
                except ValueError:
                    raise bad("is not an integer") from None
            elif isinstance(value, int):
                value_c = int(value)
            elif isinstance(value, float) and value.is_integer():
                value_c = int(value)
            elif hasattr(value, "dtype") and getattr(value.dtype, "kind", "") in "iu":
                value_c = int(value)
            else:
                raise bad("is not an integer")
        else:
            if isinstance(value, str):
                try:
                    value_c = float(value.strip())
                except ValueError:
                    raise bad("is not a number") from None
            else:
                try:
                    value_c = float(value)
                except (TypeError, ValueError):
                    raise bad("is not a number") from None
            if not math.isfinite(value_c):
                raise bad("is not finite")
        if self.minimum is not None and value_c < self.minimum:
            raise bad("is out of range")
        if self.maximum is not None and value_c > self.maximum:
            raise bad("is out of range")
        return value_c


_TRUE = {"true", "yes", "on", "1"}
_FALSE = {"false", "no", "off", "0"}


@dataclass(frozen=True)
class MethodInfo:
    """Registry entry of one method.

    Attributes
    ----------
    name : str
        The id users type (``"njw"``, ``"fiedler"`` ...).
    summary : str
        One line.
    reference : str
        Publication with year.
    family : {"spectral", "baseline"}
    supports_auto_k : bool
        Whether ``k="auto"`` is accepted.
    default_k : int or "auto" or None
        What ``k=None`` means.
    fixed_k : int or None
        The only k the method can produce (``fiedler``: 2), if any.
    accepts_k : bool
        Whether an explicit integer k is accepted.
    params : tuple of ParamSpec
    directed : bool
        Made for directed graphs (uses the direction of arcs); every other
        method runs on the symmetrised graph of a directed input.
    """

    name: str
    summary: str
    reference: str
    family: str
    supports_auto_k: bool
    default_k: int | str | None
    params: tuple[ParamSpec, ...] = field(default_factory=tuple)
    fixed_k: int | None = None
    accepts_k: bool = True
    directed: bool = False

    def param(self, name: str) -> ParamSpec:
        for p in self.params:
            if p.name == name:
                return p
        raise KeyError(name)


# --- shared parameter groups -------------------------------------------------

def _components() -> ParamSpec:
    return ParamSpec("components", "choice", "each", choices=("each", "largest", "error"),
                     help="disconnected graphs: partition each component in its own right, "
                          "only the largest, or refuse")


def _solver() -> tuple[ParamSpec, ...]:
    return (
        ParamSpec("dense_threshold", "int", 1000, minimum=0, maximum=20000,
                  help="components with at most this many nodes use dense eigh"),
        ParamSpec("eig_tol", "float", 1e-6, minimum=0.0, maximum=0.1,
                  help="relative eigen-residual tolerance of the iterative solvers (0 = machine precision)"),
        ParamSpec("max_matvecs", "int", 50000, minimum=10, maximum=10_000_000,
                  help="limit on operator applications per eigenproblem"),
        ParamSpec("time_limit_s", "float", 0.0, minimum=0.0, maximum=1e6,
                  help="wall-time limit per eigenproblem in seconds (0 = none)"),
        ParamSpec("extra_eigenvalues", "int", 1, minimum=1, maximum=100,
                  help="eigenvalues computed beyond those needed (eigengap suggestion, tie warning)"),
        ParamSpec("tie_tol", "float", 1e-5, minimum=0.0, maximum=0.5,
                  help="relative gap below which eigenvalues at the cut-off count as equal"),
        ParamSpec("threads", "int", 0, minimum=0, maximum=256,
                  help="threads for the sparse products (0 = automatic: every available CPU from "
                       "100k nodes, one below); results do not depend on it"),
    )


def _assignment() -> tuple[ParamSpec, ...]:
    return (
        ParamSpec("assign", "choice", "kmeans", choices=("kmeans", "discretize"),
                  help="k-way assignment: k-means++ with restarts, or Yu-Shi discretisation"),
        ParamSpec("n_init", "int", 10, minimum=1, maximum=1000,
                  help="k-means restarts (best inertia kept)"),
        ParamSpec("kmeans_max_iter", "int", 300, minimum=1, maximum=100000,
                  help="Lloyd iterations per k-means restart"),
        ParamSpec("k_max", "int", 10, minimum=2, maximum=100,
                  help="largest k considered when k='auto' (eigengap)"),
    )


def _bisection() -> tuple[ParamSpec, ...]:
    return (
        ParamSpec("laplacian", "choice", "sym", choices=("unnormalized", "sym", "rw"),
                  help="L = D - A, L_sym = I - D^-1/2 A D^-1/2, or L_rw = I - D^-1 A"),
        ParamSpec("split", "choice", "sweep", choices=("sign", "median", "sweep"),
                  help="cut the Fiedler vector at 0, at its median, or at the best sweep prefix"),
        ParamSpec("objective", "choice", "ncut", choices=("ncut", "conductance"),
                  help="what the sweep minimises"),
    )


_SPECTRAL_TAIL = (_components(),) + _solver()

METHODS: dict[str, MethodInfo] = {}


def _register(info: MethodInfo) -> None:
    names = [p.name for p in info.params]
    assert len(names) == len(set(names)), info.name
    METHODS[info.name] = info


_register(MethodInfo(
    "fiedler", "bisection by the second-smallest Laplacian eigenvector",
    "Fiedler (1973), Algebraic connectivity of graphs; Chung (1997), Spectral Graph Theory",
    "spectral", False, 2, _bisection() + _SPECTRAL_TAIL, fixed_k=2))

_register(MethodInfo(
    "recursive", "recursive Fiedler bisection until k parts or no good cut remains",
    "Spielman & Teng (1996), Spectral partitioning works; Kannan, Vempala & Vetta (2004), "
    "On clusterings: good, bad and spectral",
    "spectral", True, "auto",
    _bisection() + (
        ParamSpec("max_conductance", "float", 0.2, minimum=0.0, maximum=1.0,
                  help="a part is split only if its best cut has conductance below this"),
        ParamSpec("min_size", "int", 2, minimum=1, maximum=10**9,
                  help="both sides of every split keep at least this many nodes"),
        ParamSpec("max_parts", "int", 64, minimum=2, maximum=100000,
                  help="upper bound on the number of parts when k='auto'"),
    ) + _SPECTRAL_TAIL))

_register(MethodInfo(
    "shi-malik", "k-way on generalised eigenvectors L u = lambda D u",
    "Shi & Malik (2000), Normalized cuts and image segmentation, IEEE TPAMI 22(8)",
    "spectral", True, 2, _assignment() + _SPECTRAL_TAIL))

_register(MethodInfo(
    "njw", "k-way on row-normalised leading eigenvectors of D^-1/2 A D^-1/2",
    "Ng, Jordan & Weiss (2001), On spectral clustering: analysis and an algorithm, NIPS 14",
    "spectral", True, 2, _assignment() + _SPECTRAL_TAIL))

_register(MethodInfo(
    "regularized", "k-way on D_tau^-1/2 A D_tau^-1/2 with D_tau = D + tau I",
    "Qin & Rohe (2013), Regularized spectral clustering under the degree-corrected "
    "stochastic blockmodel, NIPS 26",
    "spectral", True, 2, (
        ParamSpec("tau", "float", -1.0, minimum=-1.0, maximum=1e12,
                  help="regulariser added to every degree; -1 = mean degree"),
    ) + _assignment() + _SPECTRAL_TAIL))

_register(MethodInfo(
    "bethe", "k-way on negative eigenvectors of the Bethe Hessian (r^2-1)I - rA + D",
    "Saade, Krzakala & Zdeborová (2014), Spectral clustering of graphs with the Bethe "
    "Hessian, NIPS 27",
    "spectral", True, "auto", (
        ParamSpec("r", "float", 0.0, minimum=0.0, maximum=1e6,
                  help="Bethe Hessian parameter; 0 = sqrt(sum d^2 / sum d - 1)"),
        ParamSpec("weights", "choice", "ignore", choices=("ignore", "use"),
                  help="ignore: build H(r) on the unweighted graph (the setting the method's theory "
                       "and its count of negative eigenvalues are made for); use: put the weights in A and D"),
    ) + _assignment() + _SPECTRAL_TAIL))

_register(MethodInfo(
    "leading-eigenvector", "recursive modularity bisection with vertex-moving refinement while Q rises",
    "Newman (2006), Modularity and community structure in networks, PNAS 103(23)",
    "spectral", True, "auto", (
        ParamSpec("min_gain", "float", 1e-10, minimum=0.0, maximum=1.0,
                  help="a split is kept only if it raises modularity by more than this"),
        ParamSpec("refine", "bool", True,
                  help="fine-tune every split by vertex moves (Newman 2006, Kernighan-Lin style)"),
        ParamSpec("refine_max_size", "int", 5000, minimum=2, maximum=10**9,
                  help="groups above this many nodes are split without refinement (O(n^2) per sweep)"),
    ) + _SPECTRAL_TAIL, accepts_k=False))

_register(MethodInfo(
    "directed-walk", "k-way on the random-walk Laplacian of a directed graph (stationary distribution)",
    "Chung (2005), Laplacians and the Cheeger inequality for directed graphs, Annals of "
    "Combinatorics 9(1); Zhou, Huang & Schölkopf (2005), Learning from labeled and unlabeled "
    "data on a directed graph, ICML",
    "spectral", True, 2, (
        ParamSpec("walk", "choice", "auto", choices=("auto", "random", "lazy", "pagerank"),
                  help="transition matrix: D^-1 A, (I + D^-1 A)/2, or with teleportation; auto: random if "
                       "strongly connected and aperiodic, lazy if periodic, else pagerank"),
        ParamSpec("alpha", "float", 0.95, minimum=0.01, maximum=0.999,
                  help="pagerank walk: probability of following an arc (1 - alpha teleports)"),
    ) + _assignment() + _SPECTRAL_TAIL, directed=True))

_register(MethodInfo(
    "girvan-newman", "divisive edge-betweenness removal until k components (networkx)",
    "Girvan & Newman (2002), Community structure in social and biological networks, PNAS 99(12)",
    "baseline", False, 2, (_components(),)))

_register(MethodInfo(
    "greedy-modularity", "agglomerative greedy modularity maximisation (networkx)",
    "Clauset, Newman & Moore (2004), Finding community structure in very large networks, "
    "Phys. Rev. E 70, 066111",
    "baseline", True, "auto", (
        ParamSpec("resolution", "float", 1.0, minimum=0.0, maximum=1e6,
                  help="modularity resolution gamma"),
        _components()), ))

_register(MethodInfo(
    "louvain", "multi-level modularity optimisation (networkx)",
    "Blondel, Guillaume, Lambiotte & Lefebvre (2008), Fast unfolding of communities in "
    "large networks, J. Stat. Mech. P10008",
    "baseline", True, "auto", (
        ParamSpec("resolution", "float", 1.0, minimum=0.0, maximum=1e6,
                  help="modularity resolution gamma"),
        ParamSpec("threshold", "float", 1e-7, minimum=0.0, maximum=1.0,
                  help="stop when a level raises modularity by less than this"),
        _components()), accepts_k=False))

_register(MethodInfo(
    "label-propagation", "asynchronous label propagation (networkx)",
    "Raghavan, Albert & Kumara (2007), Near linear time algorithm to detect community "
    "structures in large-scale networks, Phys. Rev. E 76, 036106",
    "baseline", True, "auto", (_components(),), accepts_k=False))


def method_names() -> list[str]:
    """Method ids in registry order."""
    return list(METHODS)


def validate_params(method: str, params: dict | None) -> dict:
    """Check ``params`` against the method's schema and fill in defaults.

    Parameters
    ----------
    method : str
        A key of :data:`METHODS`.
    params : dict or None
        Values may be native (``0.5``, ``True``) or strings as typed on a
        command line (``"0.5"``, ``"true"``, ``"sweep"``).

    Returns
    -------
    dict
        Every schema parameter, in schema order, converted to its type.

    Raises
    ------
    workspace.errors.ParameterError
        Unknown method, unknown key (listing the known keys), wrong type or
        out-of-range value (naming the key and the allowed values).
    """
    if method not in METHODS:
        raise ParameterError(f"unknown method {method!r}; known: {', '.join(METHODS)}")
    info = METHODS[method]
    params = dict(params or {})
    known = {p.name for p in info.params}
    for key in params:
        if key in ("k", "seed"):
            raise ParameterError(f"{method}: {key} is an explicit argument of partition(), "
                                 "not a method parameter")
        if key not in known:
            raise ParameterError(f"{method}: unknown parameter {key!r}; known: "
                                 + (", ".join(p.name for p in info.params) or "(none)"))
    out: dict[str, Any] = {}
    for spec in info.params:
        out[spec.name] = spec.convert(params[spec.name], method) if spec.name in params \
            else spec.default
    return out
