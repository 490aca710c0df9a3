"""Subsampling-study plots: distance to the reference and significant counts against landmark count."""

from __future__ import annotations

from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import FixedLocator, FuncFormatter, LogLocator, MaxNLocator, NullFormatter, NullLocator

from tdakit._validation import fail
from tdakit.plotting.style import INK, axis_units, dimension_style, new_figure, styled

_METHOD_STYLES = ("-", "--", "-.", ":")


@styled
def plot_study(study, *, figure=None, preset: str = "double", unit: str | None = None) -> dict:
    """Two panels: worst bottleneck distance to the reference (seed range shaded, certificate thin grey)
    and the number of significant features; colour and marker give the dimension, line style the method.

    Parameters
    ----------
    unit : str, optional
        The coordinates' unit for the distance axis (default: the study's ``unit`` when it has one).

    Returns
    -------
    dict
        ``figure``, ``distance_ax``, ``count_ax``, ``lines`` keyed by (panel, method, dim).
    """
    from tdakit.study import StudyResult

    if not isinstance(study, StudyResult):
        raise fail("study", "plot_study", "a StudyResult from subsampling_study", study)
    figure = figure or new_figure(preset, aspect=0.42 if preset == "double" else 1.35)
    left, right = figure.subplots(*((1, 2) if preset == "double" else (2, 1)))
    dims = range(study.options.complex.max_dim + 1)
    lines = {}
    for i, method in enumerate(study.options.methods):
        cells = study.cells[study.cells["method"] == method]
        grouped = cells.groupby("n_landmarks")
        counts = sorted(cells["n_landmarks"].unique())
        for k in dims:
            style = dimension_style(k)
            line = {"color": style.line, "ls": _METHOD_STYLES[i % 4], "marker": style.marker, "ms": 3.5,
                    "mfc": style.color, "mec": style.edge, "mew": 0.6}
            column = grouped[f"bottleneck_H{k}"]
            lines[("distance", method, k)] = left.plot(counts, column.max(), **line)[0]
            left.fill_between(counts, column.min(), column.max(), color=style.line, alpha=0.12, lw=0)
            significant = grouped[f"significant_H{k}"]
            lines[("count", method, k)] = right.plot(counts, significant.median(), **line)[0]
            right.fill_between(counts, significant.min(), significant.max(), color=style.line, alpha=0.12, lw=0)
        certificate = grouped["certificate"].max()
        if certificate.notna().any():
            lines[("certificate", method, None)] = left.plot(
                counts, certificate, color="#7d8589", ls=_METHOD_STYLES[i % 4], lw=0.8)[0]
    _labels(left, right, study, unit if unit is not None else getattr(study, "unit", None))
    _legend(figure, study, dims, any(key[0] == "certificate" for key in lines))
    return {"figure": figure, "distance_ax": left, "count_ax": right, "lines": lines}


def _labels(left, right, study, unit):
    counts = list(study.options.counts)
    for ax in (left, right):
        ax.set_xscale("log")
        ax.xaxis.set_major_locator(FixedLocator(counts))
        ax.xaxis.set_minor_locator(NullLocator())
        ax.set_xticklabels([str(c) for c in counts])
        ax.set_xlabel("landmarks")
    left.set_yscale("log")
    left.yaxis.set_major_locator(LogLocator(subs=(1.0, 2.0, 5.0), numticks=6))
    left.yaxis.set_major_formatter(FuncFormatter(lambda value, _: f"{value:g}"))
    left.yaxis.set_minor_formatter(NullFormatter())
    left.set_ylabel(f"bottleneck to reference ({unit or axis_units(study.reference_diagrams)})")
    left.set_title(f"Distance to the {study.reference['kind']}", loc="left")
    right.yaxis.set_major_locator(MaxNLocator(integer=True))
    right.set_ylabel("significant features")
    right.set_title("Significant features (median)", loc="left")


def _legend(figure, study, dims, certificate):
    handles = [Line2D([], [], color=dimension_style(k).line, marker=dimension_style(k).marker, ms=3.5,
                      mfc=dimension_style(k).color, mec=dimension_style(k).edge, label=f"H{k}") for k in dims]
    handles += [Line2D([], [], color=INK, ls=_METHOD_STYLES[i % 4], label=method)
                for i, method in enumerate(study.options.methods)]
    handles.append(Patch(color=INK, alpha=0.12, lw=0, label="range over seeds"))
    if certificate:
        handles.append(Line2D([], [], color="#7d8589", lw=0.8, label="certificate (bound)"))
    columns = 4 if figure.get_figwidth() > 4.5 else 2
    figure.legend(handles=handles, loc="outside lower center", ncols=min(len(handles), columns))
