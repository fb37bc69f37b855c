"""Measured supplies: a capture or a harmonic table analysed as IEC 61000-4-7 / IEEE 1459 do.

Reference for every accuracy check: the closed-form Fourier series of a trapezoidal pulse
train (tests/synthetic_captures.py, source named there), sampled by a free-running
"instrument" (a rate that is no multiple of f1, an arbitrary start phase, a non-integer
number of cycles in the file).
"""

from __future__ import annotations

import numpy as np
import pytest
from synthetic_captures import trapezoid_capture
from tolerances import CAPTURE_H_FLOOR, CAPTURE_REL, FREQ_REL, REL_EXACT, TABLE_REL

from fleetpower.errors import InputError
from fleetpower.io.capture_file import read_capture, read_harmonic_table
from fleetpower.pq.capture import (
    CaptureError,
    analyse_capture,
    scale_to_voltage,
    spectrum_from_table,
    window_cycles,
)


def load(path, f_hint=None):
    """Read and analyse a capture file, a CaptureError becoming a one-line InputError
    naming the file (what a measured design does with it)."""
    cap = read_capture(path)
    try:
        return analyse_capture(cap.t_s, cap.v_v, cap.i_a, f_hint, source=cap.source)
    except CaptureError as exc:
        raise InputError(cap.source, exc.where, exc.message) from None


def rel(a, b):
    return abs(a - b) / abs(b)


def worst_harmonic_error(i_h_a, exact):
    """Largest |I_h − I_h,exact| / |I_h,exact| over h = 1..40 above 1 % of I1."""
    h = np.arange(1, 41)
    big = np.abs(exact[h]) > CAPTURE_H_FLOOR * abs(exact[1])
    return float(np.max(np.abs(i_h_a[h][big] - exact[h][big]) / np.abs(exact[h][big])))


def write_capture(path, t_s, v_v, i_a, header="time [ms],voltage [V],current [mA]",
                  scale=(1e3, 1.0, 1e3), fmt="%.9g"):
    data = np.column_stack([t_s * scale[0], v_v * scale[1], i_a * scale[2]])
    np.savetxt(path, data, delimiter=",", header=header, comments="", fmt=fmt)
    return path


def analyse(syn, f_hint=None):
    return analyse_capture(syn.t_s, syn.v_v, syn.i_a, f_hint)


# Free-running captures: (f1 Hz, fs Hz, cycles in the file, start phase rad). Rates of
# 20-50 kS/s with no anti-alias filter (the pulse's 1/n² tail aliases below ~1e-4 of I1).
CASES = [
    (50.03, 23456.7, 10.37, 1.234),   # IEC window of 10 cycles, a fraction left over
    (49.96, 31415.9, 17.81, -2.5),    # longer than the window
    (59.98, 25000.0, 12.43, 2.9),     # 60 Hz: IEC window of 12 cycles
    (50.01, 51234.5, 3.62, 0.4),      # shorter than the window: 3 whole cycles
]


@pytest.mark.parametrize("f1,fs,cycles,theta0", CASES)
def test_trapezoid_capture_reproduces_closed_form(f1, fs, cycles, theta0):
    syn = trapezoid_capture(f1_hz=f1, fs_hz=fs, cycles=cycles, theta0_rad=theta0)
    spec = analyse(syn)
    pq = spec.power_quality()
    # closed-form series and rms of the trapezoid train (C. R. Paul, from memory; derived
    # in synthetic_captures.py)
    assert rel(spec.f1_hz, f1) < FREQ_REL
    assert rel(pq.i_rms_a, syn.i_rms_a) < CAPTURE_REL
    assert rel(pq.p_w, syn.p_w) < CAPTURE_REL
    assert rel(pq.dpf, syn.dpf) < CAPTURE_REL
    assert worst_harmonic_error(spec.i_h_a, syn.i_h_a) < CAPTURE_REL
    # IEEE 1459: Q1 < 0 for the leading (capacitive) pulse placed before the voltage peak
    assert pq.q1_var < 0
    # a pure-cosine voltage: THD_V = 0 up to the fit's rounding, V1 = V
    assert pq.thd_v_pct < 1e-3 and rel(pq.v1_rms_v, syn.v_rms_v) < 1e-6
    expected_cycles, iec = window_cycles(f1, cycles)
    assert spec.window_cycles == expected_cycles == (int(cycles) if not iec else
                                                     {50: 10, 60: 12}[round(f1 / 10) * 10])
    assert ("too short" in " ".join(spec.warnings)) == (not iec)


