"""Figures and a self-contained HTML decision memo for a planned trial."""
from .figures import figure_bytes, plot_decomposition, plot_power_and_assurance, plot_prior, save_figure
