"""Read fitted scikit-learn models into flat arrays that one compiled kernel evaluates.

Every inner model becomes a *unit* that maps an encoded row to one number:

- a histogram gradient-boosting model: its trees, rewritten so that split features
  index the encoded row directly (the model's own column reordering and the ordinal
  encoding of its categorical columns are folded into the nodes), plus the baseline
  and the link (logistic for a classifier);
- an imputed, scaled, one-hot linear model: one term per output column of its
  preprocessing, plus the intercept and the link.

The learner's combination step (``mu_a - mu_0``, ``g tau^0 + (1 - g) tau^1``, ...) is a
list of ``(replicate, output, evaluation, coefficient)`` terms over unit evaluations;
an evaluation is a unit together with the arm value an S-learner appends to the row.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from sklearn.compose import ColumnTransformer
from sklearn.ensemble import HistGradientBoostingClassifier, HistGradientBoostingRegressor
from sklearn.impute import SimpleImputer
from sklearn.linear_model import LogisticRegression, Ridge
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler

from service.errors import BundleError

__all__ = ["NODE_DTYPE", "SPREAD_BOOTSTRAP", "SPREAD_MODEL", "Program", "ProgramBuilder"]

# Tree nodes are in depth-first pre-order (as scikit-learn grows them), so the left
# child of node i is node i + 1 and only the right child is stored. "head" is -1 for a
# leaf, else feature << 2 | categorical << 1 | missing-goes-left; "value" is the leaf
# value, the numeric threshold, or the row of the categorical split's bitset. The
# kernel reads the three fields as separate arrays (measured faster than one record).
NODE_DTYPE = np.dtype([("head", "<i4"), ("right", "<i4"), ("value", "<f8")])
UNIT_TREES, UNIT_LINEAR = 0, 1
LINK_IDENTITY, LINK_LOGISTIC = 0, 1
TERM_NUMERIC, TERM_INDICATOR, TERM_ONE_HOT = 0, 1, 2
_N_CODES = 256  # categorical codes a tree bitset can hold
# Where the interval's width comes from: the spread of replicates 1.. (the full form),
# or a model of the log standard deviation held as replicate 1 (the compact form).
SPREAD_BOOTSTRAP, SPREAD_MODEL = 0, 1
_ARRAYS = {
    "node_head": np.int32,
    "node_right": np.int32,
    "node_value": np.float64,
    "bitsets": np.uint32,
    "tree_roots": np.int32,
    "unit_int": np.int32,
    "unit_base": np.float64,
    "term_int": np.int32,
    "term_float": np.float64,
    "table": np.float64,
    "eval_unit": np.int32,
    "eval_arm": np.float64,
    "comb_int": np.int32,
    "comb_coef": np.float64,
}


@dataclass(frozen=True)
class Program:
    """Flat arrays describing every model of every replicate, and how to combine them.

    Replicate 0 is the learner fitted on all rows; outputs ``0 .. n_arms - 1`` are the
    uplift per arm and output ``n_arms`` is the control outcome. With ``spread ==
    SPREAD_BOOTSTRAP`` replicates ``1 ..`` are bootstrap refits; with ``SPREAD_MODEL``
    replicate 1 holds the log standard deviation of each arm's uplift.
    """

    n_features: int
    n_arms: int
    n_replicates: int
    node_head: np.ndarray  # (n_nodes,) int32
    node_right: np.ndarray  # (n_nodes,) int32
    node_value: np.ndarray  # (n_nodes,) float64
    bitsets: np.ndarray  # (n_bitsets, 8) uint32: categorical codes routed left
    tree_roots: np.ndarray  # (n_trees,) int32
    unit_int: np.ndarray  # (n_units, 4) int32: kind, link, first, stop
    unit_base: np.ndarray  # (n_units,) baseline or intercept
    term_int: np.ndarray  # (n_terms, 4) int32: column, kind, table start, table length
    term_float: np.ndarray  # (n_terms, 4): fill (or coefficient of missing), mean, scale, coef
    table: np.ndarray  # one-hot coefficients indexed by category code
    eval_unit: np.ndarray  # (n_evals,) int32
    eval_arm: np.ndarray  # (n_evals,) arm value written after the features, NaN if none
    comb_int: np.ndarray  # (n_comb, 3) int32: replicate, output, evaluation
    comb_coef: np.ndarray  # (n_comb,)
    spread: int = SPREAD_BOOTSTRAP

    def arrays(self) -> dict[str, np.ndarray]:
        """Every field as an array (for a pickle-free ``.npz``)."""
        sizes = [self.n_features, self.n_arms, self.n_replicates, self.spread]
        return {"sizes": np.array(sizes, dtype=np.int64)} | {
            name: getattr(self, name) for name in _ARRAYS
        }

    @classmethod
    def from_arrays(cls, arrays: dict[str, np.ndarray], where: str) -> Program:
        """The inverse of :meth:`arrays`; every index is checked, so a damaged file
        cannot send the kernel outside its arrays or round a loop."""
        try:
            n_features, n_arms, n_replicates, spread = (int(v) for v in arrays["sizes"])
            fields = {
                name: np.ascontiguousarray(arrays[name], dtype=dtype)
                for name, dtype in _ARRAYS.items()
            }
        except (KeyError, ValueError, TypeError) as err:
            raise BundleError(
                f"{where} is not a scoring program ({err}); retrain the model."
            ) from err
        program = cls(n_features, n_arms, n_replicates, **fields, spread=spread)
        problem = _program_problem(program)
        if problem:
            raise BundleError(f"{where} is not a valid scoring program: {problem}; retrain.")
        return program


def _fail(model: Any, why: str) -> BundleError:
    return BundleError(
        f"Cannot compile the inner model {type(model).__name__}: {why}. Score this model "
        "with its own predict_interval instead."
    )


def _integer_codes(values: np.ndarray, model: Any) -> np.ndarray:
    """Categories as integer codes; they must be whole numbers in [0, 256)."""
    ok = (values >= 0) & (values < _N_CODES) & (values == np.floor(values))
    if not ok.all():
        raise _fail(model, f"categorical values {values[~ok][:3].tolist()} are not codes")
    return values.astype(np.int64)


def _bits(flags: np.ndarray) -> np.ndarray:
    """Pack 256 flags into 8 words: code ``c`` is bit ``c % 32`` of word ``c // 32``."""
    packed = np.packbits(flags.reshape(8, 32), axis=1, bitorder="little")
    return np.ascontiguousarray(packed).view("<u4").ravel().astype(np.uint32)