def test_non_integer_cycles_need_the_integer_window():
    """The whole record (10.37 cycles) fed to one DFT leaks; the integer window does not.

    The plain FFT of all samples as if they were one period is the contrast (numpy's rfft,
    bin = number of cycles in the record is not an integer): its error is far above the
    acceptance, while the windowed analysis stays within it.
    """
    syn = trapezoid_capture(cycles=10.37)
    spec = analyse(syn)
    assert worst_harmonic_error(spec.i_h_a, syn.i_h_a) < CAPTURE_REL
    c = np.fft.rfft(syn.i_a) / syn.i_a.size * np.sqrt(2.0)
    naive_i1 = abs(c[10])  # nearest bin to the fundamental (10 cycles in the bin spacing)
    assert rel(naive_i1, abs(syn.i_h_a[1])) > 10 * CAPTURE_REL


def test_quantised_capture_stays_within_acceptance():
    """A 12-bit converter over ±400 V and ±0.5 A (common practice, no source) with half an
    LSB of seeded noise: still within 0.5 %, and a quantised smooth peak is not "clipped"."""
    syn = trapezoid_capture(cycles=11.2)
    rng = np.random.default_rng(7)
    lsb_v, lsb_i = 800.0 / 4096, 1.0 / 4096
    v = np.round((syn.v_v + rng.normal(0, 0.5 * lsb_v, syn.v_v.size)) / lsb_v) * lsb_v
    i = np.round((syn.i_a + rng.normal(0, 0.5 * lsb_i, syn.i_a.size)) / lsb_i) * lsb_i
    spec = analyse_capture(syn.t_s, v, i)
    pq = spec.power_quality()
    assert rel(pq.i_rms_a, syn.i_rms_a) < CAPTURE_REL
    assert rel(pq.p_w, syn.p_w) < CAPTURE_REL
    assert worst_harmonic_error(spec.i_h_a, syn.i_h_a) < CAPTURE_REL
    assert spec.clipped == ()


def test_csv_units_are_converted(tmp_path):
    """ms / V / mA in the header and s / kV / A give the same analysis (SI conversion)."""
    syn = trapezoid_capture()
    pa = load(write_capture(tmp_path / "a.csv", syn.t_s, syn.v_v, syn.i_a)).power_quality()
    pb = load(write_capture(tmp_path / "b.csv", syn.t_s, syn.v_v, syn.i_a,
                            header="t [s],u [kV],i [A]", scale=(1.0, 1e-3, 1.0))).power_quality()
    assert rel(pa.p_w, syn.p_w) < CAPTURE_REL
    assert rel(pa.p_w, pb.p_w) < 1e-7 and rel(pa.i_rms_a, pb.i_rms_a) < 1e-7


def test_printed_time_jitter_is_tolerated(tmp_path):
    """Timestamps printed with 6 significant digits (jitter up to ~2 % of a step) are
    replaced by their fitted uniform grid: the result stays within the acceptance."""
    syn = trapezoid_capture()
    path = tmp_path / "jitter.csv"
    with open(path, "w") as f:
        f.write("time [ms],voltage [V],current [mA]\n")
        for t, v, i in zip(syn.t_s, syn.v_v, syn.i_a, strict=True):
            f.write(f"{1e3 * t:.6g},{v:.6g},{1e3 * i:.6g}\n")
    spec = load(path)
    assert rel(spec.power_quality().p_w, syn.p_w) < CAPTURE_REL
    assert worst_harmonic_error(spec.i_h_a, syn.i_h_a) < CAPTURE_REL


def test_clipped_capture_is_analysed_with_a_warning():
    """A current channel whose range is 80 % of the pulse height: flat tops -> warning."""
    syn = trapezoid_capture()
    top = 0.8 * np.max(syn.i_a)
    spec = analyse_capture(syn.t_s, syn.v_v, np.clip(syn.i_a, -top, top))
    assert spec.clipped == ("current",)
    assert any("current clipped" in w for w in spec.warnings)
    assert spec.power_quality().i_rms_a < syn.i_rms_a  # the tops are missing


def test_distorted_voltage_is_reported():
    """3 % fifth harmonic on the voltage: THD_V = 3 % (a single harmonic's ratio, by the
    definition of THD, IEEE 1459 clause 3.1.2.1) and a warning (IEC 61000-3-2 Annex A test
    supply allows 0.4 % at h = 5, from memory)."""
    syn = trapezoid_capture()
    w = 2 * np.pi * syn.f1_hz
    v = syn.v_v + 0.03 * np.sqrt(2) * 230.0 * np.cos(5 * (w * syn.t_s + 1.234) + 0.7)
    spec = analyse_capture(syn.t_s, v, syn.i_a)
    assert abs(spec.thd_v_pct - 3.0) < 3.0 * 1e-4
    assert any("voltage distorted" in m and "h5" in m for m in spec.warnings)
    assert rel(spec.f1_hz, syn.f1_hz) < FREQ_REL


