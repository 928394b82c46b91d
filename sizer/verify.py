"""Verification of a chosen design: radial AC load flow, fault currents, motor-start dip.

Pure functions, arrays in and arrays out. Everything is computed as the balanced
per-phase equivalent in per unit on one system power base ``S_BASE_VA``, each node
carrying its own voltage base:

* a segment (the cable from the parent's bus to the node) has the base ``circuit_v``;
  its impedance is ``z_pu = z_ohm · k · S_base / circuit_v²`` with ``k = 2`` for a
  single-phase circuit (outgoing and return conductor: exact for a 2-wire circuit) and
  ``k = 1`` for a three-phase one (``circuit_v`` line-to-line);
* a node with a transformer: the cable ends at the primary (``v_far``), the transformer
  ``z_pu = (z_pct / 100) · S_base / rating`` lies between ``v_far`` and the node's bus
  (``v_bus``), whose base is ``xfmr_secondary_v``; without one, ``v_bus = v_far``;
* the node's own load ``S_pu = load_va / S_base`` sits on ``v_bus``;
* the source bus is held at 1 pu (the load flow sees a stiff source; the fault
  calculation adds the source impedance from its available fault current).

Per-unit values are continuous across voltage levels, so a single-phase branch hangs on
a three-phase panel as if the single-phase loads were spread evenly over the phases
(the usual balanced design assumption).

The tree walks use the parents-first order once to place every node in depth-first
preorder; then a subtree is a contiguous run of positions and a path from the source is
a running sum, so both sweeps are two ``numpy.cumsum`` calls whatever the tree's depth.
"""

from __future__ import annotations

import copy
import math
from dataclasses import dataclass, field

import numpy as np

from sizer.errors import InternalError
from sizer.faults import S_BASE_VA

__all__ = ["S_BASE_VA", "LoadFlowResult", "Network", "fault_currents_a", "load_flow",
           "motor_shunt_y_pu", "motor_start_dip_pct", "source_z_pu", "thevenin_z_pu"]

_SQRT3 = math.sqrt(3.0)
# A single-phase circuit whose voltage is below this fraction of its supply bus's
# line-to-line voltage is taken as fed line-to-neutral (120 V on 208Y/120: 0.577);
# otherwise as fed line-to-line (208 V on 208Y/120, 240 V on 240 V delta).
_LINE_TO_NEUTRAL_RATIO = 0.9


class _Tree:
    """Depth-first preorder positions of a parents-first tree (any depth, O(n) setup)."""

    def __init__(self, parent: np.ndarray) -> None:
        n = len(parent)
        par = parent.tolist()
        size = [1] * n
        for i in range(n - 1, -1, -1):  # children come after their parent
            p = par[i]
            if p >= 0:
                size[p] += size[i]
        pos = [0] * n
        next_free = [0] * n  # next free preorder slot for a child of each node
        root_next = 0
        for i in range(n):
            p = par[i]
            if p < 0:
                pos[i] = root_next
                root_next += size[i]
            else:
                pos[i] = next_free[p]
                next_free[p] += size[i]
            next_free[i] = pos[i] + 1
        self.n = n
        self.pos = np.asarray(pos, dtype=np.int64)
        self.end = self.pos + np.asarray(size, dtype=np.int64)  # one past the subtree

    def subtree_sum(self, x: np.ndarray) -> np.ndarray:
        """Sum of ``x`` over each node and all its descendants."""
        run = np.zeros(self.n + 1, dtype=x.dtype)
        run[self.pos + 1] = x
        cum = np.cumsum(run)
        return cum[self.end] - cum[self.pos]

    def path_sum(self, x: np.ndarray) -> np.ndarray:
        """Sum of ``x`` over each node and all its ancestors (source to node)."""
        step = np.zeros(self.n + 1, dtype=np.complex128)
        step[self.pos] = x
        # leaving a subtree takes its root's value off the running sum; ends may coincide
        step -= np.bincount(self.end, weights=np.real(x), minlength=self.n + 1)
        step -= 1j * np.bincount(self.end, weights=np.imag(x), minlength=self.n + 1)
        out = np.cumsum(step)[self.pos]
        return out if np.iscomplexobj(x) else out.real


