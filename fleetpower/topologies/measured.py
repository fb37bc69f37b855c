"""A measured gadget: a supply nobody here designed, known by what its owner measured.

Per state, either a voltage/current capture at the plug or a test report's harmonic table
(formats: :mod:`fleetpower.io.capture_file`; analysis: :mod:`fleetpower.pq.capture`). It
is not simulated (``simulated = False``): :meth:`Measured.direct_state` gives each case's
figures from the file, scaled to the requested mains voltage by the declared model
(constant current, power or impedance; :func:`fleetpower.pq.capture.scale_to_voltage`).
What only a circuit can tell (losses, output, stresses, discharge) is not known.

Design file::

    name = "Smart plug (bought in), measured"
    topology = "measured"
    [gadget]                                   # optional
    kind = "switch-mode"                       # or "capacitive-dropper", "resistive",
                                               #    "linear", "unknown" (default)
    voltage_scaling = "constant-power"         # default by kind (DEFAULT_SCALING)
    [states.on]
    capture = "plug-on.csv"                    # relative to the design file
    [states.standby]
    harmonics = "plug-standby.csv"             # a test report's table ...
    voltage = "230 V"                          # ... at its test voltage
    frequency = "50 Hz"                        #     and frequency

Without ``[mains]`` the design's mains are the first state's: the fundamental of its
captured voltage and the frequency estimated from it (or a table's declared test supply).

Owns: the state model, the file analysis cache and the scaling of a state. Imports
``io.capture_file``, ``pq.capture`` and :mod:`.base` only.
"""

from __future__ import annotations

import functools
import hashlib
from pathlib import Path
from typing import Literal

from pydantic import ValidationError

from ..errors import InputError
from ..io.capture_file import read_capture, read_harmonic_table
from ..io.files import MAX_CAPTURE_BYTES, read_bytes_bounded
from ..io.schema import Frequency, Strict, Voltage
from ..pq.capture import (
    DEFAULT_SCALING,
    SCALING_MODELS,
    CaptureError,
    MeasuredSpectrum,
    analyse_capture,
    cycle,
    spectrum_from_table,
)
from .base import DirectState, Topology

#: the trade's kinds of gadget whose default scaling is documented (DEFAULT_SCALING)
KINDS = tuple(DEFAULT_SCALING)
#: relative voltage difference below which a state is used as measured (not scaled):
#: 0.01 %, below any power analyser's voltage accuracy (common practice, no source)
SAME_VOLTAGE = 1e-4
#: largest frequency difference [Hz] between the measurement and the mains it is used on
#: before the report says the spectrum was not moved in frequency
FREQUENCY_NOTE_HZ = 0.5


class GadgetFacts(Strict):
    """What is known of a measured gadget (the design file's ``[gadget]`` table)."""

    kind: Literal[KINDS] = "unknown"
    voltage_scaling: Literal[SCALING_MODELS] | None = None


class NoOutput(Strict):
    """A measured gadget has no output model (its load is whatever it was measured at)."""


class _StateTable(Strict):
    capture: str | None = None
    harmonics: str | None = None
    voltage: Voltage | None = None
    frequency: Frequency | None = None
    units: dict[Literal["time", "voltage", "current"], str] | None = None


class MeasuredState(Strict):
    """One measured state: its file (path as resolved, content hash) and test supply."""

    kind: Literal["capture", "harmonics"]
    path: str
    sha256: str
    voltage: float | None = None  # a harmonic table's test voltage [V rms]
    frequency: float | None = None  # a harmonic table's test frequency [Hz]
    units: tuple[tuple[str, str], ...] = ()


@functools.lru_cache(maxsize=64)
def _analyse(state: MeasuredState) -> MeasuredSpectrum:
    if state.kind == "capture":
        cap = read_capture(state.path, dict(state.units) or None)
        try:
            return analyse_capture(cap.t_s, cap.v_v, cap.i_a, source=state.path)
        except CaptureError as exc:
            raise InputError(state.path, exc.where, exc.message) from None
    h, i_h = read_harmonic_table(state.path)
    return spectrum_from_table(h, i_h, state.voltage, state.frequency, source=state.path)


def spectrum_of(state: MeasuredState) -> MeasuredSpectrum:
    """The analysed spectrum of a measured state (files read once per process)."""
    return _analyse(state)


