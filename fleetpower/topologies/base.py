"""What every topology provides, and the helpers several of them share.

A topology is one module in this package holding one :class:`Topology` instance: its
parts and output models (the design file's ``[parts]`` and ``[output]``), the packing of a
design into an engine row (parameters, initial guess and the reservoir's physical bound),
its loss labels, stresses, the capacitor left charged on the plug pins, its isolation and
its hand estimate. Nothing outside this package and :mod:`fleetpower.engine` knows an
engine index or branches on a topology's name.

Owns: :class:`Topology`, :class:`Stress`, :class:`HandEstimate` and the shared row and
stress helpers. May import :mod:`fleetpower.engine`, :mod:`fleetpower.io.schema`,
``errors``, ``pq``, the capture reader and the limit tables; never ``simulate``, ``unit``, ``fleet`` or reports.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, ClassVar

import numpy as np
from pydantic import BaseModel

from ..engine import layout as L
from ..engine.devices import N_RECTIFIER, VT_V, diode_saturation_current_a
from ..io.schema import parse_load
from ..pq.ieee1459 import PowerQuality

if TYPE_CHECKING:  # pragma: no cover
    from ..io.design_file import Design

#: Mains factor at which stresses are assessed (+10 % mains, common practice, no source)
STRESS_MAINS_FACTOR = 1.10
#: Usual inrush-resistor range for droppers [ohm] (common practice, no source)
INRUSH_RESISTOR_RANGE_OHM = (10.0, 30.0)

#: loss probe -> label in the loss budget (a topology may rename its series resistor and
#: add labels of its own loss probes through ``extra_loss_labels``)
LOSS_LABELS = {
    "p_series_resistor_w": "series resistor",
    "p_bleeder_w": "bleeder",
    "p_zener_w": "zener",
    "p_rectifier_w": "rectifier",
    "p_regulator_pass_w": "regulator (pass element)",
    "p_regulator_quiescent_w": "regulator (quiescent)",
    "p_converter_w": "converter",
}


@dataclass(frozen=True)
class Stress:
    """One component stress against its rating."""

    item: str
    value: float
    unit: str
    limit: float | None
    verdict: str  # "pass" | "fail" | "unrated" | "note"
    condition: str
    note: str = ""

    @property
    def used_pct(self) -> float | None:
        return None if not self.limit else 100.0 * self.value / self.limit


@dataclass(frozen=True)
class HandEstimate:
    """The designer's quick estimate beside the simulated deliverable current."""

    xc_ohm: float
    i_cap_rms_a: float
    hand_estimate_a: float
    rule: str
    sine_average_a: float
    charge_pump_a: float
    simulated_max_a: float
    explanation: list[str]


@dataclass(frozen=True)
class Discharge:
    """The capacitor left across the plug pins after unplugging, and its bleeder."""

    c_f: float
    r_bleeder_ohm: float
    v0_v: float  # voltage it may hold when unplugged (at +10 % mains)


@dataclass(frozen=True)
class DirectState:
    """One state of a topology the engine does not simulate (:attr:`Topology.simulated`
    is False), as the topology itself produces it: the figures drawn from the mains and
    how they were obtained. :func:`fleetpower.simulate.run` turns it into a
    ``StateResult`` whose circuit-only figures (losses, output, stresses) are ``None``.
    """

    t_s: np.ndarray  # one cycle [s]
    v_v: np.ndarray  # voltage over that cycle [V]
    i_a: np.ndarray  # line current over that cycle [A]
    pq: PowerQuality
    #: one sentence: where the figures come from (file, window, scaling model)
    basis: str
    #: quality flags of the source data, one line each (shown as warnings)
    notes: tuple[str, ...] = ()
    #: voltage-scaling model applied to reach the requested mains (None if none was)
    voltage_scaling: str | None = None