def _flags(bitset: np.ndarray) -> np.ndarray:
    """Unpack 8 words into 256 flags (the inverse of :func:`_bits`)."""
    words = np.ascontiguousarray(bitset, dtype="<u4")
    return np.unpackbits(words.view(np.uint8), bitorder="little").astype(bool)


@dataclass
class _GbmColumns:
    """How one boosting model sees the encoded row."""

    source: np.ndarray  # model feature index -> encoded column
    codes: dict[int, np.ndarray] = field(default_factory=dict)  # ordinal -> code
    known: dict[int, np.ndarray] = field(default_factory=dict)  # known ordinals


def _gbm_columns(model: Any) -> _GbmColumns:
    n = int(model.n_features_in_)
    prep = model._preprocessor
    if prep is None:
        return _GbmColumns(np.arange(n))
    # The model reorders its input (categorical columns first) and ordinal-encodes the
    # categorical ones, unknown values becoming missing.
    mask = np.asarray(model.is_categorical_, dtype=bool)
    cat_cols, num_cols = np.flatnonzero(mask), np.flatnonzero(~mask)
    slices = prep.output_indices_
    source = np.empty(n, dtype=np.int64)
    source[slices["encoder"]] = cat_cols
    source[slices["numerical"]] = num_cols
    encoder = prep.named_transformers_["encoder"]
    known_bitsets, f_idx_map = model._bin_mapper.make_known_categories_bitsets()
    columns = _GbmColumns(source)
    for position, categories in zip(
        range(slices["encoder"].start, slices["encoder"].stop), encoder.categories_, strict=True
    ):
        values = np.asarray(categories, dtype=float)
        values = values[~np.isnan(values)]  # NaN is encoded as missing, not as a category
        columns.codes[position] = _integer_codes(values, model)
        known = _flags(known_bitsets[f_idx_map[position]])[: len(values)]
        columns.known[position] = np.flatnonzero(known)
    return columns


