"""Figures for comparisons (optional extra: ``pip install fleetpower[plot]``).

Owns: the comparison figures (PNG and SVG). Imports matplotlib only when called; may import
``limits`` and the comparison's results; nothing imports it but ``cli``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import FleetpowerError
from ..limits.tables import load_limit_set

PLOT_HINT = "plots need matplotlib: pip install 'fleetpower[plot]'"


def require_matplotlib():
    """Import matplotlib with a headless backend, or raise a clear error."""
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        raise FleetpowerError(PLOT_HINT) from None
    return plt


def _save(fig, out: Path, stem: str) -> list[Path]:
    paths = []
    for ext in ("png", "svg"):
        p = out / f"{stem}.{ext}"
        tmp = out / f".{stem}.tmp.{ext}"
        fig.savefig(tmp, dpi=110, format=ext)
        tmp.replace(p)
        paths.append(p)
    return paths


def comparison_figures(cmp, folder) -> list[Path]:
    """Write three figures (PNG and SVG each) for a comparison.

    - ``waveforms``: mains voltage and input current over one cycle, one axes per design
      (at its rated state);
    - ``spectrum``: harmonic current per unit against the IEC 61000-3-2 Class A limit
      line (for reference: it applies only above 75 W), one axes per design;
    - ``lifetime_cost``: cumulative discounted cost over the service life, all designs.

    Returns the paths written.
    """
    plt = require_matplotlib()
    from ..limits.applicability import rated_state

    out = Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    n = len(cmp.candidates)
    written: list[Path] = []
    fig, axes = plt.subplots(n, 1, figsize=(7, 2.4 * n), squeeze=False)
    for ax, c in zip(axes[:, 0], cmp.candidates, strict=True):
        r = next(s for s in c.unit.states if s.state == rated_state(c.design))
        t_ms = r.t_s * 1e3
        ax.plot(t_ms, r.v_v, color="0.5", lw=1, label="mains voltage [V]")
        ax.set_ylabel("V")
        ax2 = ax.twinx()
        ax2.plot(t_ms, r.i_a * 1e3, color="tab:red", lw=1.2, label="input current [mA]")
        ax2.set_ylabel("mA")
        ax.set_title(f"{c.design.name}: state '{r.state}'", fontsize=9)
    axes[-1, 0].set_xlabel("time [ms]")
    fig.tight_layout()
    written += _save(fig, out, "waveforms")
    plt.close(fig)

    limits = load_limit_set("iec61000-3-2-class-a")
    lim_h = limits["harmonic"].to_numpy(dtype=float)
    lim_a = limits["limit"].to_numpy(dtype=float)
    fig, axes = plt.subplots(n, 1, figsize=(7, 2.4 * n), squeeze=False)
    for ax, c in zip(axes[:, 0], cmp.candidates, strict=True):
        r = next(s for s in c.unit.states if s.state == rated_state(c.design))
        h = np.arange(1, 41)
        ax.bar(h, np.abs(r.pq.i_h_a[1:41]) * 1e3, color="tab:blue", label="unit [mA]")
        ax.plot(lim_h, lim_a * 1e3, "k_", ms=8, label="Class A limit [mA] (> 75 W only)")
        ax.set_yscale("log")
        ax.set_ylabel("mA rms")
        ax.set_title(c.design.name, fontsize=9)
        ax.legend(fontsize=7, loc="upper right")
    axes[-1, 0].set_xlabel("harmonic order")
    fig.tight_layout()
    written += _save(fig, out, "spectrum")
    plt.close(fig)

    fig, ax = plt.subplots(figsize=(7, 3.5))
    for c in cmp.candidates:
        ax.plot(c.lifetime.index, c.lifetime["cost_cumulative_discounted"], marker="o",
                ms=3, label=c.design.name)
    ax.set_xlabel("year")
    ax.set_ylabel(f"cumulative discounted cost [{cmp.currency}]")
    ax.set_title(f"{cmp.fleet_name}: cost of ownership", fontsize=9)
    ax.legend(fontsize=7)
    ax.grid(alpha=0.3)
    fig.tight_layout()
    written += _save(fig, out, "lifetime_cost")
    plt.close(fig)
    return written
