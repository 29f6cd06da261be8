"""matplotlib versions of eccaudit's figures (optional dependency): the same data as the command
line's SVGs, computed by the core."""

from __future__ import annotations

from typing import Any, Dict

import numpy as np


def _figure(fig: Any, n_axes: int, height: float = 3.2) -> "tuple[Any, list]":
    import matplotlib.pyplot as plt

    if fig is None:
        fig = plt.figure(figsize=(8, height * n_axes))
    axes = [fig.add_subplot(n_axes, 1, i + 1) for i in range(n_axes)]
    return fig, axes


def plot_fit(result: Any, fig: Any = None) -> Any:
    """Periodogram (log period, false-alarm levels) and one phase fold per companion."""
    figures = result.figures
    folds = figures.get("phase_folds", [])
    periodogram = figures.get("periodogram")
    fig, axes = _figure(fig, (1 if periodogram else 0) + len(folds))
    i = 0
    if periodogram:
        ax = axes[0]
        ax.plot(periodogram["periods"], periodogram["power"], lw=0.8, color="0.2")
        ax.set_xscale("log")
        for level in periodogram.get("fap_thresholds", []):
            if level.get("power") is None:
                continue
            ax.axhline(level["power"], ls=":", color="0.5", lw=0.8)
            ax.annotate(f"FAP {level['false_alarm_probability']:g}", (periodogram["periods"][0], level["power"]), fontsize=7)
        ax.set_xlabel("period [d]")
        ax.set_ylabel("power")
        ax.set_title("Period search: periodogram of the velocities (companion 1)")
        i = 1
    for fold in folds:
        ax = axes[i]
        i += 1
        phases = np.asarray(fold["phases"])
        ax.errorbar(phases, fold["velocities"], yerr=fold["errors"], fmt="o", ms=3, lw=0.8)
        ax.plot(fold["curve_phases"], fold["curve_velocities"], color="k", lw=1)
        ax.set_xlabel("phase")
        ax.set_ylabel("velocity [m/s]")
        ax.set_title(f"Companion {fold['companion']} folded on P = {fold['period']:.6g} d")
    fig.tight_layout()
    return fig


def plot_priors(result: Any, fig: Any = None) -> Any:
    """Posterior and prior density of e, one panel per prior."""
    panels = result.figure["panels"]
    fig, axes = _figure(fig, len(panels), height=2.4)
    reference = result.figure.get("reference")
    for ax, panel in zip(axes, panels):
        ax.plot(panel["e"], panel["posterior"], color="C0", label="posterior")
        ax.plot(panel["e"], panel["prior"], color="0.5", ls="--", label="prior")
        if panel.get("median") is not None:
            ax.axvline(panel["median"], color="C0", ls=":", lw=1)
        if reference:
            ax.axvline(reference[1], color="C3", lw=1, label=reference[0])
        ax.set_title(panel["title"], fontsize=9)
        ax.set_xlim(0, 1)
        ax.set_xlabel("e")
    axes[0].legend(fontsize=8)
    fig.tight_layout()
    return fig


def plot_bias(figure: Dict[str, Any], fig: Any = None) -> Any:
    """Estimate of e against the injected e: median, 16–84% and 2.5–97.5% bands, 1:1 line."""
    fig, (ax,) = _figure(fig, 1, height=5)
    for n, curve in enumerate(figure["curves"]):
        colour = f"C{n}"
        x = curve["true_e"]
        ax.fill_between(x, curve["q025"], curve["q975"], color=colour, alpha=0.12)
        ax.fill_between(x, curve["q16"], curve["q84"], color=colour, alpha=0.25)
        ax.plot(x, curve["median"], color=colour, marker="o", ms=3, label=curve["name"])
    ax.plot([0, 1], [0, 1], color="k", lw=0.8, ls="--")
    if figure.get("observed") is not None:
        ax.axhline(figure["observed"], color="C3", lw=1, label="real data")
    ax.set_xlim(0, max(max(c["true_e"]) for c in figure["curves"]) + 0.05 if figure["curves"] else 1)
    ax.set_ylim(0, 1)
    ax.set_xlabel("injected e")
    ax.set_ylabel("estimated e")
    ax.legend(fontsize=8)
    fig.tight_layout()
    return fig
