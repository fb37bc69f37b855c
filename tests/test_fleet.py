"""Fleet physics and bookkeeping of fleetpower.fleet, against outside references.

Every fleet here hangs on a 120 V / 60 Hz wye, the mains the two bundled 120 V designs
(half-wave capacitive dropper, isolated flyback) are specified for, so each design is
simulated once per process (the catalogue cache is keyed by file content and mains).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from conftest import example_path, toml_value
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from tolerances import CANCEL_REL, REL_EXACT, REL_HAND_Q, REL_PARSEVAL

from fleetpower.errors import InputError
from fleetpower.fleet import evaluate_fleet, unit_catalogue
from fleetpower.io.fleet_file import load_fleet
from fleetpower.report import fleet_to_dict

# per-quantity tolerances (relative unless named *_ABS)

V_LN, F_HZ = 120.0, 60.0
DROPPER, SMPS = "nightlight-dropper", "corridor-smps"
ACTIVE_DAY = ["active"] * 24


# ----------------------------------------------------------------------------------------
# writing fleet files
# ----------------------------------------------------------------------------------------
_value = toml_value  # the TOML writer of conftest.py


SITE = {"system": "three-phase-wye", "voltage": "120 V", "frequency": "60 Hz"}
TARIFF = {"energy_price": 0.2}


def fleet_text(groups, site=None, tariff=None, **top) -> str:
    lines = [f"{k} = {_value(v)}" for k, v in top.items()]
    for name, table in (("site", site or SITE), ("tariff", tariff or TARIFF)):
        lines += ["", f"[{name}]"] + [f"{k} = {_value(v)}" for k, v in table.items()]
    for g in groups:
        lines += ["", "[[group]]"] + [f"{k} = {_value(v)}" for k, v in g.items()]
    return "\n".join(lines) + "\n"


@pytest.fixture(scope="module")
def designs(tmp_path_factory) -> dict[str, str]:
    """Copies of the two 120 V / 60 Hz example designs (absolute paths)."""
    d = tmp_path_factory.mktemp("designs")
    out = {}
    for name in (DROPPER, SMPS):
        p = d / f"{name}.toml"
        p.write_text(example_path(name).read_text(encoding="utf-8"), encoding="utf-8")
        out[name] = str(p)
    return out


@pytest.fixture
def run_fleet(tmp_path, designs):
    """``run_fleet(groups, **fleet_keys)`` -> (FleetResult, JSON dict, catalogue)."""
    counter = iter(range(1000))

    def run(groups, **kw):
        groups = [{**g, "design": designs[g["design"]]} for g in groups]
        path = tmp_path / f"fleet{next(counter)}.toml"
        path.write_text(fleet_text(groups, **kw), encoding="utf-8")
        spec = load_fleet(path)
        cat = unit_catalogue(spec.designs)
        res = evaluate_fleet(spec, cat)
        return res, fleet_to_dict(res), cat

    return run


def unit(cat, name, state):
    """The catalogue entry (one simulated unit) of an example design and state."""
    (path,) = [p for p in cat if p.stem == name]
    return cat[path][state]


def phase(d, name):
    (p,) = [p for p in d["phases"] if p["phase"] == name]
    return p


# ----------------------------------------------------------------------------------------
# neutral of a four-wire wye
# ----------------------------------------------------------------------------------------
def test_balanced_triplens_add_in_the_neutral_and_fundamentals_cancel(run_fleet):
    # Three identical loads, one per phase of a balanced wye: triplen orders (3, 9, 15...)
    # are zero-sequence and add in the neutral to 3x one phase; positive- and negative-
    # sequence orders (1, 5, 7...) sum to zero there (Dugan et al., Electrical Power
    # Systems Quality, ch. 5; any power-quality textbook, from memory).
    groups = [
        {"design": DROPPER, "count": 100, "phase": p, "profile": ACTIVE_DAY}
        for p in ("L1", "L2", "L3")
    ]
    _, d, _ = run_fleet(groups)
    per = [np.array(phase(d, p)["harmonics_a"]) for p in ("L1", "L2", "L3")]
    assert np.allclose(per[1], per[0], rtol=REL_EXACT) and np.allclose(
        per[2], per[0], rtol=REL_EXACT
    )
    neutral = np.array(d["neutral"]["harmonics_a"])  # index 0 = h 1
    assert per[0][2] > 0.01 * per[0][0]  # the dropper really has a 3rd harmonic
    for h in (3, 9, 15):
        assert neutral[h - 1] == pytest.approx(3 * per[0][h - 1], rel=REL_EXACT)
    assert d["neutral"]["i3_a"] == pytest.approx(3 * per[0][2], rel=REL_EXACT)
    for h in (1, 2, 4, 5, 7, 11):
        assert neutral[h - 1] < CANCEL_REL * per[0][h - 1]
    assert d["neutral"]["i1_a"] < CANCEL_REL * phase(d, "L1")["i1_a"]


def test_all_units_on_one_phase_return_through_the_neutral(run_fleet):
    # With only L1 loaded, Kirchhoff's current law at the star point puts the whole L1
    # current in the neutral (i_N = i_L1): same fundamental, same rms (circuit theory).
    _, d, _ = run_fleet([{"design": DROPPER, "count": 300, "phase": "L1", "profile": ACTIVE_DAY}])
    l1 = phase(d, "L1")
    assert d["neutral"]["i1_a"] == pytest.approx(l1["i1_a"], rel=REL_EXACT)
    assert d["neutral"]["i_rms_a"] == pytest.approx(l1["i_rms_a"], rel=REL_EXACT)
    assert phase(d, "L2")["i_rms_a"] == 0.0 and phase(d, "L3")["i_rms_a"] == 0.0


# ----------------------------------------------------------------------------------------
# K-factor, F_HL and the sign of Q
# ----------------------------------------------------------------------------------------
def test_k_factor_and_f_hl_from_the_reported_spectrum(run_fleet):
    # K = sum I_h^2 h^2 / sum I_h^2 (UL 1561 / IEEE C57.110 with I_R = the load's rms,
    # from memory); F_HL = sum (I_h/I_1)^2 h^2 / sum (I_h/I_1)^2 (IEEE C57.110-2018).
    # Applied by hand to the harmonic magnitudes the report prints for each phase.
    groups = [
        {"design": DROPPER, "count": 500, "phase": "L1", "profile": ACTIVE_DAY},
        {"design": SMPS, "count": 2000, "phase": "L1", "profile": ACTIVE_DAY},
        {"design": SMPS, "count": 700, "phase": "L2", "hours": {"active": 6, "idle": 18}},
    ]
    _, d, _ = run_fleet(groups)
    for name in ("L1", "L2"):
        p = phase(d, name)
        i_h = np.array(p["harmonics_a"])
        h = np.arange(1, i_h.size + 1)
        assert i_h.size == 50
        k_hand = np.sum(i_h**2 * h**2) / np.sum(i_h**2)
        r = i_h / i_h[0]
        fhl_hand = np.sum(r**2 * h**2) / np.sum(r**2)
        assert p["k_factor"] == pytest.approx(k_hand, rel=REL_EXACT)
        assert p["f_hl"] == pytest.approx(fhl_hand, rel=REL_EXACT)
        assert p["k_factor"] > 1.5  # a distorted load, well above a sine's K = 1
        # THD by its definition, sqrt(sum_{h>=2} I_h^2) / I_1 (IEEE 519-2014)
        assert p["thd_i_pct"] == pytest.approx(
            100 * np.sqrt(np.sum(i_h[1:] ** 2)) / i_h[0], rel=REL_EXACT
        )


def test_dropper_fleet_is_leading_with_negative_kvar(run_fleet):
    # A capacitive dropper draws a leading current: Q1 < 0 under the IEEE 1459 load
    # convention. Hand estimate per unit: the series capacitor dominates, Q ~ -V^2 w C
    # (3.3 uF at 120 V / 60 Hz: -17.9 var; textbook capacitive reactance, Xc = 1/(wC));
    # the 22 ohm resistor and the 12 V clamp make it a few percent smaller.
    n = 1000
    _, d, _ = run_fleet(
        [{"design": DROPPER, "count": n, "phase": "balanced", "profile": ACTIVE_DAY}]
    )
    q_hand_kvar = -n * V_LN**2 * 2 * math.pi * F_HZ * 3.3e-6 / 1e3
    assert d["q1_kvar"] < 0
    assert d["q1_kvar"] == pytest.approx(q_hand_kvar, rel=REL_HAND_Q)
    assert d["q1_sense"].startswith("leading")
    # apparent power is the arithmetic sum V I_rms over phases; its PF = P / S is labelled
    # arithmetic; the headline PF is P / S_e (IEEE 1459-2010 clause 3.2.2)
    s_hand = sum(V_LN * p["i_rms_a"] for p in d["phases"]) / 1e3
    assert d["s_kva"] == pytest.approx(s_hand, rel=REL_EXACT)
    assert d["pf_arith"] == pytest.approx(d["p_kw"] / d["s_kva"], rel=REL_EXACT)
    assert d["pf"] == pytest.approx(d["p_kw"] / d["s_e_kva"], rel=REL_EXACT)


# ----------------------------------------------------------------------------------------
# conservation invariants
# ----------------------------------------------------------------------------------------
_MIXED = [
    {
        "name": "a",
        "design": DROPPER,
        "count": 10,
        "phase": "L1",
        "hours": {"active": 3, "idle": 21},
    },
    {
        "name": "b",
        "design": SMPS,
        "count": 10,
        "phase": "balanced",
        "profile": ["idle"] * 8 + ["active"] * 10 + ["idle"] * 6,
    },
    {
        "name": "c",
        "design": DROPPER,
        "count": 10,
        "phase": "L3",
        "profile": ["active"] * 12 + ["idle"] * 12,
    },
]


@pytest.fixture
def mixed_spec(tmp_path, designs):
    groups = [{**g, "design": designs[g["design"]]} for g in _MIXED]
    path = tmp_path / "mixed.toml"
    path.write_text(fleet_text(groups), encoding="utf-8")
    spec = load_fleet(path)
    return spec, unit_catalogue(spec.designs)


def _hand_hourly_w(cat, counts):
    """Sum over groups of count x unit P of the state each unit is in, hour by hour."""
    p_t = np.zeros(24)
    for n, raw in zip(counts, _MIXED, strict=True):
        (path,) = [p for p in cat if p.stem == raw["design"]]
        if "profile" in raw:
            p_t += n * np.array([cat[path][s].pq.p_w for s in raw["profile"]])
        else:  # hours per state: that fraction of the units all day
            p_t += n * sum(cat[path][s].pq.p_w * h / 24 for s, h in raw["hours"].items())
    return p_t


@settings(
    max_examples=15, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(counts=st.lists(st.integers(1, 10**6), min_size=3, max_size=3))
def test_fleet_power_and_energy_are_sums_over_units(mixed_spec, counts):
    # Active power is additive (conservation of energy): P_fleet(t) = sum count x P_unit;
    # energy per year = sum over the 24 hours of kW x 1 h x 365 days.
    spec, cat = mixed_spec
    spec = dataclasses.replace(
        spec,
        groups=[dataclasses.replace(g, count=n) for g, n in zip(spec.groups, counts, strict=True)],
    )
    res = evaluate_fleet(spec, cat)
    p_hand_w = _hand_hourly_w(cat, counts)
    assert np.allclose(res.hourly["p_kw"].to_numpy(), p_hand_w / 1e3, rtol=REL_EXACT)
    assert res.e_kwh_per_year == pytest.approx(p_hand_w.sum() / 1e3 * 365, rel=REL_EXACT)
    assert res.e_kwh_per_year == pytest.approx(res.groups["e_kwh_per_year"].sum(), rel=REL_EXACT)
    assert res.units == sum(counts)
    # the reported peak: the largest hour, or the coincident case in which group "a"
    # (hours per day, no timing) has every unit in its state of most kW at once
    (path_a,) = [p for p in cat if p.stem == _MIXED[0]["design"]]
    p_a = {s: cat[path_a][s].pq.p_w for s in _MIXED[0]["hours"]}
    spread_a = counts[0] * sum(p_a[s] * h / 24 for s, h in _MIXED[0]["hours"].items())
    coincident_w = p_hand_w - spread_a + counts[0] * max(p_a.values())
    assert res.p_kw == pytest.approx(max(p_hand_w.max(), coincident_w.max()) / 1e3,
                                     rel=REL_EXACT)


def test_n_units_draw_n_times_one_units_phasors(run_fleet):
    # Identical circuits on one stiff voltage draw identical currents, so N of them draw
    # N x the phasor spectrum of one (Kirchhoff's current law per harmonic) and N x its
    # rms; the one-unit rms is the engine's time-domain rms of the sampled current.
    n = 437
    one, _, cat = run_fleet([{"design": DROPPER, "count": 1, "phase": "L2", "profile": ACTIVE_DAY}])
    many, _, _ = run_fleet([{"design": DROPPER, "count": n, "phase": "L2", "profile": ACTIVE_DAY}])
    u = unit(cat, DROPPER, "active")
    l2_one, l2_many = one.phases[1], many.phases[1]
    assert np.allclose(l2_many.i_h_a, n * l2_one.i_h_a, rtol=REL_EXACT, atol=0)
    assert np.allclose(l2_one.i_h_a, u.i_h_vs_v_a[: l2_one.i_h_a.size], rtol=REL_EXACT)
    assert l2_one.i_rms_a == pytest.approx(u.pq.i_rms_a, rel=REL_PARSEVAL)
    assert l2_many.i_rms_a == pytest.approx(n * u.pq.i_rms_a, rel=REL_PARSEVAL)
    assert l2_many.p_w == pytest.approx(n * u.pq.p_w, rel=REL_EXACT)


def test_order_of_groups_changes_nothing(tmp_path, designs):
    # Addition is commutative: listing the groups in reverse must give the same fleet
    # (common practice, no source). Compared number by number, hourly table included.
    groups = [{**g, "design": designs[g["design"]]} for g in _MIXED]
    out = []
    for k, order in enumerate((groups, groups[::-1])):
        path = tmp_path / f"order{k}.toml"
        path.write_text(
            fleet_text(order, tariff={"energy_price": 0.2, "demand_price": 5.0}), encoding="utf-8"
        )
        spec = load_fleet(path)
        d = fleet_to_dict(evaluate_fleet(spec, unit_catalogue(spec.designs)))
        d.pop("file")
        d.pop("fleet")
        out.append(d)
    a, b = out
    flat_a, flat_b = _flatten(a, ""), _flatten(b, "")
    assert flat_a.keys() == flat_b.keys()
    for key in flat_a:
        if key.startswith(".groups"):
            continue  # same rows, listed in file order
        va, vb = flat_a[key], flat_b[key]
        if isinstance(va, float):
            assert vb == pytest.approx(va, rel=REL_EXACT, abs=1e-12), key
        else:
            assert va == vb, key
    rows_a = sorted(a["groups"], key=lambda r: r["group"])
    rows_b = sorted(b["groups"], key=lambda r: r["group"])
    for ra, rb in zip(rows_a, rows_b, strict=True):
        assert ra.keys() == rb.keys()
        for key in ra:
            assert (
                rb[key] == pytest.approx(ra[key], rel=REL_EXACT)
                if isinstance(ra[key], float)
                else rb[key] == ra[key]
            )


def _flatten(x, prefix):
    if isinstance(x, dict):
        out = {}
        for k, v in x.items():
            out.update(_flatten(v, f"{prefix}.{k}"))
        return out
    if isinstance(x, list):
        out = {}
        for k, v in enumerate(x):
            out.update(_flatten(v, f"{prefix}[{k}]"))
        return out
    return {prefix: x}


def _random_inventory(designs, n, seed):
    """``n`` inventory rows over the two designs (seeded): counts, phases, hours or profiles.

    Returns (CSV text, rows as dicts) -- the rows as written, for a reference computed
    from them without the loader.
    """
    rng = np.random.default_rng(seed)
    rows = []
    for k in range(n):
        row = {"name": f"r{k}", "design": (DROPPER, SMPS)[int(rng.integers(2))],
               "count": int(rng.integers(1, 1000)),
               "phase": ("L1", "L2", "L3", "balanced")[int(rng.integers(4))],
               "hours": "", "profile": "", "diversity": ""}
        if rng.random() < 0.5:
            h = int(rng.integers(0, 25))
            row["hours"] = f"active={h} idle={24 - h}"
        else:
            row["profile"] = " ".join(("idle", "active")[int(x)] for x in rng.random(24) < 0.3)
        if rng.random() < 0.3:
            row["diversity"] = f"{rng.uniform(0.1, 1.0):.3f}"
        rows.append(row)
    cols = ["name", "design", "count", "phase", "hours", "profile", "diversity"]
    text = ",".join(cols) + "\n" + "".join(
        ",".join(designs[r[c]] if c == "design" else str(r[c]) for c in cols) + "\n"
        for r in rows)
    return text, rows


def _inventory_fleet(tmp_path, text, name="big"):
    (tmp_path / f"{name}.csv").write_text(text, encoding="utf-8")
    path = tmp_path / f"{name}.toml"
    path.write_text(fleet_text([], inventory=f"{name}.csv"), encoding="utf-8")
    return path


def test_a_fleet_of_1e5_groups_is_the_sum_of_its_units(tmp_path, designs):
    # Conservation of energy at scale (the invariant itself, no other source): with 10^5
    # random inventory rows (hours per day or 24-hour profiles, with or without diversity),
    # the fleet's hourly P and Q1, energy, unit count and reported
    # kW peak equal a plain group-by-group sum of count x the unit's figures, taken from
    # the rows as written (not from the loader's groups).
    text, rows = _random_inventory(designs, 100_000, seed=10)
    spec = load_fleet(_inventory_fleet(tmp_path, text))
    assert len(spec.groups) == len(rows)
    cat = unit_catalogue(spec.designs)
    res = evaluate_fleet(spec, cat)
    p = {name: {s: unit(cat, name, s).pq.p_w for s in ("active", "idle")} for name in designs}
    q = {name: {s: unit(cat, name, s).pq.q1_var for s in ("active", "idle")} for name in designs}
    p_t, q_t = np.zeros(24), np.zeros(24)
    coincident_extra_w = 0.0  # hours-per-day groups all at once in their state of most kW
    for r in rows:
        n, pu, qu = r["count"], p[r["design"]], q[r["design"]]
        d = float(r["diversity"] or 1.0)
        if r["profile"]:  # a share d in the hour's state, the rest in the lightest (idle)
            states = r["profile"].split()
            p_t += n * np.array([d * pu[s] + (1 - d) * pu["idle"] for s in states])
            q_t += n * np.array([d * qu[s] + (1 - d) * qu["idle"] for s in states])
        else:
            h = {s: float(x) for s, x in (kv.split("=") for kv in r["hours"].split())}
            spread_w = sum(pu[s] * x / 24 for s, x in h.items())
            p_t += n * spread_w
            q_t += n * sum(qu[s] * x / 24 for s, x in h.items())
            used = [pu[s] for s, x in h.items() if x > 0]
            coincident_extra_w += n * (d * max(used) + (1 - d) * min(used) - spread_w)
    assert res.units == sum(r["count"] for r in rows)
    assert np.allclose(res.hourly["p_kw"].to_numpy(), p_t / 1e3, rtol=REL_EXACT, atol=0)
    assert np.allclose(res.hourly["q1_kvar"].to_numpy(), q_t / 1e3, rtol=REL_EXACT, atol=0)
    assert res.e_kwh_per_year == pytest.approx(p_t.sum() / 1e3 * 365, rel=REL_EXACT)
    assert res.e_kwh_per_year == pytest.approx(res.groups["e_kwh_per_year"].sum(), rel=REL_EXACT)
    assert res.groups["count"].tolist() == [r["count"] for r in rows]
    peak_w = max(p_t.max(), (p_t + coincident_extra_w).max())
    assert res.p_kw == pytest.approx(peak_w / 1e3, rel=REL_EXACT)


def test_occupancy_tensor_adds_groups_in_their_order_bit_for_bit():
    # The tensor of units per hour, phase and design-state is summed over the groups in
    # their order, exactly as a loop over the groups would (so the outputs do not depend
    # on how the work is batched). Checked against that loop on terms of very different
    # sizes, where another order (shown: reversed) changes the last bits.
    from fleetpower.fleet import _accumulate

    rng = np.random.default_rng(5)
    n_g, n_s = 3000, 3
    occ = rng.random((n_g, 24, n_s)) * 10.0 ** rng.integers(-12, 12, (n_g, 1, 1))
    on_phase = rng.integers(0, 5, (n_g, 3)).astype(float)  # some groups absent on a phase
    sel = np.arange(0, n_g, 2)  # every other group belongs to this design
    cols = np.array([4, 1, 2])
    start = rng.random((24, 3, 6))
    w = start.copy()
    _accumulate(w, on_phase, cols, sel, occ[sel])
    loop = start.copy()
    for g in sel:
        for p in range(3):
            if on_phase[g, p]:
                loop[:, p, cols] = loop[:, p, cols] + on_phase[g, p] * occ[g]
    assert np.array_equal(w, loop)
    backwards = start.copy()
    for g in sel[::-1]:
        for p in range(3):
            if on_phase[g, p]:
                backwards[:, p, cols] = backwards[:, p, cols] + on_phase[g, p] * occ[g]
    assert not np.array_equal(backwards, loop)  # the order is visible in these sums


def test_a_bad_row_deep_in_a_large_inventory_is_named(tmp_path, designs):
    # The first bad row of 20,000 is named with its column, whatever comes after it
    # (the CSV's row 1 is the header, so data row k is row k + 2).
    text, _rows = _random_inventory(designs, 20_000, seed=11)
    lines = text.splitlines()
    cells = lines[15_001].split(",")
    cells[2] = "12.5"  # not a whole number of units
    lines[15_001] = ",".join(cells)
    cells = lines[17_001].split(",")
    cells[3] = "L9"
    lines[17_001] = ",".join(cells)
    with pytest.raises(InputError) as err:
        load_fleet(_inventory_fleet(tmp_path, "\n".join(lines) + "\n", "bad"))
    assert err.value.where == "row 15002, column count"
    assert "whole number" in err.value.message
    lines[15_001] = text.splitlines()[15_001]
    with pytest.raises(InputError) as err:
        load_fleet(_inventory_fleet(tmp_path, "\n".join(lines) + "\n", "bad2"))
    assert err.value.where == "row 17002, column phase"
    assert "unknown phase 'L9'" in err.value.message


# ----------------------------------------------------------------------------------------
# summation law, diversity, tariffs
# ----------------------------------------------------------------------------------------
def test_iec61000_3_6_summation_changes_magnitudes_and_says_so(run_fleet):
    # Two different designs on L1. Phasor sum: |I_a + I_b|. IEC 61000-3-6 general
    # summation law (IEC/TR 61000-3-6:2008, exponents from memory): alpha = 1 below h 5
    # (arithmetic |I_a| + |I_b|), 1.4 for 5 <= h <= 10, 2 above 10 (root sum of squares).
    # One design alone on a phase is unchanged by the law (a single source).
    base = [
        {"design": DROPPER, "count": 40, "phase": "L1", "profile": ACTIVE_DAY},
        {"design": SMPS, "count": 1500, "phase": "L1", "profile": ACTIVE_DAY},
    ]
    _, a, _ = run_fleet(base[:1])
    _, b, _ = run_fleet(base[1:])
    _, ph, _ = run_fleet(base)
    _, iec, _ = run_fleet(base, summation="iec61000-3-6")
    ia, ib = (np.array(phase(x, "L1")["harmonics_a"]) for x in (a, b))
    i_ph, i_iec = (np.array(phase(x, "L1")["harmonics_a"]) for x in (ph, iec))
    for h in (1, 3):
        assert i_iec[h - 1] == pytest.approx(ia[h - 1] + ib[h - 1], rel=REL_EXACT)
    for h in (5, 7, 9):
        want = (ia[h - 1] ** 1.4 + ib[h - 1] ** 1.4) ** (1 / 1.4)
        assert i_iec[h - 1] == pytest.approx(want, rel=REL_EXACT)
    for h in (11, 13, 25):
        assert i_iec[h - 1] == pytest.approx(math.hypot(ia[h - 1], ib[h - 1]), rel=REL_EXACT)
    assert not np.allclose(i_iec, i_ph, rtol=1e-3)
    assert "61000-3-6" in iec["summation"] and "phasor" in ph["summation"]
    assert "61000-3-6" not in ph["summation"]
    # the neutral stays a phasor sum whatever the law (a magnitude law has no angles;
    # fleetpower.pq.polyphase.sum_iec61000_3_6 notes)
    assert iec["neutral"]["harmonics_a"] == pytest.approx(
        ph["neutral"]["harmonics_a"], rel=REL_EXACT
    )


def test_diversity_lowers_the_coincident_peak(run_fleet):
    # Hours per state with a diversity d: at the peak a fraction d of the units is in the
    # heaviest state and the rest in the lightest, P_peak = N (d P_active + (1 - d) P_idle)
    # (coincidence-factor definition, common practice, no source); the energy depends only
    # on the hours and not on d.
    n = 1000
    g = {"design": SMPS, "count": n, "phase": "L1", "hours": {"active": 3, "idle": 21}}
    full, d_full, cat = run_fleet([{**g, "diversity": 1.0}])
    half, d_half, _ = run_fleet([{**g, "diversity": 0.5}])
    pa, pi = unit(cat, SMPS, "active").pq.p_w, unit(cat, SMPS, "idle").pq.p_w
    assert pa > pi
    assert d_full["p_kw"] == pytest.approx(n * pa / 1e3, rel=REL_EXACT)
    assert d_half["p_kw"] == pytest.approx(n * (0.5 * pa + 0.5 * pi) / 1e3, rel=REL_EXACT)
    assert d_half["p_kw"] < d_full["p_kw"]
    assert d_half["phases"][0]["i_rms_a"] < d_full["phases"][0]["i_rms_a"]
    assert d_half["peak_coincident"] and "coincident" in d_half["peak_case"]
    assert d_half["e_kwh_per_year"] == pytest.approx(
        n * (3 * pa + 21 * pi) / 1e3 * 365, rel=REL_EXACT
    )
    assert d_full["e_kwh_per_year"] == pytest.approx(d_half["e_kwh_per_year"], rel=REL_EXACT)
    assert half.peak_coincident and full.peak_coincident


def test_time_of_use_tariff_cost_by_hand(run_fleet):
    # Energy cost = 365 x sum_t kWh(t) x price(t), kWh(t) = N P_state(t) x 1 h; demand
    # cost = peak kW x price x 12; CO2 = kWh/yr x intensity (hand computation).
    prices = [0.10] * 7 + [0.30] * 12 + [0.20] * 5
    profile = ["idle"] * 8 + ["active"] * 10 + ["idle"] * 6
    n = 2500
    tariff = {"energy_price_by_hour": prices, "demand_price": 12.0, "co2_kg_per_kwh": 0.4}
    _, d, cat = run_fleet(
        [{"design": SMPS, "count": n, "phase": "balanced", "profile": profile}], tariff=tariff
    )
    p_w = {s: unit(cat, SMPS, s).pq.p_w for s in ("active", "idle")}
    kwh_t = [n * p_w[s] / 1e3 for s in profile]
    cost_hand = 365 * sum(e * c for e, c in zip(kwh_t, prices, strict=True))
    assert d["energy_cost_per_year"] == pytest.approx(cost_hand, rel=REL_EXACT)
    assert sum(r["energy_cost_per_year"] for r in d["groups"]) == pytest.approx(
        cost_hand, rel=REL_EXACT
    )
    assert d["e_kwh_per_year"] == pytest.approx(365 * sum(kwh_t), rel=REL_EXACT)
    assert d["demand_cost_per_year"] == pytest.approx(max(kwh_t) * 12.0 * 12, rel=REL_EXACT)
    assert d["co2_kg_per_year"] == pytest.approx(365 * sum(kwh_t) * 0.4, rel=REL_EXACT)
    # a flat price at the mean of the hourly prices would cost something else here
    flat = 365 * sum(kwh_t) * float(np.mean(prices))
    assert abs(cost_hand - flat) > 1e-3 * cost_hand


def test_bundled_example_fleet_evaluates_on_its_site_mains():
    # The 120/208 V example fleet: its 120 V designs run on the site's 120 V, nothing is
    # warned about mains, and the dropper-heavy fleet is leading (IEEE 1459 sign).
    spec = load_fleet(example_path("maple-clinic-120-208"))
    assert {d.mains.voltage for d in spec.designs.values()} == {V_LN}
    res = evaluate_fleet(spec)
    assert res.units == 1800 + 300 and res.p_kw > 0 and res.q1_kvar < 0
    assert not any("specified for" in w for w in res.warnings)


def test_worst_case_ties_go_to_the_first_case_not_to_rounding():
    # A named worst case, peak hour or heaviest state is the largest figure; figures that
    # agree to rounding (1e-12 from the engine) are a tie and the first case wins, so a
    # label cannot flip when an unrelated change moves the last digits (common practice,
    # no source). A real difference (1e-6) still decides.
    from fleetpower.ties import TIE_RTOL, first_largest, first_smallest

    assert first_largest([1.0, 1.0 + 1e-13, 0.5]) == 0
    assert first_largest([1.0 + 1e-13, 1.0, 0.5]) == 0
    assert first_largest([1.0, 1.0 + 1e-6, 0.5]) == 1
    assert first_smallest([2.0, 1.0, 1.0 - 1e-13]) == 1
    assert first_largest([-np.inf, 3.0, 3.0]) == 1
    assert first_largest([-np.inf, -np.inf]) == 0
    grid = np.array([[1.0, 5.0], [1.0 + 10 * TIE_RTOL, 5.0 * (1 + TIE_RTOL / 10)]])
    assert first_largest(grid, axis=0).tolist() == [1, 0]
    assert np.unravel_index(int(first_largest(grid)), grid.shape) == (0, 1)