class Topology:
    """One supply topology. Subclasses set the class attributes and override the methods.

    (A base class rather than a typing ``Protocol``: most topologies share the defaults.)

    Two kinds exist. A **simulated** topology (``simulated = True``, the default) packs
    each case into an engine row (:meth:`engine_row`); the engine solves it and the
    circuit's losses, output and stresses follow. A **direct** topology
    (``simulated = False``: a measured gadget) produces each case's figures itself
    (:meth:`direct_state`); what only a circuit can tell is then not known, and reports
    say so with :attr:`unknown_note`. :func:`fleetpower.simulate.run` is the only place
    that dispatches on the flag.
    """

    #: the design file's ``topology`` value
    name: ClassVar[str]
    #: the engine row's topology code (:mod:`fleetpower.engine.layout`)
    code: ClassVar[int]
    parts_model: ClassVar[type[BaseModel]]
    output_model: ClassVar[type[BaseModel]]
    #: zener-clamped, output at mains potential
    is_dropper: ClassVar[bool] = False
    #: report the largest deliverable current even when every state is in regulation
    always_report_deliverable: ClassVar[bool] = False
    #: why a state draws DC from the mains (half-wave rectification)
    dc_bias_reason: ClassVar[str] = "half-wave rectifier without a series capacitor"
    #: label of ``p_series_resistor_w`` in the loss budget
    series_resistor_label: ClassVar[str] = "series resistor"
    #: labels of loss probes only this topology writes
    extra_loss_labels: ClassVar[dict[str, str]] = {}
    #: solved by the engine (False: :meth:`direct_state` gives each case's figures)
    simulated: ClassVar[bool] = True
    #: how reports show circuit-only figures a direct topology cannot know
    unknown_note: ClassVar[str | None] = None
    #: the design file's table holding :attr:`parts_model`
    parts_key: ClassVar[str] = "parts"
    #: tables a design file of this topology must have
    required_tables: ClassVar[tuple[str, ...]] = ("mains", "parts", "output", "states")
    #: model of one state's table (None: a state is a load, "20 mA" or "0.5 W")
    state_model: ClassVar[type[BaseModel] | None] = None

    def complete(self, design: Design) -> Design:
        """The design with defaults that depend on other sections filled in (at load,
        while ``design.mains`` is still the file's own)."""
        return design

    def check(self, design: Design) -> None:
        """Cross-field checks of a validated design; raise ``InputError`` naming the key."""

    def is_isolated(self, design: Design) -> bool | None:
        """Whether the output is galvanically isolated from the mains (None: not known)."""
        return not self.is_dropper

    def read_state(self, value, *, file: str, key: str):
        """One state of the design file, validated (a load unless :attr:`state_model`)."""
        return parse_load(value, file=file, key=key)

    def default_mains(self, states: dict, file: str) -> dict | None:
        """The ``[mains]`` table when the file has none (only if not required)."""
        return None

    def load_rank(self, design: Design, state: str) -> float:
        """A state's weight for choosing the heaviest (rated) and lightest (standby) state."""
        return design.load_current_a(state)

    def direct_state(self, design: Design, state: str, mains_factor: float,
                     samples_per_cycle: int) -> DirectState:
        """The figures of one case of a direct (not simulated) topology: the design in
        ``state`` on its mains times ``mains_factor``, its waveform over one cycle of
        ``samples_per_cycle`` samples."""
        raise NotImplementedError

    def engine_row(self, design: Design, state: str, mains_factor: float,
                   load_a: float | None) -> tuple[np.ndarray, np.ndarray]:
        """Engine row (parameters, :data:`~fleetpower.engine.layout.N_PARAMS`) and initial
        guess (4 unknowns) of one case; ``load_a`` overrides the state's output current."""
        raise NotImplementedError

    def loss_labels(self) -> dict[str, str]:
        return {**LOSS_LABELS, **self.extra_loss_labels,
                "p_series_resistor_w": self.series_resistor_label}

    def stresses(self, design: Design, stressed: list) -> list[Stress]:
        """Component stresses from the states simulated at +10 % mains."""
        raise NotImplementedError

    def discharge(self, design: Design, stresses: list[Stress]) -> Discharge | None:
        """The capacitor on the plug pins after unplugging (None if there is none)."""
        return None

    def deliverable_ceiling_a(self, design: Design) -> float:
        """Upper end of the bracket searched for the largest deliverable current [A]."""
        raise NotImplementedError

    def hand_estimate(self, design: Design, simulated_max_a: float) -> HandEstimate | None:
        """The designer's rule of thumb beside the simulation (None if there is none)."""
        return None


# ----------------------------------------------------------------------------------
# shared engine-row helpers
# ----------------------------------------------------------------------------------
def common_row(topology: Topology, design: Design, mains_factor: float) -> np.ndarray:
    """The fields every topology fills: codes, mains, source impedance, rectifier diode."""
    parts, mains = design.parts, design.mains
    p = L.new_row()
    p[L.P_TOPO] = topology.code
    p[L.P_RECT] = L.BRIDGE if parts.rectifier == "bridge" else L.HALF_WAVE
    p[L.P_VPK] = mains.voltage * math.sqrt(2.0) * mains_factor
    p[L.P_OMEGA] = 2.0 * math.pi * mains.frequency
    p[L.P_RSRC] = mains.source_resistance
    p[L.P_LSRC] = mains.source_inductance
    p[L.P_LMAINS] = mains.source_inductance  # a topology may add leakage to P_LSRC only
    p[L.P_D_IS] = diode_saturation_current_a(
        parts.diode.forward_voltage, parts.diode.forward_test_current
    )
    p[L.P_D_NVT] = N_RECTIFIER * VT_V
    return p