def _array(name: str, value: object, dtype: type, n: int | None) -> np.ndarray:
    try:
        arr: np.ndarray = np.array(value, dtype=dtype)
        exact = dtype is not np.int64 or np.array_equal(arr, np.asarray(value))
    except (TypeError, ValueError) as exc:
        raise InternalError(f"cannot be read as {dtype.__name__} numbers ({exc})",
                            field=name) from None
    if not exact:
        raise InternalError("must hold whole numbers", field=name)
    if arr.ndim != 1:
        raise InternalError(f"must be one-dimensional, got shape {arr.shape}", field=name)
    if n is not None and len(arr) != n:
        raise InternalError(f"has {len(arr)} entries, expected {n} (one per node)",
                            field=name)
    arr.setflags(write=False)
    return arr


def _check(name: str, bad: np.ndarray, what: str) -> None:
    if np.any(bad):
        first = int(np.flatnonzero(bad)[0])
        raise InternalError(f"{what} (first at node index {first})", field=name)


@dataclass(frozen=True, eq=False)
class Network:
    """A radial tree to verify: one segment per node, ordered parents first.

    ``parent``: int, -1 = fed from the source bus, ``parent[i] < i``.
    ``z_ohm``: complex series impedance of one conductor path of the segment (sets combined).
    ``circuit_v``: nominal V of the segment's circuit (line-to-line for 3-phase).
    ``phases``: 1 or 3 (a 1-phase circuit's loop impedance is ``2·z_ohm``).
    ``load_va``: complex P + jQ of the node's own load at nominal voltage (whole circuit).
    ``xfmr_rating_va``: 0 = no transformer at the node; ``xfmr_z_pct``: complex R% + jX%
    on the transformer's rating; ``xfmr_secondary_v``: its secondary voltage (bus base).
    """

    parent: np.ndarray
    z_ohm: np.ndarray
    circuit_v: np.ndarray
    phases: np.ndarray
    load_va: np.ndarray
    xfmr_rating_va: np.ndarray
    xfmr_z_pct: np.ndarray
    xfmr_secondary_v: np.ndarray
    _tree: _Tree = field(init=False, repr=False)

    def __post_init__(self) -> None:
        parent = _array("parent", self.parent, np.int64, None)
        n = len(parent)
        values = {
            "parent": parent,
            "z_ohm": _array("z_ohm", self.z_ohm, np.complex128, n),
            "circuit_v": _array("circuit_v", self.circuit_v, np.float64, n),
            "phases": _array("phases", self.phases, np.int64, n),
            "load_va": _array("load_va", self.load_va, np.complex128, n),
            "xfmr_rating_va": _array("xfmr_rating_va", self.xfmr_rating_va, np.float64, n),
            "xfmr_z_pct": _array("xfmr_z_pct", self.xfmr_z_pct, np.complex128, n),
            "xfmr_secondary_v": _array("xfmr_secondary_v", self.xfmr_secondary_v,
                                       np.float64, n),
        }
        for name, arr in values.items():
            object.__setattr__(self, name, arr)
        _check("parent", (parent < -1) | (parent >= np.arange(n)),
               "must be -1 (source) or the index of an earlier node (parents first)")
        z = values["z_ohm"]
        _check("z_ohm", ~np.isfinite(z) | (z.real < 0) | (z.imag < 0),
               "must be finite with R >= 0 and X >= 0")
        v = values["circuit_v"]
        _check("circuit_v", ~np.isfinite(v) | (v <= 0), "must be a positive voltage")
        ph = values["phases"]
        _check("phases", (ph != 1) & (ph != 3), "must be 1 or 3")
        _check("load_va", ~np.isfinite(values["load_va"]), "must be finite")
        rating = values["xfmr_rating_va"]
        _check("xfmr_rating_va", ~np.isfinite(rating) | (rating < 0),
               "must be 0 (no transformer) or a positive rating")
        has = rating > 0
        zt = values["xfmr_z_pct"]
        _check("xfmr_z_pct", has & (~np.isfinite(zt) | (zt.real < 0) | (zt.imag < 0)),
               "must be finite with R% >= 0 and X% >= 0")
        sec = values["xfmr_secondary_v"]
        _check("xfmr_secondary_v", has & (~np.isfinite(sec) | (sec <= 0)),
               "must be a positive voltage where there is a transformer")
        object.__setattr__(self, "_tree", _Tree(parent))

    def with_z_ohm(self, z_ohm: np.ndarray) -> Network:
        """The same network with other cable impedances; the tree's walks are shared.

        ``dataclasses.replace`` would check every array and lay out the tree again.
        """
        z = _array("z_ohm", z_ohm, np.complex128, self.n)
        _check("z_ohm", ~np.isfinite(z) | (z.real < 0) | (z.imag < 0),
               "must be finite with R >= 0 and X >= 0")
        out = copy.copy(self)
        object.__setattr__(out, "z_ohm", z)
        return out

    @property
    def n(self) -> int:
        """Number of nodes (segments)."""
        return len(self.parent)

    @property
    def bus_v(self) -> np.ndarray:
        """Voltage base of each node's bus (V): the secondary after a transformer."""
        return np.where(self.xfmr_rating_va > 0, self.xfmr_secondary_v, self.circuit_v)

    def cable_z_pu(self) -> np.ndarray:
        """Segment impedance in pu on ``S_BASE_VA`` and ``circuit_v`` (loop for 1-phase)."""
        loop = np.where(self.phases == 1, 2.0, 1.0)
        return self.z_ohm * loop * S_BASE_VA / self.circuit_v**2

    def xfmr_z_pu(self) -> np.ndarray:
        """Transformer impedance in pu on ``S_BASE_VA`` (0 where there is none)."""
        has = self.xfmr_rating_va > 0
        rating = np.where(has, self.xfmr_rating_va, 1.0)
        return np.where(has, self.xfmr_z_pct / 100.0 * S_BASE_VA / rating, 0.0)

    def base_current_a(self) -> np.ndarray:
        """Current base of each segment's cable (A): S/(√3·V) for 3-phase, S/V for 1-phase."""
        return S_BASE_VA / (np.where(self.phases == 1, 1.0, _SQRT3) * self.circuit_v)


