"""Design currents of every segment: each load, the sums up the tree, the device ratings.

Every segment is the run from a node's parent to the node. Currents are line currents in
A at the segment's own voltage; powers in W, VA (complex P + jQ, lagging power factors).
The rules, each where a designer expects it:

- **A load** is a current (A: the circuit's line current), a real power (W, kW, hp: at
  the node's power factor) or an apparent power (VA, kVA). 1-phase: I = S / V with V the
  circuit voltage (line to neutral or line to line, as the node says); 3-phase:
  I = S / (√3 · V_LL).
- **A motor** is sized from the full-load current of the rule profile's tables (NEC
  Tables 430.248/430.250 by hp at the table voltage of the system, 460 V for 480 V;
  CEC Tables 44/45), or, in the iec profile and outside the tables, from its output
  over a typical efficiency and power factor (``sizer.rules.motors``). A ``load`` given
  on a motor is its nameplate current, which the codes use for overload protection
  only (NEC 430.6(A)): it does not size the circuit. The branch conductors need the
  profile's ``branch_factor`` × full-load current (NEC 430.22: 125 %), before and after
  adjustment; a feeder with motors below needs 125 % of the largest motor's full-load
  current plus 100 % of the others plus the other loads (NEC 430.24). With no device
  given, a motor branch gets the largest device the profile allows for starting (NEC
  430.52: inverse-time breaker up to 250 %, next standard size up).
- **No load but a device rating** (unknown load): the current for voltage drop and
  losses is the profile's ``unknown_load_factor`` × the device rating (CSA C22.1 Rule
  8-102: 80 %; the nec profile takes 80 % too as common practice).
- **Continuous loads** count ``continuous_factor`` × their current toward the ampacity
  required *before adjustment* (NEC 210.19(A)(1)(a), 215.2(A)(1)(a): 125 %); the
  adjusted ampacity need only carry the load itself (210.19(A)(1)(b)): two separate
  tests, ``required_ampacity_a`` and ``required_adjusted_a``. Never toward drop or losses.
  The cec profile applies its 80 % (1.25) to the ampacity as installed too (CEC 8-104).
- **A feeder** carries the sum of the demand below it: apparent powers added
  arithmetically (conservative, common practice) × the node's ``demand_factor``, at the
  power factor of the vector sum (P / |S|); the required ampacity sums the children's
  (noncontinuous + factor × continuous) the same way; both converted at the feeder's own
  voltage and phases. A feeder never carries less than its largest child's current ×
  its demand factor: a 1-phase load puts its whole current on the line(s) it uses,
  which the balanced 3-phase sum would spread over three.
- **A transformer node**: its segment is the cable to the primary. Primary demand =
  secondary demand + copper loss (R% = Z% / √(1 + (X/R)²), at the loading n: n²·R%·rating)
  + core loss (``core_loss``, 0.5 % of rating unless given: a stated assumption) + the
  leakage reactive power n²·X%·rating. The primary cable's required ampacity is at
  least the rated primary current (primary conductors sized for the nameplate, common
  practice) and its default device is the next standard rating at or above 125 % of the
  rated primary current (NEC 450.3(B), primary protection only; next size up allowed).
  A transformer loaded above its rating is an error.
- **Device rating**: as given, else the smallest standard rating of the profile at or
  above the required ampacity (``ocpd_chosen`` True). Motor circuits: NEC 430.52 allows
  a larger device for starting; give it, sizer does not pick it.
- **Kind**: ``branch`` for a leaf (feeds a load), ``feeder`` for the rest.
- **Neutral**: a 1-phase circuit has two current-carrying conductors; it runs a neutral
  when it is line to neutral (the neutral is its return) or, taken line to line, when a
  line-to-neutral load hangs below it. A 3-phase segment runs a neutral when any leaf
  below it on the same voltage level is 1-phase line to neutral. A node's ``neutral =
  true/false`` overrides both.
"""

from __future__ import annotations

import math

import numpy as np

from sizer.errors import ScenarioError
from sizer.model import Node, Scenario, Segment
from sizer.rules import RuleProfile
from sizer.rules.motors import branch_device_a, full_load_current
from sizer.topology import Topology
from sizer.validation import Bus, Report, is_line_to_neutral, node_bus, supply_bus

