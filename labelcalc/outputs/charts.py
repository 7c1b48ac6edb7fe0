"""Charts for substitution sweeps (matplotlib, drawn in the project's own style)."""

from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

PALETTE = ["#0f5f6b", "#c26a1b", "#5b4a9b", "#3f7f2f", "#9b2d4a", "#6b6b6b"]


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


def sweep_chart(rows, firsts: dict[str, float], title: str, old: str, new: str, out_stem: Path) -> list[Path]:
    series = sweep_series(rows)
    fig, ax = plt.subplots(figsize=(8.2, 5.0), dpi=110)
    for i, (name, pts) in enumerate(series.items()):
        xs = [x for x, y in pts if y is not None]
        ys = [y for x, y in pts if y is not None]
        style = "-" if name.startswith("available") else "--"
        ax.plot(
            xs,
            ys,
            style,
            color=PALETTE[i % len(PALETTE)],
            linewidth=2 if style == "-" else 1.4,
            marker="o" if style == "-" else None,
            markersize=3,
            label=name,
        )
    ymin, ymax = ax.get_ylim()
    for j, (key, x) in enumerate(sorted(firsts.items(), key=lambda kv: kv[1])):
        ax.axvline(x, color="#999999", linewidth=0.8, linestyle=":")
        right = x > 0.6 * max(xx for xx, _ in next(iter(series.values())))
        ax.text(
            x,
            ymax - (ymax - ymin) * (0.04 + 0.055 * (j % 8)),
            (f"{key} from {x:g} % " if right else f" {key} from {x:g} %"),
            fontsize=6.5,
            color="#333333",
            va="top",
            ha="right" if right else "left",
        )
    ax.set_xlabel(f"share of {old} replaced by {new} [%]")
    ax.set_ylabel("energy per serving [kcal]")
    ax.set_title(title, fontsize=10, loc="left")
    ax.grid(True, color="#e6e6e6", linewidth=0.6)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.legend(fontsize=7, frameon=False, loc="lower left")
    fig.text(
        0.01,
        0.005,
        "DRAFT — figures for development; verify labels against current local regulation.",
        fontsize=6.5,
        color="#a11d1d",
    )
    fig.tight_layout(rect=(0, 0.02, 1, 1))
    png, pdf = out_stem.with_suffix(".png"), out_stem.with_suffix(".pdf")
    fig.savefig(png, metadata={"Software": "labelcalc"})
    fig.savefig(pdf, metadata={"Creator": "labelcalc", "Producer": "labelcalc", "CreationDate": None})
    plt.close(fig)
    return [png, pdf]