@dataclass(frozen=True, eq=False)
class LoadFlowResult:
    """Result of ``load_flow``; voltages in pu of each point's own nominal voltage."""

    v_far_pu: np.ndarray      # complex, far end of each cable (transformer primary)
    v_bus_pu: np.ndarray      # complex, node's bus (after its transformer), feeds children
    drop_pct: np.ndarray      # 100·(1 − |v_bus|): source to the bus, transformers included
    far_drop_pct: np.ndarray  # 100·(1 − |v_far|): source to the cable's far end
    current_a: np.ndarray     # magnitude of the cable current (A, per phase conductor path)
    iterations: int
    converged: bool
    mismatch_pu: float        # max |ΔV| of the last sweep


def _sweep(
    net: Network,
    s_pu: np.ndarray,
    tol_pu: float,
    max_iter: int,
    shunt_node: int | None = None,
    shunt_y_pu: complex = 0j,
) -> LoadFlowResult:
    """Backward/forward sweep with constant-power loads ``s_pu`` on the buses.

    An optional constant admittance ``shunt_y_pu`` at ``shunt_node`` (a starting motor)
    is solved exactly inside each sweep from the node's Thévenin impedance, so it does
    not slow the iteration down however heavy it is.
    """
    tree = net._tree
    z_x = net.xfmr_z_pu()
    z_t = net.cable_z_pu() + z_x
    n = net.n
    v_bus = np.ones(n, dtype=np.complex128)
    j = np.zeros(n, dtype=np.complex128)
    z_th = complex(tree.path_sum(z_t)[shunt_node]) if shunt_node is not None else 0j
    converged = n == 0
    delta = 0.0
    iterations = 0
    with np.errstate(all="ignore"):  # a collapsing voltage is reported, not warned about
        for iterations in range(1, max_iter + 1):  # noqa: B007 - the count is reported
            i_node = np.conj(s_pu / v_bus)
            if shunt_node is not None:
                v_open = 1.0 - tree.path_sum(z_t * tree.subtree_sum(i_node))
                v_m = v_open[shunt_node] / (1.0 + z_th * shunt_y_pu)
                i_node[shunt_node] += shunt_y_pu * v_m
            j = tree.subtree_sum(i_node)
            v_new: np.ndarray = 1.0 - tree.path_sum(z_t * j)
            if not np.all(np.isfinite(v_new)):
                delta = math.inf
                break
            delta = float(np.max(np.abs(v_new - v_bus))) if n else 0.0
            v_bus = v_new
            if delta <= tol_pu:
                converged = True
                break
        v_far = v_bus + z_x * j
        current = np.abs(j) * net.base_current_a()
        drop = 100.0 * (1.0 - np.abs(v_bus))
        far_drop = 100.0 * (1.0 - np.abs(v_far))
    for arr in (v_far, v_bus, current, drop, far_drop):
        arr.setflags(write=False)
    return LoadFlowResult(v_far, v_bus, drop, far_drop, current, iterations, converged,
                          delta)


