"""Simulated studies for demos and tests (invented data; no real people or programs)."""
from .retrofit import (NormalInverseGammaPosterior, RetrofitStudy, draw_uptake_shares, natural_spline_columns,
                       normal_inverse_gamma_posterior, retrofit_basis, simulate_retrofit_study)

__all__ = ["RetrofitStudy", "simulate_retrofit_study", "retrofit_basis", "natural_spline_columns",
           "NormalInverseGammaPosterior", "normal_inverse_gamma_posterior", "draw_uptake_shares"]
