"""Reading posterior draws from files."""
from .load import DRAW_FORMATS, load_draws

__all__ = ["load_draws", "DRAW_FORMATS"]