def _gbm_link(model: Any) -> int:
    link = type(model._loss.link).__name__
    if isinstance(model, HistGradientBoostingClassifier):
        if model.n_trees_per_iteration_ != 1 or list(model.classes_) != [0.0, 1.0]:
            raise _fail(model, "only binary 0/1 classifiers are supported")
        if link != "LogitLink":
            raise _fail(model, f"link {link} is not logistic")
        return LINK_LOGISTIC
    if link != "IdentityLink":
        raise _fail(model, f"link {link} is not the identity (use the squared error loss)")
    return LINK_IDENTITY


@dataclass
class ProgramBuilder:
    """Collects units, evaluations and combination terms, then freezes a Program."""

    n_features: int
    n_arms: int
    n_replicates: int
    spread: int = SPREAD_BOOTSTRAP
    _nodes: list[np.ndarray] = field(default_factory=list)
    _n_nodes: int = 0
    _bitsets: list[np.ndarray] = field(default_factory=list)
    _roots: list[int] = field(default_factory=list)
    _units: list[tuple[int, int, int, int]] = field(default_factory=list)
    _bases: list[float] = field(default_factory=list)
    _term_int: list[tuple[int, int, int, int]] = field(default_factory=list)
    _term_float: list[tuple[float, float, float, float]] = field(default_factory=list)
    _table: list[float] = field(default_factory=list)
    _unit_of: dict[int, int] = field(default_factory=dict)
    _evals: dict[tuple[int, int], int] = field(default_factory=dict)
    _comb: list[tuple[int, int, int, float]] = field(default_factory=list)

    # -- combination ---------------------------------------------------------------------

    def add(self, replicate: int, output: int, model: Any, coef: float, arm: int = -1) -> None:
        """Add ``coef * model(row)`` to ``output`` of ``replicate``; ``arm >= 0`` appends
        that arm index to the row (S-learner)."""
        unit = self._unit(model)
        key = (unit, arm)
        if key not in self._evals:
            self._evals[key] = len(self._evals)
        self._comb.append((replicate, output, self._evals[key], float(coef)))

    # -- units ---------------------------------------------------------------------------

    def _unit(self, model: Any) -> int:
        if id(model) not in self._unit_of:
            # The encoded features, plus the arm column an S-learner appends.
            if getattr(model, "n_features_in_", 0) > self.n_features + 1:
                raise _fail(model, f"it reads {model.n_features_in_} columns")
            if isinstance(model, HistGradientBoostingClassifier | HistGradientBoostingRegressor):
                self._add_gbm(model)
            elif isinstance(model, Pipeline):
                self._add_linear(model)
            else:
                raise _fail(model, "only histogram gradient boosting and the linear pipeline are")
            self._unit_of[id(model)] = len(self._units) - 1
        return self._unit_of[id(model)]

    def _add_gbm(self, model: Any) -> None:
        columns = _gbm_columns(model)
        predictors = [p for iteration in model._predictors for p in iteration]
        trees = [_preorder(p.nodes) for p in predictors]
        sizes = np.array([len(nodes) for nodes in trees], dtype=np.int64)
        starts = self._n_nodes + np.cumsum(sizes) - sizes
        src = np.concatenate(trees)
        leaf = src["is_leaf"].astype(bool)
        categorical = ~leaf & src["is_categorical"].astype(bool)
        feature = np.asarray(src["feature_idx"], dtype=np.int64)
        head = columns.source[feature] << 2 | categorical << 1 | src["missing_go_to_left"]
        nodes = np.zeros(len(src), dtype=NODE_DTYPE)
        nodes["head"] = np.where(leaf, -1, head)
        nodes["right"] = np.where(
            leaf, 0, src["right"].astype(np.int64) + np.repeat(starts, sizes)
        )
        nodes["value"] = np.where(leaf, src["value"], src["num_threshold"])
        # Children after their parent and inside their tree: every walk ends at a leaf.
        index, end = np.arange(len(src)) + self._n_nodes, np.repeat(starts + sizes, sizes)
        internal = ~leaf
        if not (
            (nodes["right"][internal] > index[internal] + 1).all()
            and (nodes["right"][internal] < end[internal]).all()
        ):
            raise _fail(model, "a tree's child indices are not in depth-first order")
        tree_of = np.repeat(np.arange(len(predictors)), sizes)
        for i in np.flatnonzero(categorical):
            nodes["value"][i] = len(self._bitsets)
            predictor = predictors[tree_of[i]]
            self._bitsets.append(self._left_codes(predictor, src[i], columns, int(feature[i])))
        first = len(self._roots)
        self._nodes.append(nodes)
        self._roots.extend(starts.tolist())
        self._n_nodes += len(src)
        baseline = np.asarray(model._baseline_prediction, dtype=float).ravel()
        self._units.append((UNIT_TREES, _gbm_link(model), first, len(self._roots)))
        self._bases.append(float(baseline[0]))

    @staticmethod
    def _left_codes(predictor: Any, node: Any, columns: _GbmColumns, position: int) -> np.ndarray:
        """Codes sent left: known categories in the split's left set, and unknown codes
        when missing values go left (the model treats unknown categories as missing)."""
        if position not in columns.codes:
            raise _fail(predictor, "a categorical split has no category encoding")
        codes, known = columns.codes[position], columns.known[position]
        raw_left = _flags(predictor.raw_left_cat_bitsets[node["bitset_idx"]])
        goes_left = np.full(_N_CODES, bool(node["missing_go_to_left"]))
        goes_left[codes[known]] = raw_left[known]
        return _bits(goes_left)

    def _add_linear(self, pipeline: Pipeline) -> None:
        prepare, model = pipeline.steps[0][1], pipeline.steps[-1][1]
        if len(pipeline.steps) != 2 or not isinstance(prepare, ColumnTransformer):
            raise _fail(pipeline, "expected Pipeline(ColumnTransformer, linear model)")
        coef, intercept, link = _linear_head(model)
        first = len(self._term_int)
        for name, transformer, cols in prepare.transformers_:
            block = prepare.output_indices_[name]
            if block.stop == block.start:
                continue
            cols = np.asarray(cols)
            cols = np.flatnonzero(cols) if cols.dtype == bool else cols.astype(np.int64)
            if isinstance(transformer, Pipeline):
                self._numeric_terms(transformer, cols, coef[block])
            elif isinstance(transformer, OneHotEncoder):
                self._one_hot_terms(transformer, cols, coef[block])
            else:
                raise _fail(transformer, "unsupported preprocessing step")
        width = max(block.stop for block in prepare.output_indices_.values())
        if len(coef) != width:
            raise _fail(model, "coefficients do not match the preprocessing output")
        self._units.append((UNIT_LINEAR, link, first, len(self._term_int)))
        self._bases.append(intercept)

    def _numeric_terms(self, steps: Pipeline, cols: np.ndarray, coef: np.ndarray) -> None:
        parts = [step for _, step in steps.steps]
        if (
            len(parts) != 2
            or not isinstance(parts[0], SimpleImputer)
            or not isinstance(parts[1], StandardScaler)
        ):
            raise _fail(steps, "expected SimpleImputer then StandardScaler")
        imputer, scaler = parts
        if not (isinstance(imputer.missing_values, float) and np.isnan(imputer.missing_values)):
            raise _fail(imputer, "only NaN may mark missing values")
        fill = np.asarray(imputer.statistics_, dtype=float)
        kept = np.flatnonzero(~np.isnan(fill)) if not imputer.keep_empty_features else None
        kept = np.arange(len(cols)) if kept is None else kept
        indicated = [] if imputer.indicator_ is None else list(imputer.indicator_.features_)
        n_out = len(kept) + len(indicated)
        mean = np.zeros(n_out) if scaler.mean_ is None else np.asarray(scaler.mean_, dtype=float)
        scale = np.ones(n_out) if scaler.scale_ is None else np.asarray(scaler.scale_, dtype=float)
        if len(coef) != n_out:
            raise _fail(steps, "numeric block width does not match the coefficients")
        for k, i in enumerate(kept):
            self._term(int(cols[i]), TERM_NUMERIC, fill[i], mean[k], scale[k], coef[k])
        for k, i in enumerate(indicated, start=len(kept)):
            self._term(int(cols[i]), TERM_INDICATOR, 0.0, mean[k], scale[k], coef[k])

    def _one_hot_terms(self, encoder: OneHotEncoder, cols: np.ndarray, coef: np.ndarray) -> None:
        if encoder.drop_idx_ is not None or encoder._infrequent_enabled:
            raise _fail(encoder, "dropped or infrequent categories are not supported")
        if encoder.handle_unknown != "ignore":
            raise _fail(encoder, "unknown categories must be ignored")
        position = 0
        for col, categories in zip(cols, encoder.categories_, strict=True):
            values = np.asarray(categories, dtype=float)
            block = coef[position : position + len(values)]
            position += len(values)
            missing = np.isnan(values)
            codes = _integer_codes(values[~missing], encoder)
            table = np.zeros(int(codes.max()) + 1 if len(codes) else 0)
            table[codes] = block[~missing]
            nan_coef = float(block[missing][0]) if missing.any() else 0.0
            start = len(self._table)
            self._table.extend(table.tolist())
            self._term_int.append((int(col), TERM_ONE_HOT, start, len(table)))
            self._term_float.append((nan_coef, 0.0, 1.0, 0.0))
        if position != len(coef):
            raise _fail(encoder, "one-hot block width does not match the coefficients")

    def _term(
        self, col: int, kind: int, fill: float, mean: float, scale: float, coef: float
    ) -> None:
        self._term_int.append((col, kind, 0, 0))
        self._term_float.append((float(fill), float(mean), float(scale), float(coef)))

    # -- freeze --------------------------------------------------------------------------

    def build(self) -> Program:
        evals = sorted(self._evals.items(), key=lambda item: item[1])
        nodes = np.concatenate(self._nodes) if self._nodes else np.zeros(0, NODE_DTYPE)
        return Program(
            n_features=self.n_features,
            n_arms=self.n_arms,
            n_replicates=self.n_replicates,
            node_head=np.ascontiguousarray(nodes["head"]),
            node_right=np.ascontiguousarray(nodes["right"]),
            node_value=np.ascontiguousarray(nodes["value"]),
            bitsets=np.array(self._bitsets, dtype=np.uint32).reshape(-1, 8),
            tree_roots=np.array(self._roots, dtype=np.int32),
            unit_int=np.array(self._units, dtype=np.int32).reshape(-1, 4),
            unit_base=np.array(self._bases, dtype=float),
            term_int=np.array(self._term_int, dtype=np.int32).reshape(-1, 4),
            term_float=np.array(self._term_float, dtype=float).reshape(-1, 4),
            table=np.array(self._table, dtype=float),
            eval_unit=np.array([unit for (unit, _), _ in evals], dtype=np.int32),
            eval_arm=np.array([np.nan if arm < 0 else arm for (_, arm), _ in evals], dtype=float),
            comb_int=np.array([c[:3] for c in self._comb], dtype=np.int32).reshape(-1, 3),
            comb_coef=np.array([c[3] for c in self._comb], dtype=float),
            spread=self.spread,
        )