SQRT3 = math.sqrt(3.0)
# NEC 450.3(B): transformer primary protection at up to 125 % of rated primary current
# (9 A or more), next standard size up permitted.
TRANSFORMER_PRIMARY_DEVICE_FACTOR = 1.25
_REL = 1e-9   # rounding slack when comparing currents with ratings

_CURRENT, _REAL, _APPARENT = 1, 2, 3
_KIND_CODE = {"current": _CURRENT, "real": _REAL, "apparent": _APPARENT}


def next_rating_a(ratings_a: np.ndarray, current_a: np.ndarray) -> np.ndarray:
    """Smallest rating ≥ each current (NaN where none is large enough)."""
    ratings = np.asarray(ratings_a, dtype=float)
    pos = np.searchsorted(ratings, np.asarray(current_a) * (1 - _REL), side="left")
    out = ratings[np.minimum(pos, len(ratings) - 1)]
    return np.where(pos < len(ratings), out, np.nan)


# Extreme inputs (a power factor of 1e-300, a load of 1e300 kW) may overflow: the results
# are checked for finiteness below and reported as bad input, never as a numpy warning.
@np.errstate(over="ignore", invalid="ignore", divide="ignore")
def design_segments(scenario: Scenario, profile: RuleProfile) -> tuple[Segment, ...]:
    """One Segment per node, aligned with ``scenario.nodes``, with its design currents.

    Uses the profile's unknown_load_factor, continuous_factor and standard_ratings_a.
    Raises ScenarioErrors for a device rating below its design
    current, an overloaded transformer, or a current beyond every standard rating.
    """
    nodes = scenario.nodes
    n = len(nodes)
    if n == 0:
        return ()
    file = scenario.file
    topo = scenario_topology(scenario)
    parent = topo.parent

    # Voltage levels: which 1-phase nodes are line to neutral.
    src = supply_bus(scenario.source.voltage_v, scenario.source.phases, scenario.source.id)
    buses: list[Bus] = []
    ln = np.zeros(n, dtype=bool)
    from_3ph = np.zeros(n, dtype=bool)   # fed from a 3-phase (4-wire wye) bus
    depth = topo.depth - 1
    for i, nd in enumerate(nodes):
        bus = src if parent[i] < 0 else buses[parent[i]]
        ln[i] = is_line_to_neutral(bus, nd.phases, nd.voltage_v)
        from_3ph[i] = bus.phases == 3
        buses.append(node_bus(bus, nd.id, nd.phases, nd.voltage_v, nd.transformer))

    volts = np.array([nd.voltage_v for nd in nodes])
    phases = np.array([nd.phases for nd in nodes], dtype=np.int64)
    kv = np.where(phases == 3, SQRT3, 1.0) * volts           # S = kv · I
    pf = np.array([nd.power_factor for nd in nodes])
    sin = np.sqrt(1.0 - pf * pf)
    df = np.array([nd.demand_factor for nd in nodes])
    # A device (and its assembly) listed for 100 % continuous operation: no 125 % for the
    # run it protects (NEC 210.19(A)(1) Exception, 215.2(A)(1) Exception No. 1; CEC 8-104).
    full = np.array([nd.device_100_percent for nd in nodes], dtype=bool)
    cf = np.where([nd.continuous for nd in nodes], float(profile.continuous_factor), 1.0)
    given = np.array([np.nan if nd.ocpd_a is None else nd.ocpd_a for nd in nodes])
    has_parent = parent >= 0
    leaf = topo.is_leaf
    tx = np.array([nd.transformer is not None for nd in nodes])
    rating = np.array([nd.transformer.rating_va if nd.transformer else 0.0 for nd in nodes])
    r_pct = np.array([nd.transformer.r_pct if nd.transformer else 0.0 for nd in nodes])
    x_pct = np.array([nd.transformer.x_pct if nd.transformer else 0.0 for nd in nodes])
    core_pct = np.array([nd.transformer.core_loss_pct if nd.transformer else 0.0
                         for nd in nodes])
    rated_primary_a = np.where(tx, rating / kv, 0.0)

    # --- each leaf's own load --------------------------------------------------------
    kind = np.array([_KIND_CODE[nd.load.kind] if nd.load else 0 for nd in nodes])
    value = np.array([nd.load.value if nd.load else 0.0 for nd in nodes])
    motor_w = np.array([nd.motor.power_w if nd.motor else 0.0 for nd in nodes])
    flc, basis = motor_currents(nodes, leaf, profile)
    # iec: a nameplate current given as the load is the motor's rated current (the codes
    # with tables keep it for the overload relay only, NEC 430.6(A))
    nameplate = leaf & (kind == _CURRENT) & (motor_w > 0) & (
        profile.motors is not None and profile.motors.rule == "efficiency")
    flc = np.where(nameplate, value, flc)
    basis = [f"the nameplate current {value[i]:g} A" if nameplate[i] else b
             for i, b in enumerate(basis)]
    is_motor = leaf & (motor_w > 0) & (profile.motors is not None)
    unknown = leaf & (kind == 0) & (motor_w == 0) & ~np.isnan(given)
    own_abs = np.select(
        [is_motor, kind == _CURRENT, kind == _REAL, kind == _APPARENT,
         (kind == 0) & (motor_w > 0), unknown],
        [kv * flc, kv * value, value / pf, value, motor_w / pf,
         kv * float(profile.unknown_load_factor) * np.nan_to_num(given)],
        default=0.0)
    own_abs = np.where(leaf, own_abs, 0.0)
    # a current stays as written
    own_i = np.where(is_motor, flc, np.where(kind == _CURRENT, value, own_abs / kv))
    # Motors: branch_factor on the branch (430.22); up the tree at 100 % plus the largest
    # motor's extra share (430.24), carried apart in ``extra_va``.
    mf = float(profile.motors.branch_factor) if profile.motors is not None else 1.0
    cf = np.where(is_motor, mf, cf)

    s_abs = own_abs.copy()
    nonlinear_va = own_abs * np.array([nd.nonlinear for nd in nodes])
    s = own_abs * (pf + 1j * sin)
    req_va = np.where(is_motor, own_abs, own_abs * cf)
    extra_va = np.where(is_motor, (mf - 1.0) * own_abs, 0.0)
    has_motor = is_motor.copy()
    current = np.where(leaf, own_i, 0.0)
    # the run's own need (1.0 behind a 100 %-rated device); its parent still sees 125 %
    required = current * np.where(full & ~is_motor, 1.0, cf)
    load_fraction = np.zeros(n)

    # --- sums up the tree, one depth at a time, deepest first ---------------------------
    sum_abs = np.zeros(n)
    sum_vec = np.zeros(n, dtype=complex)
    sum_req = np.zeros(n)
    max_i = np.zeros(n)
    max_req = np.zeros(n)
    max_extra = np.zeros(n)
    sum_nl = np.zeros(n)   # non-linear VA below, for the neutral count (310.15(E)(3))
    has_ln = ln.copy()
    by_depth = np.argsort(depth, kind="stable")
    bounds = np.searchsorted(depth[by_depth], np.arange(depth.max() + 2))
    for d in range(int(depth.max()), -1, -1):
        idx = by_depth[bounds[d]:bounds[d + 1]]
        f = idx[~leaf[idx]]
        if f.size:
            vec = sum_vec[f]
            mag = np.abs(vec)
            unit = np.where(mag > 0, vec / np.where(mag > 0, mag, 1.0), pf[f] + 1j * sin[f])
            s_sec = df[f] * sum_abs[f] * unit
            r_sec = df[f] * sum_req[f]
            t = tx[f]
            load_fraction[f] = np.where(t, np.abs(s_sec) / np.where(t, rating[f], 1.0), 0.0)
            nn = load_fraction[f] ** 2
            p_loss = (nn * r_pct[f] + core_pct[f]) / 100.0 * rating[f]
            q_loss = nn * x_pct[f] / 100.0 * rating[f]
            s_node = s_sec + p_loss + 1j * q_loss
            r_node = r_sec + (np.abs(s_node) - np.abs(s_sec))
            i_f = np.abs(s_node) / kv[f]
            extra_va[f] = max_extra[f]
            nonlinear_va[f] = np.where(sum_abs[f] > 0, sum_nl[f] / np.where(
                sum_abs[f] > 0, sum_abs[f], 1.0), 0.0) * np.abs(s_node)
            req_f = (r_node + extra_va[f]) / kv[f]
            # Same voltage level below a panel: no less than the largest child's current.
            i_f = np.where(t, i_f, np.maximum(i_f, df[f] * max_i[f]))
            req_f = np.where(t, np.maximum(req_f, rated_primary_a[f]),
                             np.maximum(req_f, df[f] * max_req[f]))
            # 100 %-rated device: the feeder's own need counts the continuous load at 100 %
            # (what it passes up to its parent keeps the 125 %).
            req_full = np.maximum((np.abs(s_node) + extra_va[f]) / kv[f], df[f] * max_i[f])
            req_f = np.where(full[f], np.where(t, np.maximum(req_full, rated_primary_a[f]),
                                               req_full), req_f)
            s[f], s_abs[f], req_va[f], current[f], required[f] = (
                s_node, np.abs(s_node), r_node, i_f, req_f)
        up = idx[has_parent[idx]]
        p = parent[up]
        np.add.at(sum_abs, p, s_abs[up])
        np.add.at(sum_vec, p, s[up])
        np.add.at(sum_req, p, req_va[up])
        np.maximum.at(max_i, p, current[up])
        np.maximum.at(max_req, p, required[up])
        np.maximum.at(max_extra, p, extra_va[up])
        np.add.at(sum_nl, p, nonlinear_va[up])
        np.logical_or.at(has_motor, p, has_motor[up])
        same = ~tx[p]     # a transformer's children are on another voltage level
        np.logical_or.at(has_ln, p[same], has_ln[up[same]])

    # Transformer secondary conductors by the profile's own rule (CEC Rule 26-256: at least
    # 125 % of the rated secondary current); the nec rule (240.21(C): no next size up)
    # is a protection rule, applied with the candidates.
    secondary = has_parent & tx[np.maximum(parent, 0)]
    sec_kv = np.array([
        (SQRT3 if t.secondary_phases == 3 else 1.0) * t.secondary_v if t else 1.0
        for t in (nd.transformer for nd in nodes)])
    rated_secondary_a = np.where(secondary, (rating / sec_kv)[np.maximum(parent, 0)], 0.0)
    if profile.secondary_rule == "rated_current":
        required = np.maximum(required, profile.secondary_factor * rated_secondary_a)

    share = np.clip(np.where(s_abs > 0, nonlinear_va / np.where(s_abs > 0, s_abs, 1.0), 0.0),
                    0.0, 1.0)
    seg_pf = np.where(s_abs > 0, s.real / np.where(s_abs > 0, s_abs, 1.0), pf)

    # --- device ratings ----------------------------------------------------------------
    need = np.where(tx, np.maximum(required,
                                   TRANSFORMER_PRIMARY_DEVICE_FACTOR * rated_primary_a),
                    required)
    chosen = next_rating_a(np.asarray(profile.standard_ratings_a, dtype=float), need)
    motors = profile.motors
    if motors is not None:
        for k in np.flatnonzero(is_motor & np.isnan(given)):
            device = branch_device_a(motors, profile.standard_ratings_a, float(flc[k]))
            if device is not None and device >= need[k] * (1 - _REL):
                chosen[k] = device
    ocpd = np.where(np.isnan(given), chosen, given)
    # The second test (210.19(A)(1)(b), 215.2(A)(1)(b)): the adjusted ampacity carries the
    # load at 100 %; where motors are below, 430.22/430.24 apply to it as well.
    required_adjusted = np.where(
        has_motor | profile.continuous_after_adjustment, required,
        np.where(tx, np.maximum(current, rated_primary_a), current))
    if profile.secondary_rule == "rated_current":
        required_adjusted = np.maximum(required_adjusted,
                                       profile.secondary_factor * rated_secondary_a)

    report = Report(file)
    overflow = ~np.isfinite(current) | ~np.isfinite(required) | ~np.isfinite(s_abs)
    feeds_overflow = np.zeros(n, dtype=bool)   # overflowing because of a node below it
    feeds_overflow[parent[overflow & has_parent]] = True
    for k in np.flatnonzero(overflow & ~feeds_overflow):
        report.add("the design current is too large to compute: check the load, the power "
                   "factor and the voltage of this node and those below it",
                   node=nodes[k].id, field="load")
    report.raise_if_any()
    largest = max(profile.standard_ratings_a)
    for k in np.flatnonzero(np.isnan(ocpd)):
        # A huge load (a typo'd motor rating) is shown short, not as a 300-digit number.
        shown = f"{need[k]:.0f}" if need[k] < 1e7 else f"{need[k]:.3g}"
        report.add(f"needs {shown} A, above the largest standard device rating "
                   f"({largest:g} A) of the {profile.name} profile: give the device rating "
                   "or split the load over parallel feeders", node=nodes[k].id, field="ocpd")
    for k in np.flatnonzero(given < current * (1 - _REL)):
        report.add(f"the device rating {given[k]:g} A is below the design current "
                   f"{current[k]:.1f} A", node=nodes[k].id, field="ocpd")
    for k in np.flatnonzero(load_fraction > 1 + _REL):
        t = nodes[k].transformer
        assert t is not None
        report.add(f"the demand below it, {load_fraction[k] * t.rating_va / 1e3:.1f} kVA, "
                   f"is {100 * load_fraction[k]:.0f} % of its {t.rating_va / 1e3:g} kVA "
                   "rating", node=nodes[k].id, field="transformer.rating")
    report.raise_if_any()

    # Every per-run array as a Python list once, not one numpy scalar per field and run.
    (parent_l, leaf_l, current_l, required_l, adjusted_l, motor_l, share_l, from_3ph_l,
     secondary_l, ocpd_l, chosen_l, pf_l, s_l, has_ln_l, ln_l) = (
        np.asarray(a).tolist() for a in (
            parent, leaf, current, required, required_adjusted, is_motor, share, from_3ph,
            secondary, ocpd, np.isnan(given), seg_pf, s, has_ln, ln))
    return tuple(
        Segment(
            index=i, node=nd, parent_index=int(parent_l[i]),
            kind="branch" if leaf_l[i] else "feeder",
            voltage_v=nd.voltage_v, phases=nd.phases,
            current_a=float(current_l[i]), required_ampacity_a=float(required_l[i]),
            required_adjusted_a=float(adjusted_l[i]),
            motor_branch=bool(motor_l[i]), motor_basis=basis[i],
            service=parent_l[i] < 0,
            nonlinear_share=float(share_l[i]),
            from_three_phase=bool(from_3ph_l[i]),
            secondary=bool(secondary_l[i]),
            ocpd_a=float(ocpd_l[i]), ocpd_chosen=bool(chosen_l[i]),
            power_factor=float(pf_l[i]), demand_va=complex(s_l[i]),
            own_load_va=complex(s_l[i]) if leaf_l[i] else 0j,
            neutral=bool(has_ln_l[i]) if nd.neutral is None else nd.neutral,
            is_leaf=bool(leaf_l[i]), line_to_neutral=bool(ln_l[i]),
        )
        for i, nd in enumerate(nodes)
    )


