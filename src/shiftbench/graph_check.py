"""Before any training: do the signals live on the graph? Training-free statistics of the
signals on the graph's structure against the same on degree-preserving rewirings of it.

- **Smoothness**: Moran's I with row-standardized weights (``I = (n / S0) z^T W z / z^T z``,
  ``z`` the signal less its mean, ``W = D^-1 A`` and ``S0`` the sum of its weights) and the
  Dirichlet energy of the centred signal (``z^T L z / z^T z``, ``L = D - A``), averaged over the
  signals (each sample's feature is one signal over the nodes).
- **Classes in the spectrum** (class tasks): each signal's energy in bands of the graph
  spectrum, ``|| h_b(L_n) x ||^2 / || x ||^2`` for ``B`` equal bands of the normalized Laplacian's
  spectrum ``[0, 2]``, where ``h_b`` is a Chebyshev approximation of the band's indicator (sparse
  products only, no eigendecomposition); a cross-validated logistic regression on the log band
  energies says how well they tell the classes apart.
- **Targets from neighbours** (node tasks): each node's target predicted, by a cross-validated
  linear model pooled over nodes, from its own signal and the mean of its neighbours' signals
  (``[x_n, (D^-1 A x)_n]``); on a rewiring only the neighbours change, so the comparison is what
  the graph's neighbourhoods add to a node's own signal (R^2 for values, accuracy for classes).

Every figure is computed on the graph's edges with weights ignored and direction dropped, on the
graph and on ``rewirings`` degree-preserving rewirings of it (networkx's double-edge swaps), so
the comparison is between this structure and any structure with its degrees. The permutation
p-value is ``(1 + #{rewired at least as extreme}) / (1 + rewirings)``.
"""

from __future__ import annotations

import time
from pathlib import Path
from dataclasses import asdict, dataclass, field
from typing import Any

import numpy as np
import scipy.sparse as sp

from shiftbench.data import Dataset
from shiftbench.graphs.graph import Graph
from shiftbench.graphs.sources import rewired_graph

# Signals beyond this many are a seeded sample of them (the check says so).
MAX_SIGNALS = 4000
# Node rows (sample x node) the neighbour-prediction check fits at most: a seeded sample of
# samples beyond it.
MAX_NODE_ROWS = 50_000
BANDS = 6
CHEBYSHEV_ORDER = 24
# Swaps per edge of each rewiring: enough to scramble the structure, few enough for seconds.
SWAPS_PER_EDGE = 2.0


def structure(graph: Graph) -> sp.csr_matrix:
    """The graph's edges as a symmetric 0/1 ``(nodes, nodes)`` matrix without self-loops."""
    adjacency = graph.adjacency()
    binary = ((abs(adjacency) + abs(adjacency.T)) > 0).astype(np.float64)
    binary.setdiag(0)
    binary.eliminate_zeros()
    return binary.tocsr()


def morans_i(signals: np.ndarray, adjacency: sp.csr_matrix) -> np.ndarray:
    """Moran's I of each signal with row-standardized weights ``W = D^-1 A`` (isolated nodes
    keep a zero row): ``I = (n / S0) z^T W z / z^T z``. Shapes: signals ``(signals, nodes)``,
    adjacency ``(nodes, nodes)``; returns ``(signals,)``, NaN for a constant signal."""
    degrees = np.asarray(adjacency.sum(axis=1)).ravel()
    weights = sp.diags(np.divide(1.0, degrees, out=np.zeros_like(degrees), where=degrees > 0)) @ adjacency
    centred = signals - signals.mean(axis=1, keepdims=True)
    numerator = np.einsum("sn,sn->s", centred, (weights @ centred.T).T)
    denominator = np.einsum("sn,sn->s", centred, centred)
    total = float(weights.sum())
    with np.errstate(invalid="ignore", divide="ignore"):
        return adjacency.shape[0] / total * numerator / denominator