def test_coarse_capture_warns_and_limits_the_orders():
    """4 kS/s at 50 Hz: Nyquist at h = 40, below 2.56 x 40 x f1 = 5.12 kS/s (FFT-analyser
    bandwidth ratio, common practice, no source); orders up to 39 only."""
    syn = trapezoid_capture(f1_hz=50.0, fs_hz=3990.0, band_limit_hz=2000.0)
    spec = analyse(syn)
    assert spec.h_resolved == 39
    assert np.all(spec.i_h_a[40:] == 0)
    assert any("too coarse for h = 40" in w for w in spec.warnings)


def test_harmonic_table_gives_the_waveform_figures(tmp_path):
    """A table written from a capture's analysis (mA, degrees) and read back gives the
    same P, I rms, PF, DPF, THD and harmonics. The capture is band-limited below h = 51 so
    the table holds all of it."""
    syn = trapezoid_capture(band_limit_hz=50.5 * 50.03)
    spec = analyse(syn)
    pq = spec.power_quality()
    h = np.arange(1, 51)
    path = tmp_path / "report.csv"
    rows = np.column_stack([h, 1e3 * np.abs(spec.i_h_a[h]), np.degrees(np.angle(spec.i_h_a[h]))])
    np.savetxt(path, rows, delimiter=",", header="h,current [mA],phase [deg]", comments="",
               fmt=["%d", "%.10g", "%.10g"])
    orders, i_h = read_harmonic_table(path)
    tab = spectrum_from_table(orders, i_h, v_rms_v=abs(spec.v_h_v[1]), f1_hz=spec.f1_hz)
    tq = tab.power_quality()
    for name in ("p_w", "i_rms_a", "pf", "dpf", "thd_i_pct", "q1_var", "i1_rms_a"):
        assert rel(getattr(tq, name), getattr(pq, name)) < TABLE_REL, name
    assert np.max(np.abs(tab.i_h_a[1:51] - spec.i_h_a[1:51])) < TABLE_REL * abs(spec.i_h_a[1])
    assert rel(pq.p_w, syn.p_w) < CAPTURE_REL


def test_table_without_phase_is_in_phase(tmp_path):
    """Phase column absent: every order at 0 deg (documented assumption), so DPF = 1 and
    P = V1·I1 (IEEE 1459: P1 = V1 I1 cos θ1)."""
    path = tmp_path / "mag.csv"
    path.write_text("# invented test report\nh,current [mA]\n1,20\n3,15\n5,9\n")
    h, i_h = read_harmonic_table(path)
    pq = spectrum_from_table(h, i_h, 230.0, 50.0).power_quality()
    assert rel(pq.p_w, 230.0 * 0.020) < REL_EXACT
    assert rel(pq.dpf, 1.0) < REL_EXACT
    assert rel(pq.i_rms_a, np.sqrt(0.020**2 + 0.015**2 + 0.009**2)) < REL_EXACT
    assert rel(pq.thd_i_pct, 100 * np.hypot(15, 9) / 20) < REL_EXACT


@pytest.mark.parametrize("model,k_i,k_p", [
    # hand-derived with k = 253 / 230 = 1.1: I' = I, I/k, kI -> P' = kP, P, k²P
    ("constant-current", 1.0, 1.1),
    ("constant-power", 1 / 1.1, 1.0),
    ("constant-impedance", 1.1, 1.21),
])
def test_voltage_scaling_models(model, k_i, k_p):
    syn = trapezoid_capture()
    spec = analyse(syn)
    pq = spec.power_quality()
    site = 1.1 * abs(spec.v_h_v[1])
    _, i_h, k_v, k_i_got = scale_to_voltage(spec.v_h_v, spec.i_h_a, site, model)
    assert rel(k_v, 1.1) < REL_EXACT and rel(k_i_got, k_i) < REL_EXACT
    sq = spec.scaled(site, model).power_quality()
    assert rel(sq.p_w, k_p * pq.p_w) < 1e-9
    assert rel(sq.i_rms_a, k_i * pq.i_rms_a) < 1e-9
    assert rel(sq.pf, pq.pf) < 1e-9 and rel(sq.thd_i_pct, pq.thd_i_pct) < 1e-9
    assert model in spec.scaled(site, model).method


# ------------------------------------------------------------------ bad captures
def _good(tmp_path, name="cap.csv"):
    syn = trapezoid_capture(cycles=2.5)
    return syn, write_capture(tmp_path / name, syn.t_s, syn.v_v, syn.i_a)


