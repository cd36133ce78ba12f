"""Notebook widgets: the :class:`Explorer` and the summary-tree view it is built around."""
from .explorer import Explorer
from .tree_view import TreeView

__all__ = ["Explorer", "TreeView"]