def dirichlet_energy(signals: np.ndarray, adjacency: sp.csr_matrix) -> np.ndarray:
    """``z^T L z / z^T z`` of each centred signal ``z``, ``L = D - A``. Shapes as :func:`morans_i`."""
    degrees = np.asarray(adjacency.sum(axis=1)).ravel()
    laplacian = sp.diags(degrees) - adjacency
    centred = signals - signals.mean(axis=1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.einsum("sn,sn->s", centred, (laplacian @ centred.T).T) / np.einsum("sn,sn->s", centred, centred)


def band_coefficients(bands: int = BANDS, order: int = CHEBYSHEV_ORDER) -> np.ndarray:
    """Chebyshev coefficients ``(bands, order + 1)`` of each band's indicator on ``[0, 2]``,
    in the variable ``t = lambda - 1``, by Chebyshev-Gauss quadrature with Jackson damping
    (which keeps the approximations from ringing)."""
    points = 4 * (order + 1)
    angles = np.pi * (np.arange(points) + 0.5) / points
    lam = np.cos(angles) + 1.0
    edges = np.linspace(0.0, 2.0, bands + 1)
    k = np.arange(order + 1)
    jackson = ((order + 2 - k) * np.cos(np.pi * k / (order + 2))
               + np.sin(np.pi * k / (order + 2)) / np.tan(np.pi / (order + 2))) / (order + 2)
    coefficients = np.empty((bands, order + 1))
    for band in range(bands):
        inside = (lam >= edges[band]) & ((lam < edges[band + 1]) | (band == bands - 1))
        coefficients[band] = 2.0 / points * (inside[None, :] * np.cos(k[:, None] * angles[None, :])).sum(axis=1)
    coefficients[:, 0] /= 2.0
    return coefficients * jackson


def normalized_laplacian(adjacency: sp.csr_matrix) -> sp.csr_matrix:
    """``L_n = I' - D^-1/2 A D^-1/2`` (``I'`` the identity on nodes with an edge); spectrum in ``[0, 2]``."""
    degrees = np.asarray(adjacency.sum(axis=1)).ravel()
    scale = sp.diags(np.divide(1.0, np.sqrt(degrees), out=np.zeros_like(degrees), where=degrees > 0))
    return (sp.diags((degrees > 0).astype(np.float64)) - scale @ adjacency @ scale).tocsr()


def band_energies(signals: np.ndarray, adjacency: sp.csr_matrix, coefficients: np.ndarray) -> np.ndarray:
    """``|| h_b(L_n) x ||^2 / || x ||^2`` for every signal and band, ``h_b(lambda) = sum_k c_bk
    T_k(lambda - 1)`` by the three-term recurrence ``T_{k+1} = 2 (L_n - I) T_k - T_{k-1}``.
    Shapes: signals ``(signals, nodes)``, coefficients ``(bands, order + 1)``; returns
    ``(signals, bands)``."""
    shifted = normalized_laplacian(adjacency) - sp.identity(adjacency.shape[0], format="csr")
    columns = signals.T  # (nodes, signals): one sparse product serves every signal
    previous, current = columns, shifted @ columns
    filtered = coefficients[:, 0, None, None] * previous[None] + coefficients[:, 1, None, None] * current[None]
    for k in range(2, coefficients.shape[1]):
        previous, current = current, 2.0 * (shifted @ current) - previous
        filtered += coefficients[:, k, None, None] * current[None]
    power = np.einsum("ns,ns->s", columns, columns)
    with np.errstate(invalid="ignore", divide="ignore"):
        return (np.einsum("bns,bns->sb", filtered, filtered) / power[:, None])


def spectral_accuracy(energies: np.ndarray, labels: np.ndarray, features: int, seed: int) -> float:
    """5-fold stratified cross-validated accuracy of a standardized logistic regression on the log
    band energies. Shapes: energies ``(samples * features, bands)`` (each sample's features
    consecutive), labels ``(samples,)``."""
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import StratifiedKFold, cross_val_score
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    table = np.log(np.clip(energies, 1e-12, None)).reshape(len(labels), features * energies.shape[1])
    folds = min(5, int(np.bincount(labels).min()))
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
    return float(cross_val_score(model, np.nan_to_num(table), labels, cv=StratifiedKFold(folds, shuffle=True, random_state=seed)).mean())


def neighbour_rows(signals: np.ndarray, adjacency: sp.csr_matrix) -> np.ndarray:
    """Each node's own features and its neighbours' mean, ``[x_n, (D^-1 A x)_n]`` (zero for a
    node without neighbours). Shapes: signals ``(samples, nodes, features)``; returns
    ``(samples * nodes, 2 * features)``, rows sample-major."""
    degrees = np.asarray(adjacency.sum(axis=1)).ravel()
    mean = sp.diags(np.divide(1.0, degrees, out=np.zeros_like(degrees), where=degrees > 0)) @ adjacency
    samples, nodes, features = signals.shape
    columns = np.transpose(signals, (1, 0, 2)).reshape(nodes, samples * features)  # one product for all
    neighbours = np.transpose((mean @ columns).reshape(nodes, samples, features), (1, 0, 2))
    return np.concatenate([signals, neighbours], axis=2).reshape(samples * nodes, 2 * features)


def neighbour_score(table: np.ndarray, targets: np.ndarray, groups: np.ndarray, classes: bool) -> float:
    """5-fold cross-validated score of a standardized linear model from ``table`` to ``targets``,
    folds by sample (``groups``) so no sample's nodes straddle a fold: R^2 of ridge regression
    (mean over outputs) for values, accuracy of logistic regression for classes. Shapes: table
    ``(rows, columns)``, targets ``(rows,)`` or ``(rows, outputs)``, groups ``(rows,)``."""
    from sklearn.linear_model import LogisticRegression, RidgeCV
    from sklearn.model_selection import GroupKFold, cross_val_score
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000) if classes else RidgeCV())
    folds = GroupKFold(n_splits=min(5, len(np.unique(groups))))
    return float(cross_val_score(model, table, targets, groups=groups, cv=folds).mean())


