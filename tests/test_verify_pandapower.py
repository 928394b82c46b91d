"""Independent cross-check of sizer.verify.load_flow against pandapower's Newton-Raphson.

Three trees of our own (invented, realistic values): plain three-phase, with
transformers, and deep (>= 8 levels); single-phase branches are given to pandapower as
a balanced network on the circuit's own voltage with the loop (doubled) impedance,
which is exact for a two-wire circuit. Lines have no capacitance; transformers no iron
loss or magnetising current, no tap and no phase shift.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from sizer.verify import Network, load_flow, motor_start_dip_pct

pp = pytest.importorskip("pandapower")

SQRT3 = math.sqrt(3.0)
KM_PER_M = 1e-3

# Per-conductor AC resistance and reactance (ohm/km), three single conductors in PVC
# conduit, rounded from NEC Chapter 9 Table 9 (2017–2023) ohm/kft × 3.281 — from memory,
# used only to make the test networks realistic; the check is pandapower, not these.
CABLE_OHM_PER_KM = {
    "500 kcmil": (0.089, 0.128),
    "4/0 AWG": (0.207, 0.135),
    "2/0 AWG": (0.328, 0.141),
    "1 AWG": (0.525, 0.151),
    "4 AWG": (1.02, 0.157),
    "10 AWG": (3.94, 0.164),
    "12 AWG": (6.56, 0.177),
}


def seg(size: str, length_m: float, sets: int = 1) -> complex:
    r, x = CABLE_OHM_PER_KM[size]
    return complex(r, x) * length_m * KM_PER_M / sets


def load(kva: float, power_factor: float) -> complex:
    return kva * 1e3 * complex(power_factor, math.sqrt(1.0 - power_factor**2))


def xfmr(z_pct: float, x_r: float) -> complex:
    return z_pct * complex(math.cos(math.atan(x_r)), math.sin(math.atan(x_r)))


def build(rows: list[tuple]) -> Network:
    """rows: (parent, z_ohm, circuit_v, phases, load_va, rating_va, z_pct, secondary_v)."""
    cols = list(zip(*rows, strict=True))
    return Network(
        parent=np.array(cols[0]), z_ohm=np.array(cols[1], complex),
        circuit_v=np.array(cols[2], float), phases=np.array(cols[3]),
        load_va=np.array(cols[4], complex), xfmr_rating_va=np.array(cols[5], float),
        xfmr_z_pct=np.array(cols[6], complex), xfmr_secondary_v=np.array(cols[7], float),
    )


def plain_three_phase() -> Network:
    z0 = 0j
    return build([
        (-1, seg("500 kcmil", 8, sets=3), 480, 3, 0j, 0, z0, 0),          # 0 switchboard
        (0, seg("4/0 AWG", 60), 480, 3, load(20, 0.9), 0, z0, 0),          # 1 MCC (own load)
        (0, seg("500 kcmil", 95, sets=2), 480, 3, load(190, 0.95), 0, z0, 0),  # 2 kiln
        (1, seg("4 AWG", 40), 480, 3, load(35, 0.85), 0, z0, 0),           # 3 pump
        (1, seg("4 AWG", 55), 480, 3, load(26, 0.85), 0, z0, 0),           # 4 pump
        (0, seg("1 AWG", 45), 480, 3, 0j, 0, z0, 0),                       # 5 panel
        (5, seg("10 AWG", 70), 480, 3, load(9, 0.9), 0, z0, 0),            # 6 lighting
        (5, seg("10 AWG", 85), 480, 3, load(7, 0.9), 0, z0, 0),            # 7 lighting
        (1, seg("10 AWG", 30), 480, 3, load(8, 0.8), 0, z0, 0),            # 8 fan
    ])


def with_transformers() -> Network:
    z0 = 0j
    return build([
        (-1, seg("500 kcmil", 20, sets=2), 480, 3, 0j, 0, z0, 0),           # 0 switchboard
        (0, seg("1 AWG", 18), 480, 3, 0j, 75e3, xfmr(5.2, 4.0), 208),       # 1 xfmr 75 kVA
        (1, seg("4/0 AWG", 10), 208, 3, 0j, 0, z0, 0),                      # 2 panel 208Y/120
        (2, seg("4 AWG", 35), 208, 3, load(15, 0.85), 0, z0, 0),            # 3 rooftop unit
        (2, seg("12 AWG", 30), 120, 1, load(1.6, 0.95), 0, z0, 0),          # 4 lighting L-N
        (2, seg("12 AWG", 45), 120, 1, load(1.4, 0.95), 0, z0, 0),          # 5 lighting L-N
        (2, seg("12 AWG", 25), 120, 1, load(1.8, 1.0), 0, z0, 0),           # 6 receptacles
        (2, seg("10 AWG", 20), 208, 1, load(4.0, 1.0), 0, z0, 0),           # 7 heater L-L
        (0, seg("2/0 AWG", 60), 480, 3, load(90, 0.95), 0, z0, 0),          # 8 kiln
        (0, seg("4 AWG", 12), 480, 3, load(20, 0.9), 45e3, xfmr(4.5, 2.5), 208),  # 9 xfmr
        (9, seg("10 AWG", 40), 120, 1, load(1.9, 0.9), 0, z0, 0),           # 10 branch
        (9, seg("4 AWG", 25), 208, 3, load(12, 0.8), 0, z0, 0),             # 11 unit heater
    ])


def deep() -> Network:
    """Ten levels of sub-feeding at 480Y/277 V, a side load at every level, and a
    277 V single-phase sub-panel with its own single-phase circuits at the bottom."""
    rows: list[tuple] = []
    feeders = ["500 kcmil", "500 kcmil", "4/0 AWG", "4/0 AWG", "2/0 AWG", "2/0 AWG",
               "1 AWG", "1 AWG", "4 AWG", "4 AWG"]
    up = -1
    for level, size in enumerate(feeders):
        sets = 2 if level < 2 else 1
        rows.append((up, seg(size, 25 + 5 * level, sets), 480, 3, 0j, 0, 0j, 0))
        up = len(rows) - 1
        rows.append((up, seg("10 AWG", 30), 480, 3, load(6 + level, 0.88), 0, 0j, 0))
    rows.append((up, seg("4 AWG", 20), 277, 1, 0j, 0, 0j, 0))            # 1-phase panel
    sub = len(rows) - 1
    rows.append((sub, seg("12 AWG", 35), 277, 1, load(2.2, 0.95), 0, 0j, 0))
    rows.append((sub, seg("12 AWG", 50), 277, 1, load(1.5, 0.9), 0, 0j, 0))
    return build(rows)


TREES = {"plain": plain_three_phase, "transformers": with_transformers, "deep": deep}


def to_pandapower(net: Network, source_v: float):
    """The same tree as a pandapower network; returns it with the far and bus indices."""
    pnet = pp.create_empty_network(sn_mva=1.0, f_hz=60.0)
    src = pp.create_bus(pnet, vn_kv=source_v / 1e3)
    pp.create_ext_grid(pnet, src, vm_pu=1.0, va_degree=0.0)
    far, bus = [], []
    for i in range(net.n):
        p = int(net.parent[i])
        from_bus = src if p < 0 else bus[p]
        from_kv = pnet.bus.vn_kv.at[from_bus]
        own_kv = net.circuit_v[i] / 1e3
        far_bus = pp.create_bus(pnet, vn_kv=own_kv)
        # pandapower takes a line's base impedance from its from-bus, so the ohms are
        # referred to that level; the far bus sits on the circuit's own voltage.
        loop = 2.0 if net.phases[i] == 1 else 1.0
        z = net.z_ohm[i] * loop * (from_kv / own_kv) ** 2
        pp.create_line_from_parameters(
            pnet, from_bus, far_bus, length_km=1.0, r_ohm_per_km=z.real,
            x_ohm_per_km=z.imag, c_nf_per_km=0.0, max_i_ka=10.0)
        if net.xfmr_rating_va[i] > 0:
            z_pct = net.xfmr_z_pct[i]
            lv = pp.create_bus(pnet, vn_kv=net.xfmr_secondary_v[i] / 1e3)
            pp.create_transformer_from_parameters(
                pnet, far_bus, lv, sn_mva=net.xfmr_rating_va[i] / 1e6, vn_hv_kv=own_kv,
                vn_lv_kv=net.xfmr_secondary_v[i] / 1e3, vk_percent=abs(z_pct),
                vkr_percent=z_pct.real, pfe_kw=0.0, i0_percent=0.0, shift_degree=0.0)
            bus_i = lv
        else:
            bus_i = far_bus
        if net.load_va[i] != 0:
            pp.create_load(pnet, bus_i, p_mw=net.load_va[i].real / 1e6,
                           q_mvar=net.load_va[i].imag / 1e6)
        far.append(far_bus)
        bus.append(bus_i)
    return pnet, far, bus


def run_pandapower(pnet) -> np.ndarray:
    pp.runpp(pnet, algorithm="nr", init="flat", tolerance_mva=1e-11, max_iteration=50,
             calculate_voltage_angles=True, numba=False)
    res = pnet.res_bus
    return (res.vm_pu * np.exp(1j * np.deg2rad(res.va_degree))).to_numpy()


@pytest.mark.parametrize("name", list(TREES))
def test_load_flow_matches_pandapower_newton_raphson(name):
    net = TREES[name]()
    ours = load_flow(net, tol_pu=1e-12)
    assert ours.converged
    pnet, far, bus = to_pandapower(net, 480.0)
    v_pp = run_pandapower(pnet)
    np.testing.assert_allclose(ours.v_far_pu, v_pp[far], rtol=0, atol=1e-5)
    np.testing.assert_allclose(ours.v_bus_pu, v_pp[bus], rtol=0, atol=1e-5)
    # the trees are not trivial: the worst drop is a few percent
    assert np.max(ours.drop_pct) > 1.0


def test_deep_tree_is_deep():
    net = deep()
    depth = np.zeros(net.n, int)
    for i in range(net.n):
        depth[i] = 0 if net.parent[i] < 0 else depth[net.parent[i]] + 1
    assert depth.max() >= 8


@pytest.mark.parametrize(("name", "node", "start_kva"), [
    ("plain", 3, 150.0),           # 25 kVA motor, 6 × at start
    ("transformers", 11, 60.0),    # on the 45 kVA transformer's secondary
    ("deep", 19, 150.0),           # ten levels down
    ("deep", 21, 12.0),            # single-phase 277 V circuit
])
def test_motor_start_dip_matches_pandapower_shunt(name, node, start_kva):
    # Locked rotor as a constant impedance = pandapower shunt (P, Q given at 1 pu).
    net = TREES[name]()
    start = load(start_kva, 0.3)
    dip = motor_start_dip_pct(net, node, start, tol_pu=1e-12)
    pnet, _, bus = to_pandapower(net, 480.0)
    before = abs(run_pandapower(pnet)[bus[node]])
    pp.create_shunt(pnet, bus[node], q_mvar=start.imag / 1e6, p_mw=start.real / 1e6)
    during = abs(run_pandapower(pnet)[bus[node]])
    assert dip == pytest.approx(100.0 * (before - during), abs=1e-3)
    assert dip > 0.5