class Measured(Topology):
    name = "measured"
    code = -1  # no engine row
    parts_model = GadgetFacts
    output_model = NoOutput
    simulated = False
    unknown_note = "not known for a measured supply"
    parts_key = "gadget"
    required_tables = ("states",)
    state_model = MeasuredState

    def read_state(self, value, *, file, key):
        if not isinstance(value, dict):
            raise InputError(file, key, "a measured state is a table: capture = \"file.csv\" "
                             "or harmonics = \"file.csv\" with voltage and frequency")
        try:
            t = _StateTable.model_validate(value)
        except ValidationError as exc:
            err = exc.errors()[0]
            where = ".".join([key, *(str(x) for x in err["loc"])])
            msg = err["msg"].removeprefix("Value error, ")
            if err["type"] == "extra_forbidden":
                msg = "unknown key (a state has capture or harmonics, voltage, frequency, units)"
            raise InputError(file, where, msg) from None
        if (t.capture is None) == (t.harmonics is None):
            raise InputError(file, key, "give either capture = \"file.csv\" or "
                             "harmonics = \"file.csv\"")
        name = t.capture if t.capture is not None else t.harmonics
        path = Path(file).parent / name if file != "<input>" else Path(name)
        try:  # bounded: a FIFO or /dev/zero named here is refused, not read for ever
            blob = read_bytes_bounded(path, MAX_CAPTURE_BYTES)
        except InputError as exc:
            raise InputError(exc.file, "", f"{exc.message}; named by {file}: {key}") from None
        if t.harmonics is not None:
            for k in ("voltage", "frequency"):
                if getattr(t, k) is None:
                    raise InputError(file, f"{key}.{k}", "missing key (the test supply of the "
                                     "harmonic table)")
        elif t.voltage is not None or t.frequency is not None:
            raise InputError(file, key, "a capture's voltage and frequency are read from "
                             "the capture; remove voltage/frequency")
        state = MeasuredState(
            kind="capture" if t.capture is not None else "harmonics", path=str(path),
            sha256=hashlib.sha256(blob).hexdigest(), voltage=t.voltage,
            frequency=t.frequency, units=tuple(sorted((t.units or {}).items())))
        _analyse(state)  # a bad file is refused when the design is read
        return state

    def default_mains(self, states, file):
        spec = spectrum_of(next(iter(states.values())))
        return {"voltage": f"{float(abs(spec.v_h_v[1]))!r} V",
                "frequency": f"{float(spec.f1_hz)!r} Hz"}

    def is_isolated(self, design):
        return design.isolated  # not known unless the file declares it

    def load_rank(self, design, state):
        return spectrum_of(design.states[state]).power_quality().p_w

    def scaling_model(self, design) -> tuple[str, str]:
        """The voltage-scaling model and why it is the one (declared or the kind's)."""
        facts = design.parts
        if facts.voltage_scaling is not None:
            return facts.voltage_scaling, "declared"
        return DEFAULT_SCALING[facts.kind], f"default for kind '{facts.kind}'"

    def stresses(self, design, stressed):
        return []

    def direct_state(self, design, state, mains_factor, samples_per_cycle):
        measured = design.states[state]
        spec = spectrum_of(measured)
        model, why = self.scaling_model(design)
        v_meas = abs(spec.v_h_v[1])
        v_target = design.mains.voltage * mains_factor
        what = ("capture " if measured.kind == "capture" else "harmonic table ") + \
            Path(measured.path).name
        method = spec.method
        if abs(v_target / v_meas - 1.0) > SAME_VOLTAGE:
            spec = spec.scaled(v_target, model)
            k = v_target / v_meas
            k_i = abs(spec.i_h_a[1]) / abs(spectrum_of(measured).i_h_a[1])
            scaling = (f"scaled from {v_meas:.1f} V to {v_target:.1f} V as {model} ({why}): "
                       f"V x{k:.4f}, I x{k_i:.4f}, P x{k * k_i:.4f}")
            used = model
        else:
            scaling = f"at its measured {v_meas:.1f} V (on other mains: {model}, {why})"
            used = None
        notes = tuple(spec.warnings)
        if abs(design.mains.frequency - spec.f1_hz) > FREQUENCY_NOTE_HZ:
            notes += (f"measured at {spec.f1_hz:.2f} Hz, used on {design.mains.frequency:.2f}"
                      " Hz mains: harmonics kept by order, not moved in frequency",)
        t, v, i = cycle(spec, samples_per_cycle)
        return DirectState(
            t_s=t, v_v=v, i_a=i, pq=spec.power_quality(),
            basis=f"measured, {what}; {scaling}; {method}",
            notes=notes, voltage_scaling=used)


TOPOLOGY = Measured()
