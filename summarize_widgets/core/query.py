"""Group queries: a small whitelisted grammar, parsed with :mod:`ast`, evaluated with NumPy.

A query selects units by their covariates, for example::

    age >= 65 and tenure == 'owner'
    region in ['north', 'east'] or not insulated
    30 < age <= 50
    `floor area` > 120 and rooms is not missing
    index < 150

Allowed: column names (backquote names that are not Python identifiers, e.g. `` `floor area` ``
or `` `3` `` for an integer column name), ``index`` (the covariate table's index as given,
unless a column is named ``index``), numbers, strings, ``True``/``False``, comparisons
(``== != < <= > >=``, chained as in ``30 < age <= 50``), ``in`` / ``not in`` a list of
constants, ``is missing`` / ``is not missing``, ``and`` / ``or`` / ``not`` and parentheses.
Anything else (attribute access, calls, subscripts, arithmetic, assignments) is refused with
the offending part named: user text is data, never code. Missing values compare False
(``age < 30`` excludes units whose age is missing; ask for them with ``age is missing``).
"""
from __future__ import annotations

import ast
import re

import numpy as np
import pandas as pd

from .validate import SummaryError

__all__ = ["parse_query", "evaluate_query", "query_mask"]

_CMP = {ast.Eq: np.equal, ast.NotEq: np.not_equal, ast.Lt: np.less, ast.LtE: np.less_equal,
        ast.Gt: np.greater, ast.GtE: np.greater_equal}
_MISSING_WORD = "missing"


class _Query:
    """A parsed query: the checked tree, and the columns named by each placeholder."""

    def __init__(self, text: str, tree: ast.Expression, quoted: dict):
        self.text = text
        self.tree = tree
        self.quoted = quoted  # placeholder identifier -> the backquoted column name

    def show(self, node) -> str:
        """The source of ``node`` as the user wrote it (backquoted names restored)."""
        out = ast.unparse(node)
        for ph, name in self.quoted.items():
            out = out.replace(ph, f"`{name}`")
        return out


def _replace_backquotes(text: str) -> tuple[str, dict]:
    """Swap each `` `name` `` for a placeholder identifier; string literals are left alone."""
    out, quoted, i, n = [], {}, 0, len(text)
    while i < n:
        ch = text[i]
        if ch in "'\"":
            j = i + 1
            while j < n and text[j] != ch:
                j += 2 if text[j] == "\\" else 1
            out.append(text[i : j + 1])
            i = j + 1
        elif ch == "`":
            j = text.find("`", i + 1)
            if j < 0:
                raise SummaryError(f"query {text!r}: a backquote at position {i} is never closed.")
            ph = f"_bq{len(quoted)}_"
            quoted[ph] = text[i + 1 : j]
            out.append(f" {ph} ")
            i = j + 1
        else:
            out.append(ch)
            i += 1
    return "".join(out).strip(), quoted


def parse_query(text: str) -> _Query:
    """Parse and check ``text`` against the grammar; raise :class:`SummaryError` naming what is not allowed."""
    if not isinstance(text, str) or not text.strip():
        raise SummaryError(f"a query must be a non-empty string such as \"age >= 65\"; got {text!r}.")
    src, quoted = _replace_backquotes(text.strip())
    try:
        tree = ast.parse(src, mode="eval")
    except SyntaxError as exc:
        if re.search(r"(?<![=!<>])=(?!=)", src):
            raise SummaryError(f"query {text!r}: a single '=' (assignment) is not allowed; compare with '=='.") from None
        raise SummaryError(
            f"query {text!r} is not a valid query ({exc.msg}); write comparisons joined by and/or, "
            "e.g. \"age >= 65 and tenure == 'owner'\"."
        ) from None
    q = _Query(text, tree, quoted)
    _check(q, tree.body)
    return q


def _refuse(q: _Query, node, what: str):
    raise SummaryError(
        f"query {q.text!r}: {what} {q.show(node)!r} is not allowed; a query holds column names, numbers, "
        "strings, comparisons, `in` lists, `is missing`, and/or/not and parentheses."
    )


def _is_constant(node) -> bool:
    if isinstance(node, ast.Constant):
        return isinstance(node.value, (int, float, str, bool)) or node.value is None
    return isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)) and \
        isinstance(node.operand, ast.Constant) and isinstance(node.operand.value, (int, float)) and \
        not isinstance(node.operand.value, bool)