def circuit_notes(segments: tuple[Segment, ...]) -> tuple[str, ...]:
    """What sizer assumed or looked up per run, in words: motor currents, voltages taken."""
    out = []
    for seg in segments:
        if seg.motor_basis:
            out.append(f"{seg.id}: motor full-load current {seg.current_a:.3g} A from "
                       f"{seg.motor_basis}")
        if seg.node.voltage_assumed:
            out.append(f"{seg.id}: 1-phase with no voltage given: taken line to line at "
                       f"{seg.voltage_v:g} V (give voltage = \"...\" for line to neutral)")
    return tuple(out)


def motor_currents(nodes: tuple[Node, ...], leaf: np.ndarray,
                   profile: RuleProfile) -> tuple[np.ndarray, list[str]]:
    """Full-load current (A) of each motor leaf by the profile's rules, and its basis."""
    flc = np.zeros(len(nodes))
    basis = [""] * len(nodes)
    if profile.motors is None:
        return flc, basis
    for i, nd in enumerate(nodes):
        if nd.motor is not None and leaf[i]:
            got = full_load_current(profile.motors, nd.motor.power_w, nd.voltage_v, nd.phases)
            flc[i], basis[i] = got.current_a, got.basis
    return flc, basis


def scenario_topology(scenario: Scenario) -> Topology:
    """The tree of a scenario's nodes (-1 = the source); parents must come first."""
    index = scenario.index()
    out = np.empty(len(scenario.nodes), dtype=np.int64)
    for i, nd in enumerate(scenario.nodes):
        j = -1 if nd.parent == scenario.source.id else index.get(nd.parent)
        if j is None or j >= i:
            raise ScenarioError("the parent must be the source or a node listed before this "
                                "one", file=scenario.file, node=nd.id, field="parent")
        out[i] = j
    return Topology(out)
