"""Figures and a self-contained HTML decision memo for a planned trial.

matplotlib is imported only when a figure is drawn, so importing this package is cheap.

Examples
--------
>>> import assurance as asr
>>> from assurance.report import memo_text_summary
>>> design = asr.TrialDesign(asr.ContinuousEndpoint(sigma=10.0), asr.Normal(4.0, 2.5),
...                          title="Example")
>>> ds = asr.evaluate(design, [100, 200, 400])
>>> memo_text_summary(design, ds).splitlines()[0]
'Example'
"""

from __future__ import annotations

from .figures import (
    figure_bytes,
    passable_probability,
    plot_decomposition,
    plot_fit,
    plot_interval_width,
    plot_power_and_assurance,
    plot_prior,
    plot_sensitivity_map,
    plot_zone_characteristic,
    plot_zones,
    save_figure,
)
from .memo import (
    DEFAULT_CAUTIONS,
    memo_html,
    memo_text_summary,
    plan_memo_html,
    write_memo,
    write_plan_memo,
)
from .model_figures import model_figure_makers, plot_model_success, plot_model_widths
from .model_memo import model_memo_html, write_model_memo
from .notebook import overview_html

__all__ = [
    "plot_prior",
    "plot_power_and_assurance",
    "plot_decomposition",
    "plot_fit",
    "plot_interval_width",
    "plot_zones",
    "plot_zone_characteristic",
    "plot_sensitivity_map",
    "save_figure",
    "figure_bytes",
    "passable_probability",
    "write_memo",
    "memo_html",
    "plan_memo_html",
    "write_plan_memo",
    "memo_text_summary",
    "overview_html",
    "model_memo_html",
    "write_model_memo",
    "model_figure_makers",
    "plot_model_success",
    "plot_model_widths",
    "DEFAULT_CAUTIONS",
]
