"""Figures read back from the matplotlib objects (Agg backend): legends where several series
share axes, axis ranges not scaled to numerical noise, IEC 61000-3-2 limit markers only where
the limits apply to the design."""

from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("matplotlib")  # the test extra (pyproject: test = [..., "matplotlib"])

from fleetpower.io.design_file import load_design  # noqa: E402
from fleetpower.report.plots import (  # noqa: E402
    SPAN_FLOOR_FRAC,
    SPECTRUM_FLOOR_FRAC,
    floor_span,
    harmonic_limit_markers,
    require_matplotlib,
    spectrum_figure,
    waveform_figure,
)
from fleetpower.unit import analyse_unit  # noqa: E402

EX = Path(__file__).resolve().parents[1] / "examples"


@pytest.fixture(scope="module")
def plt():
    return require_matplotlib()


@pytest.fixture(scope="module")
def led_230():
    d = load_design(EX / "led-driver-40w.toml")
    return d, analyse_unit(d)


@pytest.fixture(scope="module")
def led_120():
    # the same lighting driver on 120 V 60 Hz mains: IEC 61000-3-2 covers 220-240 V (and
    # 230/400 V) line-to-neutral mains only (IEC 61000-3-2 clause 1, from memory), so its
    # figures are "for information" there
    d = load_design(EX / "led-driver-40w.toml").on_mains(120.0, 60.0)
    return d, analyse_unit(d)


@pytest.fixture(scope="module")
def heater():
    d = load_design(EX / "heater-resistive.toml")
    return d, analyse_unit(d)


def _limit_lines(ax):
    return [ln for ln in ax.get_lines() if ln.get_marker() == "_"]


def test_limit_markers_drawn_where_the_limits_apply_and_absent_for_information(
        plt, led_230, led_120):
    d, u = led_230
    rows = [r for r in u.compliance if r["set"].startswith("iec61000-3-2")]
    assert any(r["verdict"] in ("pass", "fail") for r in rows)  # the in-scope case
    d1, u1 = led_120
    rows1 = [r for r in u1.compliance if r["set"].startswith("iec61000-3-2")]
    assert rows1 and {r["verdict"] for r in rows1} <= {"for information", "out of scope"}
    fig = spectrum_figure(plt, [(d, u), (d1, u1)])
    ax_230, ax_120 = fig.axes
    assert _limit_lines(ax_230), "in-scope limits must be drawn"
    assert not _limit_lines(ax_120), "limits for information must not be drawn"
    assert harmonic_limit_markers(u1)[0] == {}
    # the out-of-scope panel says why no limit is drawn
    assert any("not drawn" in t.get_text() for t in ax_120.texts)
    # in-scope markers sit at the evaluated limits (A -> mA)
    lim = harmonic_limit_markers(u)[0]
    (line,) = _limit_lines(ax_230)
    xs, ys = line.get_data()
    assert np.allclose(ys, [lim[int(h)] * 1e3 for h in xs])
    plt.close(fig)


def test_every_axes_with_several_series_has_a_legend(plt, led_230, heater):
    items = [led_230, heater]
    for make in (waveform_figure, spectrum_figure):
        fig = make(plt, items)
        for ax in fig.axes:
            if ax.get_legend() is None:
                continue
            assert len(ax.get_legend().get_texts()) >= 1
        main_axes = [ax for ax in fig.axes if ax.get_title(loc="left")]
        assert len(main_axes) == len(items)
        for ax in main_axes:
            # the waveform's current lives on a twin axes: the legend on the main axes names both
            leg = ax.get_legend()
            assert leg is not None
            n_series = len(ax.get_lines()) + len(ax.containers)
            if make is waveform_figure:
                n_series += 1
            assert len(leg.get_texts()) == n_series
        plt.close(fig)


def test_near_sinusoidal_spectrum_is_not_scaled_to_noise(plt, heater):
    d, u = heater
    fig = spectrum_figure(plt, [heater])
    (ax,) = fig.axes
    from fleetpower.limits.applicability import rated_state

    r = next(s for s in u.states if s.state == rated_state(d))
    i1_ma = abs(r.pq.i_h_a[1]) * 1e3
    lo, hi = ax.get_ylim()
    # a resistor draws a sinusoid: its harmonics are numerical noise (~1e-13 of I1); the
    # axis stops at the solver's accuracy floor relative to I1 (DEVELOPERS.md, accuracy table)
    assert lo >= 0.99 * SPECTRUM_FLOOR_FRAC * i1_ma
    assert hi > i1_ma
    plt.close(fig)


def test_floor_span_keeps_a_flat_series_flat():
    # a 5 V rail with 1e-9 V of rounding noise: the axis shows 0.1 % of 5 V, not 1e-9 V
    lo, hi, floored = floor_span(5.0, 5.0 + 1e-9)
    assert floored and hi - lo == pytest.approx(SPAN_FLOOR_FRAC * 5.0)
    assert lo < 5.0 < hi
    # a real ripple of 0.2 V on 5 V is shown as it is
    assert floor_span(4.9, 5.1) == (4.9, 5.1, False)
    # all-zero data are left to matplotlib
    assert floor_span(0.0, 0.0)[2] is False