def _edit(path, fn):
    lines = path.read_text().splitlines()
    path.write_text("\n".join(fn(lines)) + "\n")
    return path


@pytest.mark.parametrize("edit,words", [
    (lambda ls: [ls[0].replace("current [mA]", "current")] + ls[1:], ["current", "no unit"]),
    (lambda ls: [ls[0].replace("voltage [V]", "voltage [A]")] + ls[1:], ["'A' is not a voltage"]),
    (lambda ls: [ls[0].replace("time [ms]", "time [furlong]")] + ls[1:], ["not a time"]),
    (lambda ls: [ls[0].replace(",current [mA]", "")] + [x.rsplit(",", 1)[0] for x in ls[1:]],
     ["no current column"]),
    (lambda ls: ls[:5] + [ls[5].split(",")[0] + ",nan," + ls[5].split(",")[2]] + ls[6:],
     ["data row 5", "voltage", "NaN"]),
    (lambda ls: ls[:5] + [ls[5].split(",")[0] + ",," + ls[5].split(",")[2]] + ls[6:],
     ["data row 5", "missing value"]),
    (lambda ls: ls[:10] + [ls[11], ls[10]] + ls[12:], ["data row 11", "goes backwards"]),
    (lambda ls: ls[:100] + ls[120:], ["data row 100", "samples missing"]),
    (lambda ls: ls[:300], ["no whole cycle", "declare its mains frequency"]),
])
def test_bad_capture_names_file_and_problem(tmp_path, edit, words):
    _, path = _good(tmp_path)
    _edit(path, edit)
    with pytest.raises(InputError) as err:
        load(path)
    line = err.value.one_line()
    assert str(path) in line and "\n" not in line
    for w in words:
        assert w in line, (w, line)


def test_less_than_a_cycle_with_declared_frequency(tmp_path):
    """299 samples at 23456.7 Hz = 0.64 of a 50.03 Hz cycle, with the mains frequency
    declared: still refused, naming the span."""
    _, path = _good(tmp_path)
    _edit(path, lambda ls: ls[:300])
    with pytest.raises(InputError) as err:
        load(path, f_hint=50.0)
    line = err.value.one_line()
    assert str(path) in line and "no whole cycle" in line and "0.64 cycles" in line


@pytest.mark.parametrize("text,words", [
    ("h,current [mA]\n1,20\n3,-4\n", ["data row 2", "negative magnitude"]),
    ("h,current\n1,20\n", ["no unit"]),
    ("h,current [V]\n1,20\n", ["not a current"]),
    ("h,current [mA],phase [V]\n1,20,0\n", ["not an angle"]),
    ("h,current [mA]\n3,20\n", ["no fundamental"]),
    ("h,current [mA]\n1,20\n1,3\n", ["order 1 listed twice"]),
    ("h,current [mA]\n1,20\n2.5,3\n", ["data row 2", "not an integer"]),
    ("order,amps [A]\n1,20\n", ["no current column"]),
])
def test_bad_harmonic_table(tmp_path, text, words):
    path = tmp_path / "t.csv"
    path.write_text(text)
    with pytest.raises(InputError) as err:
        read_harmonic_table(path)
    line = err.value.one_line()
    assert str(path) in line
    for w in words:
        assert w in line, (w, line)


def test_example_capture_reproduces_its_circuit():
    """examples/smart-plug-capture.csv was made by examples/make_measured_capture.py from a
    simulated circuit through a 12-bit free-running instrument; read back, it gives the
    simulation's P, I rms, DPF and harmonics within the acceptance (the simulation is the
    reference here; its own accuracy is checked against Radau in test_engine_reference)."""
    import importlib.util

    from conftest import EXAMPLES

    from fleetpower.io.design_file import design_from_dict
    from fleetpower.simulate import simulate

    spec_ = importlib.util.spec_from_file_location("gen", EXAMPLES / "make_measured_capture.py")
    gen = importlib.util.module_from_spec(spec_)
    spec_.loader.exec_module(gen)
    design = design_from_dict(dict(gen.CIRCUIT, mains={"voltage": "230 V",
                                                        "frequency": f"{gen.F_MAINS_HZ} Hz"}))
    ref = simulate(design, ["relay_on"])[0].pq
    spec = load(EXAMPLES / "smart-plug-capture.csv")
    pq = spec.power_quality()
    assert spec.warnings == ()
    assert rel(spec.f1_hz, gen.F_MAINS_HZ) < FREQ_REL
    for name in ("p_w", "i_rms_a", "dpf", "pf"):
        assert rel(getattr(pq, name), getattr(ref, name)) < CAPTURE_REL, name
    assert worst_harmonic_error(spec.i_h_a, ref.i_h_a) < CAPTURE_REL
