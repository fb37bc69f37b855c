"""Figures for comparisons (optional extra: ``pip install fleetpower[plot]``).

Owns: the comparison figures (PNG and SVG). Imports matplotlib only when called; may import
``limits`` and the comparison's results; nothing imports it but ``cli``.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from ..errors import FleetpowerError

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


#: formats each figure is written in (one file per format, the format from the suffix)
FIGURE_FORMATS = ("png", "svg")
#: the figures of a comparison (:func:`comparison_figures`), by file stem
COMPARISON_FIGURES = ("waveforms", "spectrum", "lifetime_cost")


def figure_paths(folder, stems) -> list[Path]:
    """The files the figures ``stems`` are written to in ``folder`` (every format)."""
    return [Path(folder) / f"{stem}.{ext}" for stem in stems for ext in FIGURE_FORMATS]


def _save(fig, out: Path, stem: str, overwrite: bool = True) -> list[Path]:
    """Write ``fig`` as ``out/stem.<format>`` for every format, each atomically
    (:func:`fleetpower.io.files.write_atomic`: a temporary file in ``out``, then a rename);
    an existing file is refused unless ``overwrite``."""
    from ..io.files import write_atomic

    paths = []
    for p in figure_paths(out, [stem]):
        ext = p.suffix[1:]
        write_atomic(p, lambda fh, ext=ext: fig.savefig(fh, dpi=110, format=ext),
                     overwrite=overwrite, option="--plots")
        paths.append(p)
    return paths


#: linear axes: a data span below this fraction of the signal's magnitude is shown as this
#: fraction (a flat line stays flat instead of magnifying rounding noise); common practice,
#: no source
SPAN_FLOOR_FRAC = 1e-3
#: spectra: orders below this fraction of the fundamental are not drawn. The engine's
#: harmonic error is 6.7e-5 of I1 at the default step (DEVELOPERS.md, "Accuracy per
#: cost"), so a bar below 1e-4 of I1 is indistinguishable from zero.
SPECTRUM_FLOOR_FRAC = 1e-4


def floor_span(lo: float, hi: float, frac: float = SPAN_FLOOR_FRAC):
    """Axis limits that show at least ``frac`` of the signal's magnitude.

    Returns ``(lo, hi, floored)``: unchanged with ``floored`` False when the data's span
    ``hi - lo`` is at least ``frac × max(|lo|, |hi|)``; otherwise limits centred on the
    data with that span and ``floored`` True. Zero data are left to the plotting library.
    """
    scale = max(abs(lo), abs(hi))
    need = frac * scale
    if not (np.isfinite(lo) and np.isfinite(hi)) or scale == 0.0 or hi - lo >= need:
        return lo, hi, False
    mid = 0.5 * (lo + hi)
    return mid - 0.5 * need, mid + 0.5 * need, True


def _floor_axis(ax, values, axis: str = "y", unit: str = "") -> bool:
    """Apply :func:`floor_span` to ``ax``'s y (or x) axis for ``values``; note it on the axes."""
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if not v.size:
        return False
    lo, hi, floored = floor_span(float(v.min()), float(v.max()))
    if floored:
        (ax.set_ylim if axis == "y" else ax.set_xlim)(lo, hi)
        span = float(v.max() - v.min())
        ax.text(0.01, 0.02, f"variation {span:.2g} {unit} is below "
                f"{SPAN_FLOOR_FRAC:.1%} of the signal: axis shows that much",
                transform=ax.transAxes, fontsize=7, color="0.35", va="bottom")
    return floored


def _rated(design, unit):
    from ..limits.applicability import rated_state

    return next(s for s in unit.states if s.state == rated_state(design))


_HARMONIC_ROW = re.compile(r"i_h(\d+)_a$")


def harmonic_limit_markers(unit) -> tuple[dict[int, float], str, str]:
    """The IEC 61000-3-2 per-harmonic limits to draw on a unit's spectrum.

    Returns ``(limits_a, label, note)``: ``limits_a`` maps harmonic order to the evaluated
    limit [A], only for rows that are in scope and counted (verdict pass or fail); it is
    empty when the set is exempt, for information, out of scope or not evaluated, and
    ``note`` then says why no limit is drawn (empty when limits are drawn).
    """
    from ..limits.applicability import COUNTED, IN_SCOPE

    rows = [r for r in unit.compliance if str(r["set"]).startswith("iec61000-3-2")]
    limits, label, note = {}, "", ""
    for r in rows:
        m = _HARMONIC_ROW.match(str(r["quantity"]))
        if (m and r["limit"] is not None and r.get("scope", IN_SCOPE) == IN_SCOPE
                and r["verdict"] in COUNTED):
            limits[int(m.group(1))] = float(r["limit"])
    if rows:
        cls = str(rows[0]["set"]).rsplit("-", 1)[-1].upper()
        label = f"IEC 61000-3-2 Class {cls} limit"
        if not limits:
            verdicts = sorted({str(r["verdict"]) for r in rows})
            note = f"{label}: {', '.join(verdicts)}, not drawn"
    return limits, label, note


