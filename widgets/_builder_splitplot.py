"""The design builder's split-plot controls: a hard-to-change toggle per factor, whole plots for optimal designs,
the whole plots in the preview, and the design functions' warnings (e.g. too few whole plots) shown in words.

Which designs hold hard-to-change factors is levelwise's decision: full and fractional factorials make whole plots,
optimal designs with a number of whole plots search over them, and every other family refuses with a message
naming the factors (shown in the builder's status line like any other error).
"""

from __future__ import annotations

import html
import warnings

import ipywidgets as ipw

from levelwise import LevelwiseWarning

from ._number import NumberField


def hard_toggle(factor=None) -> ipw.Checkbox:
    """The per-factor "hard to change" checkbox (``lw-hard-to-change``)."""
    return ipw.Checkbox(value=bool(getattr(factor, "hard_to_change", False)), description="hard to change",
                        indent=False, layout=ipw.Layout(width="140px")).add_class("lw-hard-to-change")


def split_plot_options(wide: dict) -> dict:
    """Options of optimal split-plot designs: ``whole_plots`` (0: none) and ``variance_ratio``."""
    return {
        "whole_plots": NumberField(0, integer=True, minimum=0, maximum=10_000,
                                   description="Whole plots (0: none; needs a hard-to-change factor)", **wide),
        "variance_ratio": NumberField(1.0, minimum=0.0, maximum=1e6,
                                      description="Whole-plot / run variance (assumed)", **wide),
    }


def split_plot_keywords(options: dict) -> dict:
    """Keywords for ``optimal_design`` from the option values: none unless whole plots are asked for."""
    if not options.get("whole_plots"):
        return {}
    return {"whole_plots": int(options["whole_plots"]), "variance_ratio": float(options["variance_ratio"])}


def recording(builder, make):
    """*make* (``make(progress) -> Design``) that leaves levelwise's warnings while it built in
    ``builder.build_warnings`` (texts), for the preview to show."""

    def run(progress):
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", LevelwiseWarning)
            design = make(progress)
        builder.build_warnings = [str(w.message) for w in caught if issubclass(w.category, LevelwiseWarning)]
        return design

    return run


def warnings_html(texts) -> str:
    """The build's warnings as HTML (``lw-design-warning``), or ""."""
    unique = list(dict.fromkeys(texts))
    return "".join(f'<div class="lw-design-warning">Warning: {html.escape(t)}</div>' for t in unique)


def split_plot_facts(design) -> list[str]:
    """What the preview says about a split-plot design's whole plots (nothing for other designs)."""
    table = design.table
    if "whole_plot" not in table.columns:
        return []
    meta = getattr(design, "metadata", {})
    sizes = table.groupby("whole_plot").size()
    size = f"{sizes.iloc[0]} runs each" if sizes.nunique() == 1 else f"{sizes.min()} to {sizes.max()} runs each"
    hard = ", ".join(meta.get("hard_to_change") or [f.name for f in design.factors if f.hard_to_change])
    facts = [f'<span class="lw-whole-plots">{len(sizes)} whole plots</span> ({size}; hard to change: '
             f"{html.escape(hard)}, set once per whole plot)"]
    if meta.get("whole_plot_effects"):
        facts.append("whole-plot terms (tested against the whole-plot error) "
                     + html.escape(", ".join(meta["whole_plot_effects"])))
    if meta.get("randomization"):
        facts.append("run order " + html.escape(str(meta["randomization"])))
    return facts