def node_targets(dataset: Dataset, kept: np.ndarray) -> tuple[np.ndarray, np.ndarray, bool]:
    """The node targets of the ``kept`` samples as rows (sample-major), which rows are targets,
    and whether they are classes. Shapes: ``(kept * nodes,)`` or ``(kept * nodes, outputs)``."""
    labels = dataset.labels[kept]
    if labels.ndim == 2:  # classes on nodes, -1 where not a target
        flat = labels.reshape(-1)
        return flat, flat >= 0, True
    flat = labels.reshape(len(kept) * dataset.nodes, -1).astype(np.float64)
    return flat, ~np.isnan(flat).any(axis=1), False


@dataclass
class Comparison:
    """One statistic on the graph against its rewirings; ``larger_is_structure``: whether the
    graph's structure shows as a larger value (Moran's I, accuracy) or a smaller one (energy)."""

    name: str
    observed: float
    rewired_mean: float
    rewired_std: float
    p: float
    rewirings: int
    larger_is_structure: bool

    @classmethod
    def of(cls, name: str, observed: float, rewired: list[float], larger_is_structure: bool) -> Comparison:
        values = np.asarray(rewired, dtype=float)
        extreme = values >= observed if larger_is_structure else values <= observed
        return cls(name, float(observed), float(values.mean()), float(values.std(ddof=1)) if len(values) > 1 else 0.0,
                   float((1 + extreme.sum()) / (1 + len(values))), len(values), larger_is_structure)


@dataclass
class GraphCheck:
    """What the check found: each comparison, the signals it used, notes, seconds."""

    data: str
    graph: str
    nodes: int
    edges: int
    signals_used: int
    signals_total: int
    comparisons: list[Comparison] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    seconds: float = 0.0
    alpha: float = 0.05

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