def _program_problem(p: Program) -> str:
    """What makes ``p`` unsafe to evaluate, or ``""``."""
    n_nodes, n_trees, n_units = len(p.node_head), len(p.tree_roots), len(p.unit_int)
    if p.spread not in (SPREAD_BOOTSTRAP, SPREAD_MODEL) or min(p.n_features, p.n_arms) < 1:
        return "bad sizes"
    if not (len(p.node_right) == len(p.node_value) == n_nodes):
        return "node arrays differ in length"
    if p.bitsets.ndim != 2 or p.bitsets.shape[1] != 8:
        return "bad bitsets"
    if p.unit_int.shape != (n_units, 4) or p.unit_base.shape != (n_units,):
        return "bad units"
    if p.term_int.shape[1:] != (4,) or p.term_float.shape != (len(p.term_int), 4):
        return "bad linear terms"
    if p.comb_int.shape[1:] != (3,) or p.comb_coef.shape != (len(p.comb_int),):
        return "bad combination terms"
    if p.eval_arm.shape != p.eval_unit.shape:
        return "bad evaluations"
    index = np.arange(n_nodes)
    internal = p.node_head >= 0
    if ((p.node_head[internal] >> 2) > p.n_features).any():
        return "a split reads a column the row does not have"
    if (
        (p.node_right[internal] <= index[internal] + 1) | (p.node_right >= n_nodes)[internal]
    ).any():
        return "a tree's child indices are not in depth-first order"
    categorical = internal & ((p.node_head & 2) != 0)
    words = p.node_value[categorical]
    if ((words < 0) | (words >= len(p.bitsets)) | (words != np.floor(words))).any():
        return "a categorical split points outside the bitsets"
    if n_trees and ((p.tree_roots < 0) | (p.tree_roots >= n_nodes)).any():
        return "a tree root is outside the nodes"
    kind, link, first, stop = (p.unit_int[:, k] for k in range(4))
    limit = np.where(kind == 0, n_trees, len(p.term_int))
    if ((kind > 1) | (link > 1) | (first < 0) | (first > stop) | (stop > limit)).any():
        return "a unit points outside its trees or terms"
    linear = p.term_int
    if ((linear[:, 0] < 0) | (linear[:, 0] >= p.n_features + 1)).any():
        return "a linear term reads a column the row does not have"
    if ((linear[:, 2] < 0) | (linear[:, 2] + linear[:, 3] > len(p.table))).any():
        return "a one-hot term points outside its table"
    if ((p.eval_unit < 0) | (p.eval_unit >= n_units)).any():
        return "an evaluation names an unknown unit"
    rep, out, ev = (p.comb_int[:, k] for k in range(3))
    if ((rep < 0) | (rep > p.n_replicates) | (out < 0) | (out > p.n_arms)).any():
        return "a combination term writes outside the outputs"
    if ((ev < 0) | (ev >= len(p.eval_unit))).any():
        return "a combination term reads an unknown evaluation"
    if p.spread == SPREAD_MODEL and p.n_replicates != 1:
        return "a spread model must be replicate 1 alone"
    return ""