def _check(q: _Query, node):
    if isinstance(node, ast.BoolOp):
        for v in node.values:
            _check(q, v)
    elif isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.Not):
        _check(q, node.operand)
    elif isinstance(node, ast.Compare):
        operands = [node.left, *node.comparators]
        for op, right in zip(node.ops, node.comparators):
            if isinstance(op, (ast.Is, ast.IsNot)):
                if len(node.ops) != 1 or not (isinstance(right, ast.Name) and right.id == _MISSING_WORD):
                    _refuse(q, node, "`is` other than `<column> is missing`:")
            elif isinstance(op, (ast.In, ast.NotIn)):
                if len(node.ops) != 1 or not isinstance(right, (ast.List, ast.Tuple, ast.Set)):
                    _refuse(q, node, "`in` needs a list of constants, as in \"region in ['a', 'b']\";")
                for elt in right.elts:
                    if not _is_constant(elt):
                        _refuse(q, elt, "a list element")
            elif type(op) not in _CMP:
                _refuse(q, node, "the comparison")
        for k, operand in enumerate(operands):
            if k > 0 and isinstance(node.ops[k - 1], (ast.Is, ast.IsNot, ast.In, ast.NotIn)):
                continue
            if not (isinstance(operand, ast.Name) or _is_constant(operand)):
                _refuse(q, operand, _kind(operand))
    elif isinstance(node, ast.Name):
        return
    elif isinstance(node, ast.Constant) and isinstance(node.value, bool):
        return
    else:
        _refuse(q, node, _kind(node))


def _kind(node) -> str:
    return {ast.Attribute: "attribute access", ast.Call: "the call", ast.Subscript: "indexing",
            ast.BinOp: "arithmetic", ast.NamedExpr: "the assignment", ast.Lambda: "the lambda"}.get(type(node), "the expression")


# -- evaluation --------------------------------------------------------------------------------
def _lookup(covariates: pd.DataFrame) -> dict:
    """Name in a query -> the column (columns shown as str; ``index`` is the table's index)."""
    names = {str(c): c for c in covariates.columns}
    return names


def _column(q: _Query, node: ast.Name, covariates, names) -> np.ndarray:
    key = q.quoted.get(node.id, node.id)
    if key in names:
        s = covariates[names[key]]
    elif key == "index":
        s = covariates.index.to_series(index=covariates.index)
    else:
        from .validate import format_names
        raise SummaryError(
            f"query {q.text!r} names {key!r}, which is not a column of the covariates. "
            f"Available: {format_names(names, 20)} (and `index`); backquote names with spaces, e.g. `floor area`."
        )
    return s


def _constant(node):
    if isinstance(node, ast.UnaryOp):
        v = node.operand.value
        return -v if isinstance(node.op, ast.USub) else v
    return node.value


def _values(s: pd.Series):
    """(values as a NumPy array, missing mask, kind) with kind 'number', 'bool' or 'text'."""
    miss = s.isna().to_numpy()
    if isinstance(s.dtype, pd.CategoricalDtype):
        s = s.astype(object)
    if pd.api.types.is_bool_dtype(s):
        return s.to_numpy(dtype=bool, na_value=False), miss, "bool"
    if pd.api.types.is_numeric_dtype(s):
        return s.to_numpy(dtype=np.float64, na_value=np.nan), miss, "number"
    return s.astype(object).to_numpy(), miss, "text"


