"""The design builder's preview: the run sheet, the design's structure and alias structure, its evaluation, and
the run-sheet downloads (mixed into ``DesignBuilder``)."""

from __future__ import annotations

import base64
import html
import os
import tempfile

import pandas as pd

from levelwise import Design, LevelwiseError, evaluate, write_run_sheet

from ._builder_splitplot import split_plot_facts, warnings_html
from .effects_view import table_html
from .style import fmt


def parse_responses(text: str) -> dict:
    """``"Impact (J), Gloss (GU)"`` -> ``{"Impact": "J", "Gloss": "GU"}``."""
    out = {}
    for part in text.split(","):
        part = part.strip()
        if not part:
            continue
        if part.endswith(")") and "(" in part:
            name, units = part[:-1].split("(", 1)
            out[name.strip()] = units.strip()
        else:
            out[part] = ""
    if not out:
        raise LevelwiseError(f"Name at least one response, e.g. 'Impact (J)'. Got {text!r}.")
    return out


class PreviewMixin:
    """What the builder shows of a design (uses its widgets ``run_sheet``, ``structure``, ``evaluation``, ...)."""

    def _show(self, design: Design) -> None:
        self.design = design
        self.show_error("")
        self.status.value = warnings_html(getattr(self, "build_warnings", ()))  # e.g. too few whole plots
        table = design.table
        self.run_sheet.value = f"<b>Run sheet</b> ({len(table)} runs, in run order)" + table_html(
            table.set_index("run"), "lw-table lw-run-sheet-table"
        )
        kind = str(design.kind)
        facts = [f"<b>{html.escape(kind[:1].upper() + kind[1:])}</b>: {len(design)} runs"]
        if design.resolution:
            roman = {3: "III", 4: "IV", 5: "V", 6: "VI", 7: "VII", 8: "VIII"}.get(design.resolution,
                                                                                   str(design.resolution))
            facts.append(f'resolution <span class="lw-resolution">{roman}</span>')
        if design.generators:
            facts.append("generators " + html.escape(", ".join(design.generators)))
        if design.word_length_pattern is not None and design.generators:
            facts.append("word-length pattern " + html.escape(str(tuple(design.word_length_pattern))))
        if design.block_confounded:
            facts.append("confounded with blocks: " + html.escape(", ".join(design.block_confounded)))
        extra = {k: v for k, v in getattr(design, "metadata", {}).items()
                 if k in ("alpha", "d_efficiency", "average_prediction_variance")}
        facts += [f"{html.escape(k.replace('_', ' '))} {fmt(float(v))}" for k, v in extra.items()]
        facts += split_plot_facts(design)
        aliases = ""
        if design.generators:
            pairs = [(effect, partners) for effect, partners in design.aliases(max_order=2).items() if partners]
            if pairs:
                items = "".join(f"<li>{html.escape(e)} = {html.escape(' = '.join(p))}</li>" for e, p in pairs)
                aliases = (f'<div class="lw-aliases"><b>Alias structure</b> (up to two-factor terms)'
                           f"<ul>{items}</ul></div>")
            else:
                aliases = ('<div class="lw-aliases">No main effect or two-factor interaction is aliased '
                           "with another.</div>")
        if design.kind == "definitive screening":
            aliases += self._second_order_html(design)
        self.structure.value = "; ".join(facts) + "." + aliases
        try:
            ev = evaluate(design, self.eval_model.value)
        except LevelwiseError as exc:
            self.evaluation.value = f"Evaluation for model {html.escape(self.eval_model.value)!s} not available: " \
                                    f"{html.escape(str(exc))}"
        else:
            self.evaluation.value = self._evaluation_html(ev)
            self.evaluation_export.update(self._evaluation_frame(ev))
        self._exports(design)

    @staticmethod
    def _evaluation_frame(ev) -> pd.DataFrame:
        frame = pd.DataFrame({"VIF": ev.vif, f"power (effect {fmt(ev.delta)}σ, α = {fmt(ev.alpha)})": ev.power})
        frame.index.name = "term"
        return frame

    def figure(self):
        """The previewed design's runs as a matplotlib figure (natural units, with a caption)."""
        from levelwise.figures import design_figure

        if self.design is None:
            raise LevelwiseError("Build a design first.")
        return design_figure(self.design)

    @staticmethod
    def _second_order_html(design) -> str:
        """The alias structure among second-order terms (levelwise.second_order_aliasing), in words."""
        from levelwise import second_order_aliasing

        so = second_order_aliasing(design)
        clear = ("every main effect is clear of every two-factor interaction and quadratic effect"
                 if so.max_abs_main_vs_second_order == 0 else
                 f"main effects correlate with second-order terms up to |r| = {fmt(so.max_abs_main_vs_second_order)}")
        pairs = ("no two of them are fully confounded" if not so.confounded_pairs else
                 "fully confounded pairs: " + html.escape(", ".join(f"{a} = {b}" for a, b in so.confounded_pairs)))
        return (f'<div class="lw-aliases"><b>Second-order terms</b>: {clear}; among the second-order terms the '
                f"largest correlation is |r| = {fmt(so.max_abs_among_second_order)}, {pairs}.</div>")

    def _evaluation_html(self, ev) -> str:
        pv = ev.prediction_variance
        per_term = self._evaluation_frame(ev)
        note = ""
        if ev.inestimable:
            note = ('<div class="lw-inestimable">Cannot be estimated with this design: '
                    + html.escape(", ".join(ev.inestimable)) + "</div>")
        return (
            f"<b>What the design can estimate</b> for model {html.escape(self.eval_model.value)}: rank {ev.rank}, "
            f"{ev.df_error} residual degrees of freedom. Relative prediction variance over the region: "
            f"min {fmt(pv['min'])}, mean {fmt(pv['mean'])}, max {fmt(pv['max'])}."
            + note + table_html(per_term, "lw-table lw-evaluation-table")
        )

    def _exports(self, design: Design) -> None:
        """Run-sheet downloads (CSV and XLSX), written by ``levelwise.write_run_sheet``."""
        links = []
        for kind, mime in (("csv", "text/csv"),
                           ("xlsx", "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet")):
            try:
                payload = self.export(kind)
            except LevelwiseError as exc:
                links.append(f"{kind.upper()} not available ({html.escape(str(exc))})")
                continue
            data = base64.b64encode(payload).decode("ascii")
            links.append(
                f'<a download="run-sheet.{kind}" href="data:{mime};base64,{data}">run sheet ({kind.upper()})</a>'
            )
        self.downloads.value = "Download: " + " · ".join(links)

    def export(self, kind: str, path=None) -> bytes:
        """The previewed run sheet as CSV or XLSX bytes (also written to *path* when given)."""
        if self.design is None:
            raise LevelwiseError("Build a design first.")
        if kind not in ("csv", "xlsx"):
            raise LevelwiseError(f"The export kind must be 'csv' or 'xlsx'. Got {kind!r} instead.")
        responses = tuple(parse_responses(self.responses.value))
        with tempfile.TemporaryDirectory() as folder:
            target = os.path.join(folder, f"run-sheet.{kind}")
            write_run_sheet(self.design, target, responses=responses)
            with open(target, "rb") as handle:
                payload = handle.read()
        if path is not None:
            with open(path, "wb") as handle:
                handle.write(payload)
        return payload