def _preorder(nodes: np.ndarray) -> np.ndarray:
    """The tree with its nodes in depth-first pre-order (left child right after its
    parent); scikit-learn already stores them so, and then this is a no-op."""
    internal = np.flatnonzero(nodes["is_leaf"] == 0)
    if (nodes["left"][internal] == internal + 1).all():
        return nodes
    order: list[int] = []
    stack = [0]
    while stack:
        i = stack.pop()
        order.append(i)
        if not nodes["is_leaf"][i]:
            stack += [int(nodes["right"][i]), int(nodes["left"][i])]
    position = np.empty(len(nodes), dtype=np.int64)
    position[order] = np.arange(len(order))
    relaid = nodes[order].copy()
    for child in ("left", "right"):
        relaid[child] = position[relaid[child]]
    return relaid


def _linear_head(model: Any) -> tuple[np.ndarray, float, int]:
    """Coefficients, intercept and link of the final linear step."""
    if isinstance(model, LogisticRegression):
        if list(model.classes_) != [0.0, 1.0]:
            raise _fail(model, "only binary 0/1 classifiers are supported")
        link = LINK_LOGISTIC
    elif isinstance(model, Ridge):
        link = LINK_IDENTITY
    else:
        raise _fail(model, "the final step must be LogisticRegression or Ridge")
    coef = np.asarray(model.coef_, dtype=float)
    if coef.ndim == 2 and coef.shape[0] != 1:
        raise _fail(model, "only a single output is supported")
    intercept = np.asarray(model.intercept_, dtype=float).ravel()
    return coef.ravel(), float(intercept[0]) if len(intercept) else 0.0, link