def _check_iteration(tol_pu: float, max_iter: int) -> None:
    if not (tol_pu > 0 and math.isfinite(tol_pu)):
        raise InternalError(f"must be a positive number, got {tol_pu}", field="tol_pu")
    if max_iter < 1:
        raise InternalError(f"must be at least 1, got {max_iter}", field="max_iter")


def load_flow(net: Network, tol_pu: float = 1e-8, max_iter: int = 100) -> LoadFlowResult:
    """Radial AC load flow, loads at constant power, source bus at 1 pu.

    Backward/forward sweep: currents summed children→parents, voltages
    ``V_child = V_parent − Z·I`` parents→children, repeated until the largest change of
    any bus voltage is at most ``tol_pu``. Non-convergence (a load the tree cannot
    carry) comes back as ``converged=False``, not as an exception; the voltages are then
    the last finite iterate and must not be used as results.
    """
    _check_iteration(tol_pu, max_iter)
    return _sweep(net, net.load_va / S_BASE_VA, tol_pu, max_iter)


def source_z_pu(source_fault_a: float | None, source_v: float, source_x_r: float,
                source_phases: int = 3, c: float = 1.0) -> complex:
    """Source impedance in pu on ``S_BASE_VA``: ``|Z| = c / I_fault_pu`` at ``atan(X/R)``.

    IEC 60909-0 network feeder ``Z_Q = c·U_n/(√3·I''_kQ)``: with ``c`` the factor the
    given level was computed with, the fault at the source bus returns that level. The
    level is three-phase when ``source_phases`` is 3, a single-phase loop level when 1.
    None: an infinite bus (zero impedance).
    """
    if source_v is None or not (math.isfinite(source_v) and source_v > 0):
        raise InternalError(f"must be a positive voltage, got {source_v}", field="source_v")
    if source_phases not in (1, 3):
        raise InternalError(f"must be 1 or 3, got {source_phases}", field="source_phases")
    if source_fault_a is None:
        return 0j
    if not (math.isfinite(source_fault_a) and source_fault_a > 0):
        raise InternalError(f"must be a positive current, got {source_fault_a}",
                            field="source_fault_a")
    if not source_x_r >= 0:
        raise InternalError(f"must be >= 0, got {source_x_r}", field="source_x_r")
    base_a = S_BASE_VA / ((_SQRT3 if source_phases == 3 else 1.0) * source_v)
    angle = math.atan(source_x_r)  # atan(inf) = π/2: a pure reactance
    return complex(math.cos(angle), math.sin(angle)) * c * base_a / source_fault_a


