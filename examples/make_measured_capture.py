"""Make the example "measured" gadget: a capture CSV and a test-report harmonic table.

Invented scenario (our own demo data, no real product): a bought-in smart plug whose
circuit its owner does not know. Its owner clipped a scope on the plug while its relay was
on and kept the harmonic table from its test report for standby. We make both from a
circuit of our own: fleetpower simulates a small bridge + bulk-capacitor switch-mode
supply (the design below) to periodic steady state, then a realistic instrument records it:

* mains at 49.98 Hz, instrument free-running at 20 kS/s (400.16 samples per cycle: not
  synchronised), recording 230 ms (11.5 cycles) from an arbitrary point of the cycle;
* an ideal anti-alias filter at 10 kHz (orders above 200 left out; the simulated cycle is
  evaluated as its Fourier series at the instrument's sample instants);
* 12-bit converters over +/-500 V and +/-250 mA, with half an LSB of seeded Gaussian noise;
* time printed in ms with 5 decimals, voltage in V, current in mA.

The harmonic table (standby) lists h = 1..40 in mA and degrees relative to h times the
voltage fundamental, from the simulation at the nominal 230 V / 50 Hz, rounded as a report
would print it.

Run from the repository root:  python examples/make_measured_capture.py
Writes examples/smart-plug-capture.csv and examples/smart-plug-standby-harmonics.csv.
Deterministic (seeded); re-running reproduces the files byte for byte.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from fleetpower.io.design_file import design_from_dict
from fleetpower.simulate import simulate

HERE = Path(__file__).resolve().parent
SEED = 20240613

#: our own circuit for the invented smart plug: bridge, bulk capacitor, 2 W flyback
CIRCUIT = {
    "name": "Invented smart plug, 2 W flyback (circuit behind the example capture)",
    "topology": "rectifier-smps",
    "mains": {"voltage": "230 V", "frequency": "50 Hz"},
    "parts": {
        "x_capacitance": "22 nF",
        "bleeder_resistance": "1 Mohm",
        "series_resistance": "22 ohm",
        "bulk_capacitance": "4.7 uF",
        "rectifier": "bridge",
    },
    "output": {
        "voltage": "12 V",
        "rated_power": "2 W",
        "no_load_input_power": "0.05 W",
        "efficiency": [[0.1, 0.5], [0.5, 0.72], [1.0, 0.76]],
        "undervoltage_lockout": "80 V",
    },
    "states": {"relay_on": "0.9 W", "standby": "0.12 W"},
}

F_MAINS_HZ = 49.98
FS_HZ = 20_000.0
DURATION_S = 0.230
START_PHASE_RAD = 2.1  # voltage phase at the first sample
V_RANGE_V, I_RANGE_A, BITS = 500.0, 0.250, 12


def _phasors(x: np.ndarray) -> np.ndarray:
    """Complex amplitudes c_h (peak, cosine reference) of one sampled cycle."""
    c = np.fft.rfft(x) / x.size * 2.0
    c[0] /= 2.0
    return c


def _evaluate(c: np.ndarray, phase: np.ndarray, h_max: int) -> np.ndarray:
    """The Fourier series sum_h Re(c_h e^{j h phase}) for h = 0..h_max."""
    out = np.full(phase.shape, c[0].real)
    for h in range(1, h_max + 1):
        out += (c[h] * np.exp(1j * h * phase)).real
    return out


def _quantise(x: np.ndarray, full_scale: float, rng) -> np.ndarray:
    lsb = 2.0 * full_scale / 2**BITS
    noisy = x + rng.normal(0.0, 0.5 * lsb, x.size)
    return np.clip(np.round(noisy / lsb), -(2 ** (BITS - 1)), 2 ** (BITS - 1) - 1) * lsb


def make_capture(path: Path) -> None:
    data = dict(CIRCUIT, mains={"voltage": "230 V", "frequency": f"{F_MAINS_HZ} Hz"})
    design = design_from_dict(data, "<smart plug circuit>")
    res = simulate(design, ["relay_on"])[0]
    cv, ci = _phasors(res.v_v), _phasors(res.i_a)
    # the simulated cycle starts at voltage phase arg(cv[1]); shift so the first sample
    # of the capture sits at START_PHASE_RAD
    n = int(round(DURATION_S * FS_HZ))
    t = np.arange(n) / FS_HZ
    phase = 2.0 * np.pi * F_MAINS_HZ * t + (START_PHASE_RAD - np.angle(cv[1]))
    h_max = int(np.ceil(FS_HZ / 2.0 / F_MAINS_HZ)) - 1  # anti-alias filter at fs/2
    rng = np.random.default_rng(SEED)
    v = _quantise(_evaluate(cv, phase, h_max), V_RANGE_V, rng)
    i = _quantise(_evaluate(ci, phase, h_max), I_RANGE_A, rng)
    with open(path, "w", encoding="utf-8") as f:
        f.write("# Invented smart plug, relay on: scope capture at the plug (demo data of our own,\n"
                "# made by examples/make_measured_capture.py from a simulated circuit).\n"
                f"# free-running {FS_HZ / 1e3:g} kS/s, {BITS}-bit, +/-{V_RANGE_V:g} V, "
                f"+/-{1e3 * I_RANGE_A:g} mA\n")
        f.write("time [ms],voltage [V],current [mA]\n")
        for tk, vk, ik in zip(t, v, i, strict=True):
            f.write(f"{1e3 * tk:.5f},{vk:.3f},{1e3 * ik:.4f}\n")


def make_table(path: Path) -> None:
    design = design_from_dict(CIRCUIT, "<smart plug circuit>")
    res = simulate(design, ["standby"])[0]
    i_h = res.pq.i_h_a
    with open(path, "w", encoding="utf-8") as f:
        f.write("# Invented smart plug, standby: harmonic table of its test report at 230 V 50 Hz\n"
                "# (demo data of our own, made by examples/make_measured_capture.py from a\n"
                "# simulated circuit). Phase relative to h x the voltage fundamental's angle.\n")
        f.write("h,current [mA],phase [deg]\n")
        for h in range(1, 41):
            mag_ma = round(1e3 * abs(i_h[h]), 4)
            phase = np.degrees(np.angle(i_h[h])) if mag_ma > 0 else 0.0
            f.write(f"{h},{mag_ma:.4f},{phase:.1f}\n")


def main() -> None:
    make_capture(HERE / "smart-plug-capture.csv")
    make_table(HERE / "smart-plug-standby-harmonics.csv")


if __name__ == "__main__":
    main()