def signal_rows(dataset: Dataset, limit: int, seed: int) -> tuple[np.ndarray, np.ndarray, int]:
    """The signals as rows ``(samples * features, nodes)``, each sample's features consecutive,
    for at most ``limit`` samples' worth (a seeded sample); the samples used, and the total."""
    samples = dataset.signals.shape[0]
    keep = np.arange(samples)
    if samples * dataset.features > limit:
        keep = np.sort(np.random.default_rng(seed).choice(samples, size=max(1, limit // dataset.features), replace=False))
    rows = np.transpose(dataset.signals[keep], (0, 2, 1)).reshape(-1, dataset.nodes).astype(np.float64)
    return rows, keep, samples


def check_graph(dataset: Dataset, graph: Graph, task: str, rewirings: int = 99, spectral_rewirings: int = 19,
                seed: int = 0) -> GraphCheck:
    """The graph check of ``dataset``'s signals on ``graph`` for ``task`` (a task's name; see the
    module's docstring): smoothness always, band energies for classes per signal, neighbour
    prediction for targets on nodes; the model-based ones on ``spectral_rewirings``."""
    started = time.perf_counter()
    adjacency = structure(graph)
    rows, kept, total = signal_rows(dataset, MAX_SIGNALS, seed)
    result = GraphCheck(dataset.name, graph.name, graph.nodes, int(adjacency.nnz // 2), len(kept), total)
    if len(kept) < total:
        result.notes.append(f"{len(kept)} of {total} samples used (a seeded sample), to stay within seconds")
    isolated = int((np.asarray(adjacency.sum(axis=1)).ravel() == 0).sum())
    if isolated:
        result.notes.append(f"{isolated} isolated nodes: Moran's I counts them with no neighbours, and they take no part in the energy")
    if adjacency.nnz < 4:
        result.notes.append("fewer than two edges: a degree-preserving rewiring cannot change the graph; nothing to compare")
        result.seconds = time.perf_counter() - started
        return result
    controls = [structure(rewired_graph(graph, SWAPS_PER_EDGE, seed + 1 + draw)) for draw in range(rewirings)]
    for name, statistic, larger in (("Moran's I", morans_i, True), ("Dirichlet energy", dirichlet_energy, False)):
        observed = float(np.nanmean(statistic(rows, adjacency)))
        rewired = [float(np.nanmean(statistic(rows, control))) for control in controls]
        result.comparisons.append(Comparison.of(name, observed, rewired, larger))
    if task == "classification":
        labels = dataset.labels[kept]
        coefficients = band_coefficients()
        score = lambda matrix: spectral_accuracy(band_energies(rows, matrix, coefficients), labels, dataset.features, seed)
        result.comparisons.append(Comparison.of("band-energy accuracy", score(adjacency),
                                                [score(control) for control in controls[:spectral_rewirings]], True))
    elif task in ("node_regression", "node_classification"):
        result.comparisons.append(neighbour_comparison(dataset, kept, adjacency, controls[:spectral_rewirings], seed, result.notes))
    result.seconds = time.perf_counter() - started
    return result


def neighbour_comparison(dataset: Dataset, kept: np.ndarray, adjacency: sp.csr_matrix, controls: list[sp.csr_matrix],
                         seed: int, notes: list[str]) -> Comparison:
    """Targets on nodes predicted from ``[own, neighbours' mean]`` on the graph against
    ``controls``, over at most :data:`MAX_NODE_ROWS` node rows (a seeded sample of samples)."""
    if len(kept) * dataset.nodes > MAX_NODE_ROWS:
        fewer = max(5, MAX_NODE_ROWS // dataset.nodes)
        kept = np.sort(np.random.default_rng(seed).choice(kept, size=min(fewer, len(kept)), replace=False))
        notes.append(f"neighbour prediction on {len(kept)} samples (a seeded sample), to stay within seconds")
    targets, scored, classes = node_targets(dataset, kept)
    groups = np.repeat(np.arange(len(kept)), dataset.nodes)
    signals = dataset.signals[kept].astype(np.float64)
    score = lambda matrix: neighbour_score(neighbour_rows(signals, matrix)[scored], targets[scored], groups[scored], classes)
    name = "neighbour-prediction accuracy" if classes else "neighbour-prediction R^2"
    return Comparison.of(name, score(adjacency), [score(control) for control in controls], True)


def sentence(check: GraphCheck) -> str:
    """What the check means, and what it cannot say."""
    if not check.comparisons:
        return "The graph check has nothing to compare: " + "; ".join(check.notes) + "."
    smooth = next(c for c in check.comparisons if c.name == "Moran's I")
    spectral = next((c for c in check.comparisons if c.name == "band-energy accuracy"), None)
    if smooth.p <= check.alpha and smooth.observed > smooth.rewired_mean:
        head = "The signals are smoother on your graph than on graphs with its degrees: a graph model has something to use"
    elif smooth.p <= check.alpha:
        head = "The signals vary more across your graph's edges than across rewired ones: they alternate on it"
    else:
        head = "The signals are no smoother on your graph than on graphs with its degrees"
    neighbours = next((c for c in check.comparisons if c.name.startswith("neighbour-prediction")), None)
    if neighbours is not None:
        better = neighbours.p <= check.alpha
        head += (f"; each node's target is predicted {'better' if better else 'no better'} from its neighbours' signals "
                 f"on it than on rewirings")
    if spectral is not None:
        if spectral.p <= check.alpha:
            head += "; the classes differ in their graph-spectral content more on it than on rewirings"
        else:
            head += "; the classes differ in their graph-spectral content no more on it than on rewirings"
    return head + ". This is a check, not a verdict: a model may still use the graph in ways these statistics miss."


def markdown(check: GraphCheck) -> str:
    """The check as markdown: the sentence, one table row per statistic, the notes."""
    lines = [f"# Graph check: {check.data} on {check.graph}", "",
             f"{sentence(check)}", "",
             f"{check.nodes:,} nodes, {check.edges:,} edges (weights ignored, direction dropped); "
             f"{check.signals_used:,} of {check.signals_total:,} samples; {check.seconds:.1f} s.", ""]
    if check.comparisons:
        lines += ["| statistic | on the graph | rewired mean | rewired std | p | rewirings |",
                  "| --- | ---: | ---: | ---: | ---: | ---: |"]
        lines += [f"| {c.name} | {c.observed:.4f} | {c.rewired_mean:.4f} | {c.rewired_std:.4f} | {c.p:.3f} | {c.rewirings} |"
                  for c in check.comparisons]
        lines.append("")
    lines += [f"- note: {note}" for note in check.notes]
    return "\n".join(lines).rstrip() + "\n"


def check_config(arguments: list[str], config_dir: Path, rewirings: int = 99) -> tuple[GraphCheck, Path]:
    """The graph check of the data and graph a job's command line names (``data=...``,
    ``graph=...``, as for ``shiftbench``), written to ``results_dir/graph_check/<data>_<graph>.{md,json}``;
    returns the check and the markdown file. Every bad value is refused in one line first."""
    import json

    from hydra import compose, initialize_config_dir

    from shiftbench.config import validate
    from shiftbench.graphs import build_graph
    from shiftbench.job import load_data
    from shiftbench.preflight import job_config, preflight
    from shiftbench.records import write_atomic
    arguments = ["arch=fc", *arguments]  # the check trains nothing: any family that serves every task
    preflight(arguments, config_dir)
    with initialize_config_dir(str(config_dir.resolve()), version_base="1.3", job_name="shiftbench"):
        run = validate(job_config(compose("config", overrides=arguments, return_hydra_config=True)))
    dataset = load_data(run)
    graph = build_graph(run.graph, dataset)
    check = check_graph(dataset, graph, run.task, rewirings=rewirings, seed=run.seed)
    folder = Path(run.results_dir) / "graph_check"
    folder.mkdir(parents=True, exist_ok=True)
    stem = f"{dataset.name}_{run.graph.source}"
    write_atomic(folder / f"{stem}.json", json.dumps(check.as_dict(), indent=1) + "\n")
    return check, write_atomic(folder / f"{stem}.md", markdown(check))


def smooth_on_graph(check: GraphCheck) -> bool | None:
    """Whether Moran's I says the signals are smoother on the graph than on its rewirings
    (None: nothing compared)."""
    found = next((c for c in check.comparisons if c.name == "Moran's I"), None)
    return None if found is None else found.p <= check.alpha and found.observed > found.rewired_mean


def agreement_note(check: GraphCheck, graph_outcomes: list[str]) -> str | None:
    """A flag where the trained verdict's graph question and the check disagree: the verdict
    credits the graph while the signals are no smoother on it, or the reverse."""
    smooth = smooth_on_graph(check)
    if smooth is None:
        return None
    if not smooth and "earns_its_keep" in graph_outcomes:
        return ("The verdict credits the graph, yet the signals are no smoother on it than on rewirings: the model "
                "uses the graph in a way smoothness does not show; look at what it learned before relying on it.")
    if smooth and graph_outcomes and all(outcome in ("equivalent", "does_not_earn_its_keep") for outcome in graph_outcomes):
        return ("The signals are smoother on the graph than on rewirings, yet the tuned graph models gained nothing "
                "from it: a model or setting that uses the graph may be missing from the candidates.")
    return None


def summary(check: GraphCheck) -> dict[str, Any]:
    """What a verdict or report keeps of the check: its figures, sentence and table lines."""
    table = markdown(check).split("\n")
    return {"figures": check.as_dict(), "sentence": sentence(check),
            "table": [line for line in table if line.startswith("|")], "notes": check.notes}


def records_check(records: Any) -> tuple[GraphCheck | None, str]:
    """The check of the data most completed records were trained on, on its native graph, for
    their task: what a families report or the claims show beside their own figures. Returns
    ``(None, why)`` when no record names data that loads here."""
    from omegaconf import OmegaConf

    from shiftbench.config import most_common_config, validate_group
    from shiftbench.data import load_dataset
    from shiftbench.errors import ConfigError

    if records.empty or "config" not in records:
        return None, "no records with a config"
    usable = records[records["status"].eq("completed")
                     & records["config"].map(lambda config: isinstance(config, dict) and isinstance(config.get("data"), dict))]
    data = most_common_config((config["data"] for config in usable["config"]), "data")
    if data is None:
        return None, "no completed records"
    mine = usable[usable["config"].map(lambda config: config["data"] == data)]
    tasks = mine["task"].dropna() if "task" in mine else []
    task = tasks.mode().iloc[0] if len(tasks) else "classification"
    try:
        dataset = load_dataset(validate_group("data", OmegaConf.create(data)))
    except ConfigError as error:
        return None, f"the records' data cannot be loaded here: {error}"
    return check_graph(dataset, dataset.native_graph, task), ""


def claims_agreement(check: GraphCheck, graph_matters: str) -> str | None:
    """:func:`agreement_note` for the claims' ``graph_matters`` verdict: ``holds`` credits the
    graph, ``does_not_hold`` finds nothing from it, ``not_enough_evidence`` says nothing."""
    outcomes = {"holds": ["earns_its_keep"], "does_not_hold": ["does_not_earn_its_keep"]}.get(graph_matters, [])
    return agreement_note(check, outcomes)