def thevenin_z_pu(net: Network, z_src_pu: complex, shunt_y_pu: np.ndarray) -> np.ndarray:
    """Thévenin impedance (pu) at every node's bus with shunt admittances at the buses.

    Running motors feeding a fault are shunts (IEC 60909-0: a motor is its locked-rotor
    impedance behind a zero source). Bottom-up, each subtree's admittance seen from its
    parent's bus; top-down, the impedance looking up from each bus; the Thévenin
    impedance is the two in parallel. Exact for the radial network.
    """
    n = net.n
    z_t = (net.cable_z_pu() + net.xfmr_z_pu()).tolist()
    par = net.parent.tolist()
    y_down = [complex(v) for v in np.asarray(shunt_y_pu, dtype=np.complex128).tolist()]
    y_branch = [0j] * n  # admittance of the branch (cable + subtree) seen from the parent bus
    for i in range(n - 1, -1, -1):
        y_branch[i] = 1.0 / (z_t[i] + 1.0 / y_down[i]) if y_down[i] != 0 else 0j
        if par[i] >= 0:
            y_down[par[i]] += y_branch[i]
    y_src_bus = sum((y_branch[i] for i in range(n) if par[i] < 0), 0j)
    z_up = [0j] * n
    for i in range(n):
        p = par[i]
        if p < 0:
            if z_src_pu == 0:
                z_excl = 0j
            else:
                z_excl = 1.0 / (1.0 / z_src_pu + y_src_bus - y_branch[i])
        else:
            if z_up[p] == 0:
                z_excl = 0j
            else:
                z_excl = 1.0 / (1.0 / z_up[p] + y_down[p] - y_branch[i])
        z_up[i] = z_t[i] + z_excl
    out = np.empty(n, dtype=np.complex128)
    for i in range(n):
        out[i] = 0j if z_up[i] == 0 else 1.0 / (1.0 / z_up[i] + y_down[i])
    return out


def fault_currents_a(
    net: Network,
    source_fault_a: float | None,
    source_v: float,
    source_x_r: float,
    source_phases: int = 3,
    *,
    c: float = 1.0,
    source_c: float | None = None,
    shunt_y_pu: np.ndarray | None = None,
) -> np.ndarray:
    """Prospective bolted fault current (A) at each node's bus: ``c·I_base/|Z|``.

    Source impedance from ``source_z_pu`` with ``source_c`` (default ``c``), so the
    source bus returns the level given. ``c`` is the IEC 60909-0 voltage factor (1.0: a
    plain 1 pu prefault voltage; c_max with conductor R at 20 degC for the maximum,
    c_min with R hot for the minimum). ``shunt_y_pu``: admittance at each bus of running
    motors that feed the fault (None: none). ``source_fault_a=None`` means an infinite
    bus; a node with no impedance between it and an infinite bus gets ``inf``.

    Three-phase nodes: ``I = c·S_base / (√3·V_bus) / |Z_th|``, cables and transformers
    on the way, motors in parallel.

    Single-phase nodes: a line-to-neutral (bolted, far-end) estimate
    ``I = c·V / |Z_up + 2·z|``: the circuit's loop impedance (both conductors, and any
    single-phase segments and transformers above it) plus the upstream Thévenin
    impedance of the three-phase bus the single-phase part hangs on, which is taken once
    for a circuit fed line-to-neutral (so at zero length it equals that bus's
    three-phase level) and twice for one fed line-to-line (``√3/2`` of it).
    Upstream zero-sequence and neutral impedances are ignored: an estimate. Under a
    single-phase source (``source_phases=1``) the source level is already a loop level
    and is only referred to each circuit's voltage.
    """
    z_src = source_z_pu(source_fault_a, source_v, source_x_r, source_phases,
                        c if source_c is None else source_c)
    z_path = z_src + net._tree.path_sum(net.cable_z_pu() + net.xfmr_z_pu())
    z_bus = z_path if shunt_y_pu is None else thevenin_z_pu(net, z_src, shunt_y_pu)
    bus_v = net.bus_v
    one_phase = net.phases == 1
    z_fault = z_bus.copy()

    # Single-phase parts: re-count the upstream impedance at the point of entry.
    par = net.parent.tolist()
    entry = [-1] * net.n  # topmost node of the single-phase chain above each 1-phase node
    for i in np.flatnonzero(one_phase).tolist():
        p = par[i]
        entry[i] = entry[p] if p >= 0 and one_phase[p] else i
    idx = np.flatnonzero(one_phase)
    if len(idx):
        top = np.asarray(entry, dtype=np.int64)[idx]
        feed = net.parent[top]
        from_source = feed < 0
        safe_feed = np.where(from_source, 0, feed)
        feed_v = np.where(from_source, source_v, bus_v[safe_feed])
        z_feed = np.where(from_source, z_src, z_path[safe_feed])
        z_feed_th = np.where(from_source, z_src, z_bus[safe_feed])
        ratio2 = (feed_v / net.circuit_v[top]) ** 2
        if source_phases == 1:
            times = np.where(from_source, 1.0, _times_upstream(net.circuit_v[top], feed_v))
        else:
            times = _times_upstream(net.circuit_v[top], feed_v)
        z_fault[idx] = (z_path[idx] - z_feed) + times * ratio2 * z_feed_th

    base_a = S_BASE_VA / (np.where(one_phase, 1.0, _SQRT3) * bus_v)
    with np.errstate(divide="ignore"):
        return c * base_a / np.abs(z_fault)


