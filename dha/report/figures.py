"""Charts of one result, drawn on bare matplotlib ``Figure`` objects (no pyplot, no display:
the figures render through the Agg/PDF canvases only, whatever backend pyplot may use).

``plot_groups_by_carbon_number(result, ax, basis="vol_pct")`` draws a stacked bar chart of the
group amounts per carbon number from the result's ``by_carbon_number``; the PDF draft places it on
page 2. ``groups_by_carbon_number_figure(result)`` returns a stand-alone Figure of the same chart.
"""
from __future__ import annotations

from matplotlib.figure import Figure

from dha.report import BASIS_UNITS, GROUP_KEYS, GROUP_LABELS, carbon_label, is_number
from dha.report.excel import carbon_number_matrix

#: One colour per group (our own palette: distinct in print and for common colour-blindness).
GROUP_COLOURS = {
    "n_paraffins": "#3b6e8f",
    "isoparaffins": "#8fb8d6",
    "olefins": "#d98c2b",
    "naphthenes": "#5c9e5a",
    "aromatics": "#b04a4a",
    "oxygenates": "#8a6fb3",
    "unidentified": "#9a9a9a",
}


def plot_groups_by_carbon_number(result: dict, ax, basis: str = "vol_pct") -> list[str]:
    """Stacked bars: x = carbon number, height = group amount [``basis`` unit], one colour a group.

    Parameters
    ----------
    result : dict
        Result of schema ``dha-result/1``; uses ``by_carbon_number``.
    ax : matplotlib.axes.Axes
        Axes to draw on.
    basis : {"mass_pct", "vol_pct", "mol_pct"}
        Which amount to stack.

    Returns
    -------
    list of str
        The group keys drawn (those with a value somewhere), in stacking order.
    """
    order, cells = carbon_number_matrix(result, basis)
    groups = [g for g in GROUP_KEYS if any(is_number(cells[cn].get(g)) for cn in order)]
    groups += sorted({g for cn in order for g in cells[cn] if g not in GROUP_KEYS}, key=str)
    x = list(range(len(order)))
    bottom = [0.0] * len(order)
    for g in groups:
        heights = [cells[cn].get(g, 0.0) for cn in order]
        ax.bar(x, heights, bottom=bottom, width=0.72, label=GROUP_LABELS.get(g, str(g)),
               color=GROUP_COLOURS.get(g, "#444444"), edgecolor="white", linewidth=0.4)
        bottom = [b + h for b, h in zip(bottom, heights)]
    ax.set_xticks(x)
    ax.set_xticklabels([carbon_label(cn) for cn in order], fontsize=7)
    ax.tick_params(axis="y", labelsize=7)
    ax.set_xlabel("carbon number", fontsize=8)
    ax.set_ylabel(BASIS_UNITS.get(basis, basis), fontsize=8)
    ax.set_ylim(0, max(bottom + [1.0]) * 1.12)
    ax.grid(axis="y", color="#dddddd", linewidth=0.5)
    ax.set_axisbelow(True)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    if groups:
        ax.legend(fontsize=6.5, frameon=False, ncol=min(4, len(groups)), loc="lower center",
                  bbox_to_anchor=(0.5, 1.0), borderaxespad=0.3)
    else:
        ax.text(0.5, 0.5, "no carbon-number data in this result", transform=ax.transAxes,
                ha="center", va="center", fontsize=8, color="#666666")
    return groups


def groups_by_carbon_number_figure(result: dict, basis: str = "vol_pct",
                                   size_in: tuple[float, float] = (6.3, 3.5)) -> Figure:
    """A stand-alone Figure (default 16 cm x 9 cm) of :func:`plot_groups_by_carbon_number`."""
    fig = Figure(figsize=size_in)
    ax = fig.add_subplot(1, 1, 1)
    plot_groups_by_carbon_number(result, ax, basis=basis)
    fig.tight_layout()
    return fig


def octane_contributions_figure(result: dict, size_in: tuple[float, float] = (4.3, 2.4)) -> Figure:
    """Horizontal bars of each group's contribution to the calculated RON and MON, from the
    result's ``octane_contributions`` (summed over carbon numbers)."""
    rows = result.get("octane_contributions") or []
    groups: list[str] = []
    ron: dict[str, float] = {}
    mon: dict[str, float] = {}
    for r in rows:
        g = str(r.get("group"))
        if g not in groups:
            groups.append(g)
        ron[g] = ron.get(g, 0.0) + (r.get("ron") if is_number(r.get("ron")) else 0.0)
        mon[g] = mon.get(g, 0.0) + (r.get("mon") if is_number(r.get("mon")) else 0.0)
    fig = Figure(figsize=size_in)
    ax = fig.add_subplot(1, 1, 1)
    y = list(range(len(groups)))
    ax.barh([v - 0.18 for v in y], [ron[g] for g in groups], height=0.34, label="RON",
            color=[GROUP_COLOURS.get(g, "#444444") for g in groups])
    ax.barh([v + 0.18 for v in y], [mon[g] for g in groups], height=0.34, label="MON",
            color=[GROUP_COLOURS.get(g, "#444444") for g in groups], alpha=0.55)
    ax.set_yticks(y)
    ax.set_yticklabels([GROUP_LABELS.get(g, g) for g in groups], fontsize=7)
    ax.invert_yaxis()
    ax.tick_params(axis="x", labelsize=7)
    ax.set_xlabel("contribution to the octane number [-] (dark: RON, light: MON)", fontsize=7)
    ax.axvline(0, color="#888888", linewidth=0.6)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    if not groups:
        ax.text(0.5, 0.5, "no octane contributions in this result", transform=ax.transAxes,
                ha="center", va="center", fontsize=8, color="#666666")
    fig.tight_layout()
    return fig