def _legend_above(ax, **kw):
    """The legend in one row above the axes' right corner (the title sits at the left)."""
    return ax.legend(fontsize=7, loc="lower right", bbox_to_anchor=(1.0, 1.0), ncol=2,
                     frameon=False, borderaxespad=0.1, **kw)


def waveform_figure(plt, items):
    """Mains voltage and input current over one cycle at the rated state, one axes per
    ``(design, unit)`` item; a legend on every axes."""
    n = len(items)
    fig, axes = plt.subplots(n, 1, figsize=(7, 2.4 * n), squeeze=False)
    for ax, (design, unit) in zip(axes[:, 0], items, strict=True):
        r = _rated(design, unit)
        t_ms = r.t_s * 1e3
        (lv,) = ax.plot(t_ms, r.v_v, color="0.5", lw=1, label="mains voltage [V]")
        ax.set_ylabel("voltage [V]")
        ax2 = ax.twinx()
        i_ma = r.i_a * 1e3
        (li,) = ax2.plot(t_ms, i_ma, color="tab:red", lw=1.2, label="input current [mA]")
        ax2.set_ylabel("current [mA]")
        _floor_axis(ax2, i_ma, unit="mA")
        ax.set_xlim(t_ms[0], t_ms[-1])
        ax.set_title(f"{design.name}: state '{r.state}'", fontsize=9, loc="left")
        _legend_above(ax, handles=[lv, li])
    axes[-1, 0].set_xlabel("time [ms]")
    fig.tight_layout()
    return fig


def spectrum_figure(plt, items):
    """Harmonic input current per order (1..40) at the rated state, one axes per
    ``(design, unit)`` item, on a log axis floored at :data:`SPECTRUM_FLOOR_FRAC` of the
    fundamental; IEC 61000-3-2 limits drawn only where they apply
    (:func:`harmonic_limit_markers`)."""
    n = len(items)
    fig, axes = plt.subplots(n, 1, figsize=(7, 2.4 * n), squeeze=False)
    h = np.arange(1, 41)
    for ax, (design, unit) in zip(axes[:, 0], items, strict=True):
        r = _rated(design, unit)
        i_ma = np.abs(r.pq.i_h_a[1:41]) * 1e3
        floor = SPECTRUM_FLOOR_FRAC * max(float(i_ma[0]), float(i_ma.max()))
        shown = i_ma >= floor
        ax.bar(h[shown], i_ma[shown], color="tab:blue", label="unit's current [mA rms]")
        limits, label, note = harmonic_limit_markers(unit)
        top = float(i_ma.max())
        if limits:
            lh = np.array(sorted(limits))
            la = np.array([limits[k] for k in lh]) * 1e3
            keep = lh <= 40
            ax.plot(lh[keep], la[keep], "k_", ms=9, mew=1.5, label=f"{label} [mA]")
            top = max(top, float(la[keep].max()) if keep.any() else top)
        ax.set_yscale("log")
        if floor > 0:
            ax.set_ylim(floor, 100.0 * top)  # two decades free for the notes
        hidden = int((~shown).sum())
        notes = [note] if note else []
        if hidden:
            notes.append(f"{hidden} orders below {SPECTRUM_FLOOR_FRAC:.0e} of I1 "
                         "(solver accuracy) not drawn")
        if notes:
            ax.text(0.06, 0.96, "\n".join(notes), transform=ax.transAxes, fontsize=7,
                    color="0.35", va="top")
        ax.set_xlim(0, 41)
        ax.set_ylabel("current [mA rms]")
        ax.set_title(design.name, fontsize=9, loc="left")
        _legend_above(ax)
    axes[-1, 0].set_xlabel("harmonic order")
    fig.tight_layout()
    return fig


def comparison_figures(cmp, folder, overwrite: bool = True) -> list[Path]:
    """Write three figures (PNG and SVG each) for a comparison.

    - ``waveforms``: mains voltage and input current over one cycle, one axes per design
      (at its rated state), :func:`waveform_figure`;
    - ``spectrum``: harmonic current per unit, with the IEC 61000-3-2 limits only where
      they apply to that design, :func:`spectrum_figure`;
    - ``lifetime_cost``: cumulative discounted cost over the service life, all designs.

    An existing file is refused unless ``overwrite`` (the CLI's ``--force``). Returns the
    paths written.
    """
    plt = require_matplotlib()
    out = Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    items = [(c.design, c.unit) for c in cmp.candidates]
    written: list[Path] = []
    for stem, make in (("waveforms", waveform_figure), ("spectrum", spectrum_figure)):
        fig = make(plt, items)
        written += _save(fig, out, stem, overwrite)
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
    written += _save(fig, out, "lifetime_cost", overwrite)
    plt.close(fig)
    return written