def linear_regulator_row(p: np.ndarray, design: Design, state: str,
                         load_a: float | None) -> None:
    """Fill the linear regulator's fields and the reservoir capacitance."""
    out = design.output
    p[L.P_ILOAD] = design.load_current_a(state) if load_a is None else load_a
    p[L.P_IQ] = out.quiescent_current
    p[L.P_VOUT] = out.voltage
    p[L.P_VDO] = out.dropout
    p[L.P_CO] = design.parts.reservoir_capacitance


# ----------------------------------------------------------------------------------
# shared stress helpers
# ----------------------------------------------------------------------------------
def rated(item, value, unit, rating, condition, note="") -> Stress:
    """A stress against a rating (``unrated`` when the design gives none)."""
    if rating is None:
        return Stress(item, value, unit, None, "unrated", condition, note or "no rating given")
    return Stress(item, value, unit, rating, "pass" if value <= rating else "fail", condition,
                  note)


def capacitor_voltage(name, v_peak, v_rms, rating, kind, cond, note=""):
    """Peak and rms voltage of a capacitor; the one its rating is stated in is checked.

    Safety (X/Y) capacitors are rated in V AC rms (``kind = "ac"``, the default); a
    DC-rated film part (``"dc"``) is checked against the peak.
    """
    peak = Stress(f"{name} peak voltage", v_peak, "V", None, "note", cond,
                  "compared with a DC rating" if kind == "dc" else "")
    rms = Stress(f"{name} rms voltage", v_rms, "V", None, "note", cond, "")
    if kind == "dc":
        peak = rated(f"{name} peak voltage", v_peak, "V", rating, cond,
                     (note + "; " if note else "") + "rating read as DC")
    else:
        rms = rated(f"{name} rms voltage", v_rms, "V", rating, cond,
                    (note + "; " if note else "") + "rating read as AC rms")
    return [peak, rms]


def series_stresses(design: Design, stressed: list, *, r_inrush: float, cap: float | None,
                    rb: float | None, v_cap: float, resistor_name: str,
                    resistor_rating: float | None, inrush_minimum: bool,
                    front: list[Stress]) -> list[Stress]:
    """Stresses of a supply with a series (inrush) resistor: capacitor voltages given in
    ``front``, then inrush, zener (droppers), resistor, bleeder and plug-pin discharge."""
    parts = design.parts
    cond = f"worst state at {STRESS_MAINS_FACTOR:.2f}x mains"
    vpk_hi = design.mains.voltage * math.sqrt(2) * STRESS_MAINS_FACTOR
    out = list(front)
    inrush = vpk_hi / r_inrush if r_inrush > 0 else math.inf
    lo, hi = INRUSH_RESISTOR_RANGE_OHM
    note = (f"series resistance {r_inrush:.1f} ohm; {lo:.0f}-{hi:.0f} ohm pulse-rated is usual"
            if design.is_dropper else f"series resistance {r_inrush:.1f} ohm")
    verdict = "note"
    if inrush_minimum and r_inrush < lo:
        verdict, note = "fail", note + " (below the usual minimum)"
    out.append(Stress("inrush peak if plugged in at the crest", inrush, "A", None, verdict,
                      f"Vpk x {STRESS_MAINS_FACTOR:.2f} / series resistance", note))
    if design.is_dropper:
        pz = max(r.p_zener_w for r in stressed)
        out.append(rated("zener dissipation", pz, "W", parts.zener_power_rating, cond))
    pr = max(r.p_series_resistor_w for r in stressed)
    out.append(rated(resistor_name, pr, "W", resistor_rating, cond))
    if cap is not None:
        pb = max(r.p_bleeder_w for r in stressed)
        out.append(rated("bleeder dissipation", pb, "W", parts.bleeder_power_rating, cond))
        # the plug-pin discharge is one compliance check, not a stress
        # (Topology.discharge -> limits.evaluate_discharge_rules)
    return out


def stress_condition() -> str:
    return f"worst state at {STRESS_MAINS_FACTOR:.2f}x mains"
