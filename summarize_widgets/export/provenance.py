"""Provenance records: package version, inputs with SHA-256 checksums, settings, date.

Files are hashed by reading them in blocks; in-memory arrays (including memory-mapped
draw matrices) are hashed in row blocks of about 8 MB, so nothing large is loaded whole.
"""
from __future__ import annotations

import hashlib
import os
import sys
from collections.abc import Mapping
from datetime import datetime, timezone
from pathlib import Path

import numpy as np
import pandas as pd

from ..core.validate import SummaryError
from .._version import __version__

__all__ = ["hash_array", "hash_file", "provenance", "provenance_lines", "jsonable"]

_BLOCK_BYTES = 8 * 2**20  # hash in 8 MB blocks so memory-mapped draws are never loaded whole

def hash_array(values, *, block_bytes: int = _BLOCK_BYTES) -> str:
    """SHA-256 of an array's bytes in C order, read in row blocks (memory maps are never loaded whole).

    Equal to ``hashlib.sha256(np.ascontiguousarray(values).tobytes()).hexdigest()``.
    """
    arr = np.asarray(values) if not isinstance(values, np.ndarray) else values
    if arr.dtype.kind == "O":
        raise SummaryError("`values` has dtype object; only arrays of numbers, booleans or fixed-size strings can be hashed.")
    h = hashlib.sha256()
    if arr.ndim == 0 or arr.shape[0] == 0:
        h.update(np.ascontiguousarray(arr).tobytes())
        return h.hexdigest()
    row_bytes = max(1, arr[0].nbytes)
    step = max(1, block_bytes // row_bytes)
    for start in range(0, arr.shape[0], step):
        h.update(np.ascontiguousarray(arr[start:start + step]).tobytes())
    return h.hexdigest()


def hash_file(path, *, block_bytes: int = _BLOCK_BYTES) -> str:
    """SHA-256 of a file's bytes, read in blocks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(block_bytes), b""):
            h.update(block)
    return h.hexdigest()


def _describe_input(role: str, value) -> dict:
    if isinstance(value, (str, os.PathLike)):
        p = Path(value)
        if not p.is_file():
            raise SummaryError(f"`inputs[{role!r}]` is {str(p)!r}, which is not an existing file.")
        return {"role": role, "name": p.name, "path": str(p.resolve()), "bytes": p.stat().st_size, "sha256": hash_file(p)}
    if isinstance(value, pd.DataFrame):
        # pandas' per-row uint64 hash is the exact-content fingerprint pandas itself offers; sha256 folds it to one key.
        rows = pd.util.hash_pandas_object(value, index=False).to_numpy()
        return {"role": role, "name": f"{role} (in-memory table)", "shape": list(value.shape),
                "columns": [str(c) for c in value.columns], "sha256_of_row_hashes": hash_array(rows)}
    if isinstance(value, np.ndarray):
        return {"role": role, "name": f"{role} (in-memory array)", "shape": list(value.shape),
                "dtype": str(value.dtype), "sha256": hash_array(value)}
    raise SummaryError(f"`inputs[{role!r}]` must be a file path, a NumPy array or a DataFrame; got {type(value).__name__}.")


def jsonable(x):
    if isinstance(x, Mapping):
        return {str(k): jsonable(v) for k, v in x.items()}
    if isinstance(x, (list, tuple, set)):
        return [jsonable(v) for v in x]
    if isinstance(x, np.ndarray):
        return jsonable(x.tolist())
    if isinstance(x, (np.bool_, bool)):
        return bool(x)
    if isinstance(x, np.integer):
        return int(x)
    if isinstance(x, (np.floating, float)):
        return None if not np.isfinite(x) else float(x)
    if x is None or isinstance(x, (int, str)):
        return x
    return str(x)


def _versions() -> dict:
    out = {"python": sys.version.split()[0], "numpy": np.__version__, "pandas": pd.__version__}
    for mod in ("sklearn", "pygam", "plotly"):
        m = sys.modules.get(mod)  # only report what was used; importing here would slow every export
        if m is not None and hasattr(m, "__version__"):
            out["scikit-learn" if mod == "sklearn" else mod] = m.__version__
    return out


def _is_draws(obj) -> bool:
    return obj is not None and hasattr(obj, "describe") and hasattr(obj, "n_draws") and hasattr(obj, "blocks")


def _describe_draws(draws) -> dict:
    out = jsonable(draws.describe())
    # Hash the matrices as the user gave them (not the weighted values the reducers see), so the
    # checksum identifies the input.
    values = getattr(draws, "values", None)
    if values is not None:
        out["sha256"] = hash_array(values)
    den = getattr(draws, "uptake_values", None)
    if den is not None:
        out["uptake_sha256"] = hash_array(den)
    return out


def provenance(draws_or_results=None, *, inputs=None, settings=None) -> dict:
    """A record of how the exported numbers were made.

    Parameters
    ----------
    draws_or_results : EffectDraws, summary result, list or dict of results, optional
        Draws contribute their shape, dtype and a SHA-256 of their values (read in blocks);
        results contribute their ``.settings`` (kind, depth, minimum size, columns, ...).
    inputs : dict of str -> path, array or DataFrame, or list of paths, optional
        Input files are recorded by name, absolute path, size and SHA-256 checksum;
        in-memory arrays by shape, dtype and a SHA-256 of their bytes.
    settings : dict, optional
        Further settings, e.g. ``{"level": 0.95, "interval": "equal-tailed"}``.

    Returns
    -------
    dict
        JSON-ready: ``package`` (name, version), ``created_utc`` (ISO 8601), ``environment``,
        ``inputs`` (list), ``draws`` (if given), ``summaries`` (name -> settings), ``settings``.
    """
    record = {
        "package": {"name": "summarize_widgets", "version": __version__},
        "created_utc": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "environment": _versions(),
        "inputs": [],
        "summaries": {},
        "settings": {},
    }
    if inputs is not None:
        if isinstance(inputs, (str, os.PathLike)):
            inputs = [inputs]
        items = inputs.items() if isinstance(inputs, Mapping) else ((Path(p).stem, p) for p in inputs)
        record["inputs"] = [_describe_input(str(k), v) for k, v in items]
    objs = draws_or_results
    if objs is None:
        objs = {}
    elif not isinstance(objs, (Mapping, list, tuple)):
        objs = [objs]
    named = objs.items() if isinstance(objs, Mapping) else ((None, o) for o in objs)
    seen_draws = []
    for name, obj in named:
        draws = obj if _is_draws(obj) else getattr(obj, "draws", None)
        if _is_draws(draws) and not any(draws is d for d in seen_draws):
            seen_draws.append(draws)  # results share their draws: hash each matrix once
            if "draws" not in record:
                record["draws"] = _describe_draws(draws)
            else:
                record.setdefault("other_draws", []).append(_describe_draws(draws))
        if _is_draws(obj):
            continue
        if hasattr(obj, "settings"):
            s = dict(obj.settings)
            key = name or str(s.get("summary", type(obj).__name__))
            while key in record["summaries"]:
                key += "_"
            record["summaries"][key] = jsonable(s)
        else:
            raise SummaryError(
                f"`draws_or_results` items must be EffectDraws or summary results with `.settings`; got {type(obj).__name__}."
            )
    if settings is not None:
        if not isinstance(settings, Mapping):
            raise SummaryError(f"`settings` must be a dict; got {type(settings).__name__}.")
        record["settings"] = jsonable(settings)
    return record


def _strip(s: str) -> str:
    return "".join(ch if ch >= " " else " " for ch in str(s))


def provenance_lines(prov: Mapping, *, full: bool = True) -> list[str]:
    """Human-readable provenance: with ``full``, several lines with full checksums; otherwise one short line."""
    if not isinstance(prov, Mapping) or "package" not in prov:
        raise SummaryError("`provenance` must be a dict made by summarize_widgets.export.provenance().")
    pkg = prov["package"]
    head = f"{pkg.get('name', 'summarize_widgets')} {pkg.get('version', '?')}, {prov.get('created_utc', '?')}"
    inputs = prov.get("inputs", [])
    digest = lambda d: d.get("sha256") or d.get("sha256_of_row_hashes") or "?"  # noqa: E731
    if not full:
        src = "; ".join(f"{d.get('name')} (sha256 {digest(d)[:12]})" for d in inputs)
        if not src and "draws" in prov and "sha256" in prov["draws"]:
            src = f"in-memory draws (sha256 {prov['draws']['sha256'][:12]})"
        return [f"Made with {head}" + (f" from {src}" if src else "") + "; details in provenance.json."]
    lines = [f"Made with {head}"]
    lines += [f"input {d.get('role')}: {d.get('name')} sha256={digest(d)}" for d in inputs]
    if "draws" in prov:
        d = prov["draws"]
        lines.append("draws: " + ", ".join(f"{k}={d[k]}" for k in ("n_draws", "n_units", "n_chains", "dtype", "sha256") if k in d))
    for name, s in prov.get("summaries", {}).items():
        lines.append(f"summary {name}: " + ", ".join(f"{k}={v}" for k, v in s.items()))
    if prov.get("settings"):
        lines.append("settings: " + ", ".join(f"{k}={v}" for k, v in prov["settings"].items()))
    return [_strip(line) for line in lines]