def motor_shunt_y_pu(running_va: np.ndarray, multiple: np.ndarray, r_x: float) -> np.ndarray:
    """Admittance (pu on ``S_BASE_VA``) of running motors feeding a three-phase fault.

    IEC 60909-0: ``Z_M = (1/(I_LR/I_rM)) · U_rM² / S_rM`` at ``R_M/X_M = r_x``; in pu on
    the motor bus's voltage ``Z_M = S_base / (multiple · S_rM)``. Zero where there is
    no motor (``running_va`` or ``multiple`` 0).
    """
    s = np.asarray(running_va, dtype=float) * np.asarray(multiple, dtype=float)
    x = 1.0 / math.hypot(1.0, r_x)
    with np.errstate(divide="ignore", invalid="ignore"):
        z_mag = S_BASE_VA / s
        y = 1.0 / (z_mag * complex(r_x * x, x))
    return np.where(s > 0, y, 0j)


def _times_upstream(circuit_v: np.ndarray, feed_v: np.ndarray) -> np.ndarray:
    """How many upstream phase impedances a single-phase fault loop passes through."""
    return np.where(circuit_v < _LINE_TO_NEUTRAL_RATIO * feed_v, 1.0, 2.0)


def motor_start_dip_pct(
    net: Network,
    node: int,
    start_va: complex,
    running_va: complex = 0j,
    tol_pu: float = 1e-8,
    max_iter: int = 100,
    *,
    before: LoadFlowResult | None = None,
) -> float:
    """Voltage dip (% of nominal) at ``node``'s bus while a motor there starts.

    Model: the rest of the tree stays at its running load (constant power); the starting
    motor is a constant impedance drawing ``start_va`` (P + jQ) at nominal voltage —
    a locked rotor, whose current falls with the voltage, which is how a motor at
    standstill behaves (a constant-power model would overstate the dip). ``running_va``
    is the motor's own running demand if it is part of ``load_va[node]``; it is taken
    out while starting (default 0: everything in ``load_va`` keeps running, which errs
    towards a larger dip). Dip = ``100·(|V_before| − |V_during|)`` with V in pu.

    If the tree cannot carry its running load (no convergence), an InternalError is
    raised; if it collapses only during the start, the dip is reported as 100 %.
    ``before``: the running load flow, ``load_flow(net, tol_pu, max_iter)``, when the
    caller has it (one for all the motors of a tree instead of one per motor).
    """
    _check_iteration(tol_pu, max_iter)
    if not (0 <= node < net.n):
        raise InternalError(f"node index {node} is not in the network of {net.n} nodes",
                            field="node")
    if not (np.isfinite(start_va) and np.isfinite(running_va)):
        raise InternalError("starting and running demand must be finite", field="motor")
    s_pu = net.load_va / S_BASE_VA
    if before is None:
        before = _sweep(net, s_pu, tol_pu, max_iter)
    if not before.converged:
        raise InternalError("the load flow does not converge at running load, so no "
                            "motor-start dip can be computed", field="motor")
    s_start = s_pu.copy()
    s_start[node] -= complex(running_va) / S_BASE_VA
    y_pu = np.conj(complex(start_va)) / S_BASE_VA  # S = |V|²·conj(Y) at |V| = 1 pu
    during = _sweep(net, s_start, tol_pu, max_iter, shunt_node=node, shunt_y_pu=y_pu)
    if not during.converged:
        return 100.0
    return float(100.0 * (abs(before.v_bus_pu[node]) - abs(during.v_bus_pu[node])))
