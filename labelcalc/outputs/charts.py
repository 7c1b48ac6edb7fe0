"""Charts for substitution sweeps (matplotlib, drawn in the project's own style)."""

from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

# Our own palette (colour-blind-safe order) with a line style and a marker per series, so no two series
# look alike even in grey print, and markers sit at staggered points so coinciding lines stay visible.
PALETTE = ["#0f5f6b", "#c26a1b", "#5b4a9b", "#3f7f2f", "#9b2d4a", "#6b6b6b", "#1f78b4", "#b8860b", "#008b8b", "#8b4513"]
STYLES = ["-", "--", "-.", ":", (0, (5, 1, 1, 1)), (0, (3, 1, 1, 1, 1, 1))]
MARKERS = ["o", "s", "^", "D", "v", "P", "X", "*", "<", ">"]


def sweep_series(rows) -> dict[str, list[tuple[float, float | None]]]:
    """Data series of a sweep chart: available energy and each market's declared energy per serving."""
    series: dict[str, list[tuple[float, float | None]]] = {}
    for x, points in rows:
        for p in points:
            tag = "" if p.scenario == "nominal" else f" ({p.scenario})"
            series.setdefault(f"available{tag}", [])
            if not series[f"available{tag}"] or series[f"available{tag}"][-1][0] != x:
                series[f"available{tag}"].append((x, p.available_kcal_per_serving))
            series.setdefault(f"declared {p.market}{tag}", []).append((x, p.declared_kcal_per_serving))
    return series


def series_name(key: str) -> str:
    """A series' name in words: 'declared us (high)' -> 'Declared energy, US (high end)'."""
    scen = ""
    if key.endswith(")") and " (" in key:
        key, scen = key[: key.rindex(" (")], f" ({key[key.rindex('(') + 1 : -1]} end)"
    if key == "available":
        return "Available energy" + scen
    return f"Declared energy, {key.split(' ', 1)[1].upper()}{scen}"


def merge_coinciding(series: dict[str, list[tuple[float, float | None]]]) -> dict[str, list]:
    """Series with the same points drawn once, named together ('Declared energy, EU = UK (low end)'), so no
    line hides another."""
    groups: dict[tuple, list[str]] = {}
    for key, pts in series.items():
        groups.setdefault(tuple((x, None if y is None else round(y, 6)) for x, y in pts), []).append(key)
    out: dict[str, list] = {}
    for group, keys in groups.items():
        names = [series_name(k) for k in keys]
        declared = [n for n in names if n.startswith("Declared energy, ")]
        if len(names) > 1 and declared:
            scen = {n[n.find(" (") :] if " (" in n else "" for n in names}
            markets = " = ".join(n.removeprefix("Declared energy, ").split(" (")[0] for n in declared)
            head = "Available energy = declared, " if len(declared) < len(names) else "Declared energy, "
            name = head + markets + (scen.pop() if len(scen) == 1 else "")
        else:
            name = " = ".join(names)
        out[name] = list(group)
    return out


def threshold_rows(firsts: dict[str, float], names: dict[str, str] | None = None) -> list[tuple[str, float, str]]:
    """(mark, level, what) for the table under the chart, in level order; one mark per distinct level."""
    names = names or {}
    levels = sorted(set(firsts.values()))
    out = []
    for key, x in sorted(firsts.items(), key=lambda kv: (kv[1], kv[0])):
        out.append((str(levels.index(x) + 1), x, names.get(key, key)))
    return out


def sweep_chart(
    rows, firsts: dict[str, float], title: str, old: str, new: str, out_stem: Path, names: dict[str, str] | None = None
) -> list[Path]:
    """Energy per serving against the replacement level, each threshold marked by a numbered line and
    listed in a table under the chart (level and what starts there, by the packs' names)."""
    series = sweep_series(rows)
    table = threshold_rows(firsts, names) or [("-", float("nan"), "no claim or statement starts over the sweep")]
    # layout in inches: title, chart, axis label, table heading, one line per threshold, footer
    row_in, W = 0.18, 10.0
    H = 0.45 + 3.4 + 0.65 + 0.45 + row_in * len(table) + 0.35
    fig = plt.figure(figsize=(W, H), dpi=110)
    ax = fig.add_axes((0.8 / W, 1 - (0.45 + 3.4) / H, 5.6 / W, 3.4 / H))
    for i, (name, pts) in enumerate(merge_coinciding(series).items()):
        xs = [x for x, y in pts if y is not None]
        ys = [y for x, y in pts if y is not None]
        every = max(1, len(xs) // 8)
        ax.plot(
            xs,
            ys,
            linestyle=STYLES[i % len(STYLES)],
            color=PALETTE[i % len(PALETTE)],
            linewidth=2.2 if name.startswith("available") else 1.5,
            marker=MARKERS[i % len(MARKERS)],
            markersize=4,
            markevery=(i % every, every),
            label=name,
            zorder=3 + (len(series) - i),
        )
    ymin, ymax = ax.get_ylim()
    for mark in dict.fromkeys((m, x) for m, x, _ in table if x == x):
        ax.axvline(mark[1], color="#999999", linewidth=0.8, linestyle=":", zorder=1)
        ax.text(mark[1], ymax, mark[0], fontsize=7, ha="center", va="bottom", color="#333333")
    ax.set_ylim(ymin, ymax)
    ax.set_xlabel(f"share of {old} replaced by {new} [%]")
    ax.set_ylabel("energy per serving [kcal]")
    ax.set_title(title, fontsize=10, loc="left", pad=14)
    ax.grid(True, color="#e6e6e6", linewidth=0.6)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(1.02, 1.0))
    # the thresholds, as a table under the chart: numbered marks match the numbers over the dotted lines
    top = 1 - (0.45 + 3.4 + 0.65) / H

    def line(k: int, cells: tuple[str, str, str], weight: str = "normal") -> None:
        yy = top - (0.3 + row_in * k) / H
        for xin, txt in zip((0.8, 1.3, 2.4), cells):
            fig.text(xin / W, yy, txt, fontsize=7, weight=weight, va="top")

    fig.text(0.8 / W, top, "Where each claim or statement starts", fontsize=8, weight="bold", va="top")
    line(0, ("mark", "from [%]", "claim or statement (market: name as in the rule pack)"), "bold")
    for k, (num, level, what) in enumerate(table, start=1):
        line(k, (num, "" if level != level else f"{level:g}", what if len(what) <= 120 else what[:117] + "..."))
    fig.text(
        0.01,
        0.005,
        "DRAFT — figures for development; verify labels against current local regulation.",
        fontsize=6.5,
        color="#a11d1d",
    )
    png, pdf = out_stem.with_suffix(".png"), out_stem.with_suffix(".pdf")
    fig.savefig(png, metadata={"Software": "labelcalc"})
    fig.savefig(pdf, metadata={"Creator": "labelcalc", "Producer": "labelcalc", "CreationDate": None})
    plt.close(fig)
    return [png, pdf]