def _compare(q, node, op, left, right, covariates, names) -> np.ndarray:
    n = len(covariates)
    sides = []
    for side in (left, right):
        if isinstance(side, ast.Name):
            sides.append(("column", side, *_values(_column(q, side, covariates, names))))
        else:
            v = _constant(side)
            kind = "bool" if isinstance(v, bool) else "number" if isinstance(v, (int, float)) else "text"
            sides.append(("constant", side, v, np.zeros(n, bool), kind))
    (_, ln, lv, lm, lk), (_, rn, rv, rm, rk) = sides
    if {lk, rk} == {"bool", "number"}:
        lk = rk = "number"
        lv, rv = np.asarray(lv, dtype=np.float64), np.asarray(rv, dtype=np.float64)
    if lk != rk:
        raise SummaryError(
            f"query {q.text!r}: {q.show(ln)!r} ({lk}) is compared with {q.show(rn)!r} ({rk}); compare numbers with "
            "numbers and text with quoted text."
        )
    if lk == "text" and type(op) not in (ast.Eq, ast.NotEq):
        fn = _CMP[type(op)]
        out = np.zeros(n, bool)
        ok = ~(lm | rm)
        lvb, rvb = np.broadcast_to(lv, (n,)), np.broadcast_to(rv, (n,))
        out[ok] = fn(lvb[ok].astype(str), rvb[ok].astype(str))
        return out
    with np.errstate(invalid="ignore"):
        if lk == "text":
            lvb, rvb = np.broadcast_to(np.asarray(lv, dtype=object), (n,)), np.broadcast_to(np.asarray(rv, dtype=object), (n,))
            out = np.array([a == b for a, b in zip(lvb, rvb)], dtype=bool)
            if isinstance(op, ast.NotEq):
                out = ~out
        else:
            out = np.asarray(_CMP[type(op)](lv, rv), dtype=bool)
            out = np.broadcast_to(out, (n,)).copy()
    # Missing values never satisfy a comparison (`!=` included); `is missing` asks for them.
    out &= ~(lm | rm)
    return out


def _eval(q: _Query, node, covariates, names) -> np.ndarray:
    n = len(covariates)
    if isinstance(node, ast.BoolOp):
        parts = [_eval(q, v, covariates, names) for v in node.values]
        return np.logical_and.reduce(parts) if isinstance(node.op, ast.And) else np.logical_or.reduce(parts)
    if isinstance(node, ast.UnaryOp):
        return ~_eval(q, node.operand, covariates, names)
    if isinstance(node, ast.Constant):
        return np.full(n, bool(node.value))
    if isinstance(node, ast.Name):
        v, miss, kind = _values(_column(q, node, covariates, names))
        if kind != "bool":
            raise SummaryError(
                f"query {q.text!r}: {q.show(node)!r} is a {kind} column, not True/False; compare it, e.g. "
                + (f"\"{q.show(node)} > 0\"." if kind == "number" else f"\"{q.show(node)} == 'some value'\".")
            )
        return v & ~miss
    # Compare
    out = np.ones(n, bool)
    left = node.left
    for op, right in zip(node.ops, node.comparators):
        if isinstance(op, (ast.Is, ast.IsNot)):
            if not isinstance(left, ast.Name):
                _refuse(q, node, "`is missing` needs a column on its left:")
            miss = _column(q, left, covariates, names).isna().to_numpy()
            return miss if isinstance(op, ast.Is) else ~miss
        if isinstance(op, (ast.In, ast.NotIn)):
            if not isinstance(left, ast.Name):
                _refuse(q, node, "`in` needs a column on its left:")
            s = _column(q, left, covariates, names)
            items = [_constant(e) for e in right.elts]
            _, miss, kind = _values(s)
            kinds = {"bool" if isinstance(v, bool) else "number" if isinstance(v, (int, float)) else "text"
                     for v in items if v is not None}
            if kind == "text" and kinds - {"text"} or kind != "text" and "text" in kinds:
                raise SummaryError(
                    f"query {q.text!r}: the list in {q.show(node)!r} mixes types with the {kind} column "
                    f"{q.show(left)!r}; quote text values, e.g. ['a', 'b']."
                )
            sel = s.astype(object).isin(items).to_numpy() & ~miss if kind == "text" else s.isin(items).to_numpy() & ~miss
            if None in items:
                sel |= miss
            return sel if isinstance(op, ast.In) else ~sel & ~miss
        out &= _compare(q, node, op, left, right, covariates, names)
        left = right
    return out


def evaluate_query(query: _Query, covariates: pd.DataFrame) -> np.ndarray:
    """Evaluate a parsed query on ``covariates`` (as the user gave them, index included): bool per row."""
    return np.asarray(_eval(query, query.tree.body, covariates, _lookup(covariates)), dtype=bool)


def query_mask(covariates: pd.DataFrame, text: str) -> np.ndarray:
    """Parse ``text`` and evaluate it on ``covariates``: a bool array, one per row."""
    return evaluate_query(parse_query(text), covariates)
