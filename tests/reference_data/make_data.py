#!/usr/bin/env python3
"""Independent reference data for four of ringtrue's reference circuits.

Run from this folder:

    python3 make_data.py

It reads the circuit files in ../../reference_circuits/, computes the watched
signals with general-purpose numerical libraries only (numpy, scipy, mpmath),
and writes one CSV per circuit next to this script:

    stiff-two-rc.csv   rc-ladder-20.csv   usb-rectifier.csv   diode-clamp.csv

Each CSV has the header ``time,<watched signals in file order>`` and one row
per sample time; every number is written with repr() (shortest string that
reads back to the same double, i.e. up to 17 significant digits).

Nothing here shares code with ringtrue itself: the circuit files are parsed by
the small reader below and the equations are written out by hand.

Linear circuits (stiff-two-rc, rc-ladder-20)
    The nodal equations are reduced to state equations
        C dv/dt = -G v + B u(t)
    for the capacitor node voltages (nodes without a capacitor are eliminated
    exactly by a Schur complement; a source node's voltage is the source
    value).  The input is piecewise linear in time, so on each piece
        x' = A x + b0 + b1 (t - t0)
    is solved exactly with one matrix exponential of the augmented matrix
    (Van Loan 1978)
            [ A  b1  b0 ]
        M = [ 0   0   1 ]      z = [x; t - t0; 1],   z' = M z,
            [ 0   0   0 ]
    so x(t0 + h) = E11 x(t0) + E13 with E = expm(M h).  The main result is
    computed in mpmath at 40 significant digits, stepping from sample to
    sample and landing exactly on every corner of the input.  Checks, each
    printed as the largest difference relative to each signal's peak:
      - the same mpmath computation at 60 digits (rounding of the result);
      - scipy.linalg.expm in double precision, stepping sample to sample;
      - scipy.linalg.expm in double precision, jumping from the last input
        corner straight to each sample (a different path through the
        arithmetic, with long steps).

Nonlinear circuits (usb-rectifier, diode-clamp)
    Each reduces to one ODE in a capacitor voltage.  For the rectifier the
    anode node has no capacitor, so its voltage is found at every right-hand
    side evaluation by solving the series equation of the winding resistance
    and the diode to full double precision (scipy.optimize.brentq on the
    diode voltage).  The ODE is integrated with scipy's Radau (implicit,
    order 5) at rtol = 1e-12, atol = 1e-14 V, with an analytic Jacobian and a
    max_step of 1/200 of the source period; the integration is restarted at
    every sample time so each stored value is the end of a real step (no
    interpolation).  A second, independent method (DOP853, explicit order 8,
    same tolerances) is run the same way and the largest difference, relative
    to each signal's peak, is printed.  For the clamp, a short stretch is also
    recomputed with mpmath.odefun (Taylor series, 25 digits).

Semantics followed (ringtrue's circuit-file definition)
    SI prefixes f p n u m k M (M mega, m milli); unit letters are decoration.
    step {from, to, at, rise}: from for t <= at, linear ramp over
    [at, at + rise], then to; a missing from/at is 0.
    sine {amplitude, frequency}: amplitude * sin(2 pi frequency t).
    diode: i = Is (exp(v / (n Vt)) - 1), Vt = k T / q, T = 300 K,
    k = 1.380649e-23 J/K, q = 1.602176634e-19 C (exact SI values).
    The run starts from the DC operating point at t = 0 (capacitors open,
    sources at their t = 0 values).

The script is deterministic: no random numbers, fixed tolerances.
"""

import math
import os
import re
import sys
import time

import mpmath
import numpy as np
import scipy
import scipy.integrate
import scipy.linalg
import scipy.optimize

HERE = os.path.dirname(os.path.abspath(__file__))
CIRCUITS = os.path.normpath(os.path.join(HERE, "..", "..", "reference_circuits"))

MP_DPS = 40

K_BOLTZMANN = 1.380649e-23
Q_ELECTRON = 1.602176634e-19
T_KELVIN = 300.0
VT = K_BOLTZMANN * T_KELVIN / Q_ELECTRON  # thermal voltage, about 25.852 mV

RTOL = 1e-12
ATOL = 1e-14  # volts


# ---------------------------------------------------------------------------
# Reading the circuit files
# ---------------------------------------------------------------------------

_PREFIX = {"f": -15, "p": -12, "n": -9, "u": -6, "m": -3, "k": 3, "M": 6, "": 0}
_NUMBER = re.compile(
    r"\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*([fpnumkM]?)([A-Za-z]*)\s*$"
)


def si_mp(text):
    """A value with an optional SI prefix and unit, as an exact mpmath number."""
    m = _NUMBER.match(str(text))
    if not m:
        raise ValueError("not a value: %r" % (text,))
    number, prefix, _unit = m.groups()
    return mpmath.mpf(number) * mpmath.mpf(10) ** _PREFIX[prefix]


def si(text):
    """The same value as the nearest double."""
    return float(si_mp(text))


_TOKEN = re.compile(r'\s*(?:([{}\[\],:])|"((?:[^"\\]|\\.)*)"|([^{}\[\],:"]+))')


def _tokens(text):
    pos, out = 0, []
    text = text.strip()
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if not m or m.end() == pos:
            raise ValueError("cannot read %r" % text)
        pos = m.end()
        if m.group(1):
            out.append(("p", m.group(1)))
        elif m.group(2) is not None:
            out.append(("s", m.group(2)))
        else:
            word = m.group(3).strip()
            if word:
                out.append(("s", word))
    return out


def _flow(tokens, i):
    kind, tok = tokens[i]
    if kind == "s":
        return tok, i + 1
    if tok == "[":
        items, i = [], i + 1
        while tokens[i] != ("p", "]"):
            item, i = _flow(tokens, i)
            items.append(item)
            if tokens[i] == ("p", ","):
                i += 1
        return items, i + 1
    if tok == "{":
        mapping, i = {}, i + 1
        while tokens[i] != ("p", "}"):
            key, i = _flow(tokens, i)
            assert tokens[i] == ("p", ":"), tokens[i]
            value, i = _flow(tokens, i + 1)
            mapping[key] = value
            if tokens[i] == ("p", ","):
                i += 1
        return mapping, i + 1
    raise ValueError("unexpected %r" % (tok,))


def parse_value(text):
    tokens = _tokens(text)
    value, i = _flow(tokens, 0)
    assert i == len(tokens), text
    return value


def load_circuit(name):
    """Read the subset of YAML the reference circuit files use: top-level keys,
    a block list of flow mappings under `elements:` and a block mapping under
    `run:`; flow lists and maps; `#` comment lines."""
    doc, current = {}, None
    with open(os.path.join(CIRCUITS, name + ".yaml")) as fh:
        for raw in fh:
            line = raw.rstrip("\n")
            text = line.strip()
            if not text or text.startswith("#"):
                continue
            indent = len(line) - len(line.lstrip(" "))
            if indent == 0:
                key, _, rest = text.partition(":")
                rest = rest.strip()
                if rest:
                    doc[key.strip()] = parse_value(rest)
                    current = None
                else:
                    current = key.strip()
                    doc[current] = None
            elif text.startswith("- "):
                doc[current] = (doc[current] or []) + [parse_value(text[2:])]
            else:
                key, _, rest = text.partition(":")
                doc[current] = doc[current] or {}
                doc[current][key.strip()] = parse_value(rest.strip())
    assert doc["name"] == name, (doc["name"], name)
    return doc


def element(doc, name):
    for e in doc["elements"]:
        if e["name"] == name:
            return e
    raise KeyError(name)


# ---------------------------------------------------------------------------
# Source waveforms
# ---------------------------------------------------------------------------

class Source:
    """An independent voltage source's value in time (mpmath or float)."""

    def __init__(self, el):
        self.name = el["name"]
        self.kind = "constant"
        if "waveform" in el:
            (self.kind, spec), = el["waveform"].items()
        else:
            spec = {"value": el["value"]}
        self.spec = spec
        if self.kind == "constant":
            self.c = si_mp(spec["value"] if "value" in spec else spec)
        elif self.kind == "step":
            self.v0 = si_mp(spec.get("from", 0))
            self.v1 = si_mp(spec["to"])
            self.at = si_mp(spec.get("at", 0))
            self.rise = si_mp(spec.get("rise", 0))
        elif self.kind == "sine":
            for key in ("offset", "phase", "phase_deg", "delay", "decay"):
                assert si(spec.get(key, 0)) == 0.0, (self.name, key)
            self.amp = si_mp(spec["amplitude"])
            self.freq = si_mp(spec["frequency"])
        else:
            raise NotImplementedError(self.kind)

    def corners(self):
        """Times where the (piecewise linear) waveform changes slope."""
        if self.kind == "step":
            return [self.at, self.at + self.rise]
        return []

    def mp(self, t):
        if self.kind == "constant":
            return self.c
        if self.kind == "step":
            if t <= self.at:
                return self.v0
            if t >= self.at + self.rise:
                return self.v1
            return self.v0 + (self.v1 - self.v0) * (t - self.at) / self.rise
        if self.kind == "sine":
            return self.amp * mpmath.sin(2 * mpmath.pi * self.freq * t)
        raise NotImplementedError(self.kind)

    def make_float(self):
        """A fast float version (used by the ODE right-hand sides)."""
        if self.kind == "sine":
            a, w = float(self.amp), 2.0 * math.pi * float(self.freq)
            return lambda t: a * math.sin(w * t)
        if self.kind == "constant":
            c = float(self.c)
            return lambda t: c
        return lambda t: float(self.mp(mpmath.mpf(t)))


# ---------------------------------------------------------------------------
# Linear RC circuits: exact piecewise solution by the augmented exponential
# ---------------------------------------------------------------------------

class LinearCircuit:
    def __init__(self, doc):
        self.doc = doc
        sources, rs, cs = [], [], []
        for e in doc["elements"]:
            k = e["kind"]
            if k == "voltage_source":
                assert e["nodes"][1] == "gnd", "only grounded sources are handled"
                sources.append(e)
            elif k == "resistor":
                rs.append(e)
            elif k == "capacitor":
                cs.append(e)
            else:
                raise NotImplementedError(k)
        self.sources = [Source(e) for e in sources]
        src_nodes = [e["nodes"][0] for e in sources]
        nodes = []
        for e in rs + cs:
            for n in e["nodes"]:
                if n != "gnd" and n not in nodes and n not in src_nodes:
                    nodes.append(n)
        cap_nodes = [n for n in nodes if any(n in e["nodes"] for e in cs)]
        other = [n for n in nodes if n not in cap_nodes]
        for e in cs:
            for n in e["nodes"]:
                assert n not in src_nodes, "capacitor on a source node"
        allnodes = cap_nodes + other + src_nodes
        idx = {n: i for i, n in enumerate(allnodes)}
        N = len(allnodes)
        G = mpmath.zeros(N, N)
        Cm = mpmath.zeros(N, N)

        def stamp(M, e, y):
            a, b = e["nodes"]
            ia, ib = idx.get(a), idx.get(b)
            if ia is not None:
                M[ia, ia] += y
            if ib is not None:
                M[ib, ib] += y
            if ia is not None and ib is not None:
                M[ia, ib] -= y
                M[ib, ia] -= y

        for e in rs:
            stamp(G, e, 1 / si_mp(e["value"]))
        for e in cs:
            stamp(Cm, e, si_mp(e["value"]))
        nc, nr, ns = len(cap_nodes), len(other), len(src_nodes)
        c = list(range(nc))
        r = list(range(nc, nc + nr))
        s = list(range(nc + nr, N))

        def sub(M, rows, cols):
            out = mpmath.zeros(len(rows), len(cols))
            for i, ri in enumerate(rows):
                for j, cj in enumerate(cols):
                    out[i, j] = M[ri, cj]
            return out

        Gcc, Gcr, Gcs = sub(G, c, c), sub(G, c, r), sub(G, c, s)
        Ccc = sub(Cm, c, c)
        if nr:
            Grr, Grc, Grs = sub(G, r, r), sub(G, r, c), sub(G, r, s)
            Grr_inv = mpmath.inverse(Grr)
            Geff = Gcc - Gcr * Grr_inv * Grc
            Beff = -(Gcs - Gcr * Grr_inv * Grs)
            # v_r = Rc v_c + Rs u
            self.Rc = -Grr_inv * Grc
            self.Rs = -Grr_inv * Grs
        else:
            Geff, Beff = Gcc, -Gcs
        Cinv = mpmath.inverse(Ccc)
        self.A = -(Cinv * Geff)  # x' = A x + B u
        self.B = Cinv * Beff
        self.Geff, self.Beff = Geff, Beff
        self.cap_nodes, self.other, self.src_nodes = cap_nodes, other, src_nodes
        self.n = nc

    # -- input -----------------------------------------------------------
    def u(self, t):
        return mpmath.matrix([s.mp(t) for s in self.sources])

    def corners(self, stop):
        cs = sorted({c for s in self.sources for c in s.corners() if 0 < c < stop})
        return cs

    def segment_input(self, t0, t1):
        """(u at t0 from the right, slope) of the linear piece on [t0, t1]."""
        mid = (t0 + t1) / 2
        um, u1 = self.u(mid), self.u(t1)
        slope = (u1 - um) / (t1 - mid)
        return um - slope * (mid - t0), slope

    def dc(self):
        """DC operating point at t = 0: capacitors open."""
        return mpmath.lu_solve(self.Geff, self.Beff * self.u(mpmath.mpf(0)))

    def augmented(self, u0, slope):
        n = self.n
        M = mpmath.zeros(n + 2, n + 2)
        b0, b1 = self.B * u0, self.B * slope
        for i in range(n):
            for j in range(n):
                M[i, j] = self.A[i, j]
            M[i, n] = b1[i]
            M[i, n + 1] = b0[i]
        M[n, n + 1] = 1
        return M

    # -- signals ---------------------------------------------------------
    def signal(self, name, x, t):
        if name in self.cap_nodes:
            return x[self.cap_nodes.index(name)]
        if name in self.src_nodes:
            return self.sources[self.src_nodes.index(name)].mp(t)
        if name in self.other:
            i = self.other.index(name)
            u = self.u(t)
            val = sum(self.Rc[i, j] * x[j] for j in range(self.n))
            val += sum(self.Rs[i, j] * u[j] for j in range(len(self.sources)))
            return val
        raise NotImplementedError(name)

    # -- exact solution in mpmath ----------------------------------------
    def solve_mp(self, times):
        """x at each sample time, stepping sample to sample and landing on
        every input corner.  times: list of floats (taken exactly)."""
        stop = max(times)
        corners = self.corners(stop)
        tms = [mpmath.mpf(t) for t in times]
        events = sorted(set(tms) | set(corners))
        x = self.dc()
        t = events[0]
        assert t == 0
        out = {}
        out[t] = x
        bounds = [mpmath.mpf(0)] + corners + [stop + 1]
        for t_next in events[1:]:
            # which linear piece holds [t, t_next]
            k = max(i for i, b in enumerate(bounds) if b <= t)
            assert t_next <= bounds[k + 1]
            u0, slope = self.segment_input(bounds[k], bounds[k + 1])
            u_t = u0 + slope * (t - bounds[k])
            E = mpmath.expm(self.augmented(u_t, slope) * (t_next - t))
            n = self.n
            x = mpmath.matrix([
                mpmath.fsum(E[i, j] * x[j] for j in range(n)) + E[i, n + 1]
                for i in range(n)
            ])
            t = t_next
            out[t] = x
        return [out[t] for t in tms]

    # -- double-precision checks with scipy -----------------------------
    def _double_pieces(self, stop):
        A = np.array(self.A.tolist(), dtype=float)
        B = np.array(self.B.tolist(), dtype=float)
        n = self.n
        corners = [float(c) for c in self.corners(mpmath.mpf(stop))]
        bounds = [0.0] + corners + [stop * 2 + 1]
        pieces = []
        for k in range(len(bounds) - 1):
            u0, slope = self.segment_input(mpmath.mpf(bounds[k]), mpmath.mpf(bounds[k + 1]))
            b0 = B @ np.array(u0.tolist(), dtype=float).ravel()
            b1 = B @ np.array(slope.tolist(), dtype=float).ravel()
            pieces.append((bounds[k], bounds[k + 1], A, b0, b1))
        return pieces

    @staticmethod
    def _double_aug(A, b0, b1, tau):
        """Augmented matrix for x' = A x + (b0 + b1 tau) + b1 (t - t_start)."""
        n = A.shape[0]
        M = np.zeros((n + 2, n + 2))
        M[:n, :n] = A
        M[:n, n] = b1
        M[:n, n + 1] = b0 + b1 * tau
        M[n, n + 1] = 1.0
        return M

    def solve_scipy_direct(self, times):
        """x at each sample time in double precision: corner to corner, then
        from the last corner straight to each sample (one long jump)."""
        n = self.n
        pieces = self._double_pieces(max(times))
        x0 = np.array(self.dc().tolist(), dtype=float).ravel()
        starts = []
        for k, (t0, t1, A, b0, b1) in enumerate(pieces):
            starts.append(x0)
            if k < len(pieces) - 1:
                E = scipy.linalg.expm(self._double_aug(A, b0, b1, 0.0) * (t1 - t0))
                x0 = E[:n, :n] @ x0 + E[:n, n + 1]
        res = []
        for t in times:
            k = max(i for i, p in enumerate(pieces) if p[0] <= t)
            t0, t1, A, b0, b1 = pieces[k]
            E = scipy.linalg.expm(self._double_aug(A, b0, b1, 0.0) * (t - t0))
            res.append(E[:n, :n] @ starts[k] + E[:n, n + 1])
        return res

    def solve_scipy_stepwise(self, times):
        """x at each sample time in double precision, stepping sample to sample
        (the same path as the mpmath solution, in double arithmetic)."""
        n = self.n
        pieces = self._double_pieces(max(times))
        events = sorted(set(times) | {p[0] for p in pieces if p[0] < max(times)})
        x = np.array(self.dc().tolist(), dtype=float).ravel()
        out = {events[0]: x}
        for t, t_next in zip(events[:-1], events[1:]):
            k = max(i for i, p in enumerate(pieces) if p[0] <= t)
            t0, t1, A, b0, b1 = pieces[k]
            E = scipy.linalg.expm(self._double_aug(A, b0, b1, t - t0) * (t_next - t))
            x = E[:n, :n] @ x + E[:n, n + 1]
            out[t_next] = x
        return [out[t] for t in times]


def run_linear(name, times):
    """Returns (doc, columns, checks, info).  checks maps a check's label to
    {signal: (max |difference|, peak)}."""
    doc = load_circuit(name)
    ckt = LinearCircuit(doc)
    watch = doc["watch"]
    t_start = time.time()
    xs_mp = ckt.solve_mp(list(times))
    t_mp = time.time() - t_start
    # the same computation at a higher working precision: measures the
    # rounding of the 40-digit result itself
    with mpmath.workdps(MP_DPS + 20):
        xs_hi = LinearCircuit(doc).solve_mp(list(times))
        ref = {sig: [ckt.signal(sig, x, mpmath.mpf(t)) for x, t in zip(xs_hi, times)]
               for sig in watch}
    exact = {sig: [ckt.signal(sig, x, mpmath.mpf(t)) for x, t in zip(xs_mp, times)]
             for sig in watch}
    cols = {sig: [float(v) for v in exact[sig]] for sig in watch}
    peaks = {sig: max(abs(v) for v in cols[sig]) for sig in watch}
    checks = {}
    with mpmath.workdps(MP_DPS + 20):
        checks["mpmath %d vs %d digits" % (MP_DPS, MP_DPS + 20)] = {
            sig: (float(max(abs(a - b) for a, b in zip(exact[sig], ref[sig]))), peaks[sig])
            for sig in watch}
    for label, solver in (("scipy expm, sample to sample", ckt.solve_scipy_stepwise),
                          ("scipy expm, corner to sample", ckt.solve_scipy_direct)):
        xs = solver(list(times))
        checks[label] = {}
        for sig in watch:
            dbl = [float(ckt.signal(sig, [float(v) for v in x], mpmath.mpf(t)))
                   for x, t in zip(xs, times)]
            diff = max(abs(exact[sig][i] - mpmath.mpf(dbl[i])) for i in range(len(times)))
            checks[label][sig] = (float(diff), peaks[sig])
    info = "mpmath.expm at %d digits, %d samples (%.1f s)" % (MP_DPS, len(times), t_mp)
    return doc, cols, checks, info


# ---------------------------------------------------------------------------
# Nonlinear circuits: ODE integration
# ---------------------------------------------------------------------------

def diode_params(el):
    Is = si(el["saturation_current"])
    n = si(el.get("emission_coefficient", 1))
    T = si(el.get("temperature", 300))
    assert T == T_KELVIN
    for key in ("series_resistance", "junction_capacitance", "transit_time"):
        assert si(el.get(key, 0)) == 0.0, key
    return Is, n


def integrate_piecewise(fun, jac, times, y0, method, max_step):
    """Integrate y' = fun(t, y) restarting at every sample time, so each stored
    value is the end of an actual step.  Returns (values, number of steps)."""
    ys = [y0]
    y = np.array([y0], dtype=float)
    nfev = 0
    for t0, t1 in zip(times[:-1], times[1:]):
        kw = dict(rtol=RTOL, atol=ATOL, max_step=max_step)
        if jac is not None and method in ("Radau", "BDF", "LSODA"):
            kw["jac"] = jac
        sol = scipy.integrate.solve_ivp(fun, (t0, t1), y, method=method, **kw)
        if not sol.success:
            raise RuntimeError("%s failed on [%g, %g]: %s" % (method, t0, t1, sol.message))
        y = sol.y[:, -1].copy()
        nfev += sol.nfev
        ys.append(float(y[0]))
    return np.array(ys), nfev


class Rectifier:
    """Half-wave rectifier: vsec -- rwind -- an -|>|- out, cres and rload to ground.

    State: v_out.  Algebraic: the diode voltage vd = v_an - v_out solves
        (v_sec - v_out - vd) / R_w = Is * (exp(vd / (n Vt)) - 1).
    """

    def __init__(self, doc):
        src = element(doc, "vsec")
        rw = element(doc, "rwind")
        d = element(doc, "d1")
        c = element(doc, "cres")
        rl = element(doc, "rload")
        assert src["nodes"] == ["sec", "gnd"] and rw["nodes"] == ["sec", "an"]
        assert d["nodes"] == ["an", "out"] and c["nodes"] == ["out", "gnd"]
        assert rl["nodes"] == ["out", "gnd"] and len(doc["elements"]) == 5
        self.source = Source(src)
        self.vsec = self.source.make_float()
        self.period = 1.0 / float(self.source.freq)
        self.Rw = si(rw["value"])
        self.C = si(c["value"])
        self.RL = si(rl["value"])
        self.Is, self.n = diode_params(d)
        self.nVt = self.n * VT

    def vd(self, t, vout):
        D = self.vsec(t) - vout
        if D == 0.0:
            return 0.0
        Rw, Is, nVt = self.Rw, self.Is, self.nVt
        g = lambda v: (D - v) / Rw - Is * math.expm1(v / nVt)
        lo, hi = (0.0, D) if D > 0 else (D, 0.0)
        return scipy.optimize.brentq(g, lo, hi, xtol=1e-300, rtol=4 * np.finfo(float).eps,
                                     maxiter=500)

    def id(self, t, vout):
        return self.Is * math.expm1(self.vd(t, vout) / self.nVt)

    def fun(self, t, y):
        return [(self.id(t, y[0]) - y[0] / self.RL) / self.C]

    def jac(self, t, y):
        vd = self.vd(t, y[0])
        gd = self.Is * math.exp(vd / self.nVt) / self.nVt
        did = -gd / (1.0 + self.Rw * gd)
        return [[(did - 1.0 / self.RL) / self.C]]

    def dc(self):
        h = lambda v: self.id(0.0, v) - v / self.RL
        a = abs(self.vsec(0.0)) + 1.0
        if h(0.0) == 0.0:
            return 0.0
        return scipy.optimize.brentq(h, -a, a, xtol=1e-300, rtol=4 * np.finfo(float).eps)

    def signals(self, times, vout):
        return {
            "out": list(vout),
            "d1.current": [self.id(t, v) for t, v in zip(times, vout)],
        }


class Clamp:
    """Input clamp: vdist -- rin -- pin -|>|- rail (3.3 V), cpin to ground.

    State: v_pin with C dv/dt = (v_dist - v_pin) / R - Is (exp((v_pin - V_rail)/(n Vt)) - 1).
    """

    def __init__(self, doc):
        src = element(doc, "vdist")
        r = element(doc, "rin")
        c = element(doc, "cpin")
        d = element(doc, "dclamp")
        rail = element(doc, "vrail")
        assert src["nodes"] == ["dist", "gnd"] and r["nodes"] == ["dist", "pin"]
        assert c["nodes"] == ["pin", "gnd"] and d["nodes"] == ["pin", "rail"]
        assert rail["nodes"] == ["rail", "gnd"] and len(doc["elements"]) == 5
        self.source = Source(src)
        self.vdist = self.source.make_float()
        self.period = 1.0 / float(self.source.freq)
        self.R = si(r["value"])
        self.C = si(c["value"])
        self.Vrail = float(Source(rail).c)
        self.Is, self.n = diode_params(d)
        self.nVt = self.n * VT

    def id(self, v):
        return self.Is * math.expm1((v - self.Vrail) / self.nVt)

    def fun(self, t, y):
        v = y[0]
        return [((self.vdist(t) - v) / self.R - self.id(v)) / self.C]

    def jac(self, t, y):
        gd = self.Is * math.exp((y[0] - self.Vrail) / self.nVt) / self.nVt
        return [[(-1.0 / self.R - gd) / self.C]]

    def dc(self):
        h = lambda v: (self.vdist(0.0) - v) / self.R - self.id(v)
        return scipy.optimize.brentq(h, -10.0, 10.0, xtol=1e-300, rtol=4 * np.finfo(float).eps)

    def signals(self, times, vpin):
        return {"pin": list(vpin)}

    def mp_check(self, t_end, dps=25):
        """The same ODE with mpmath.odefun (Taylor series) on [0, t_end], in
        scaled units (time in microseconds), from the mpmath DC point."""
        with mpmath.workdps(dps):
            Is = mpmath.mpf(self.Is)
            nVt = (mpmath.mpf(self.n) * mpmath.mpf("1.380649e-23") * T_KELVIN
                   / mpmath.mpf("1.602176634e-19"))
            R, C, Vr = mpmath.mpf(self.R), mpmath.mpf(self.C), mpmath.mpf(self.Vrail)
            amp, freq = self.source.amp, self.source.freq
            us = mpmath.mpf("1e-6")

            def idm(v):
                return Is * mpmath.expm1((v - Vr) / nVt)

            v0 = mpmath.findroot(lambda v: -v / R - idm(v), mpmath.mpf(0))

            def F(s, v):  # s in microseconds
                vd = amp * mpmath.sin(2 * mpmath.pi * freq * s * us)
                return ((vd - v) / R - idm(v)) / C * us

            f = mpmath.odefun(F, 0, v0)
            return f, us


def run_nonlinear(name, cls, times, mp_stretch=None):
    """Returns (doc, columns, checks, info) like run_linear."""
    doc = load_circuit(name)
    ckt = cls(doc)
    max_step = ckt.period / 200.0
    y0 = ckt.dc()
    t0 = time.time()
    y_r, nf_r = integrate_piecewise(ckt.fun, ckt.jac, times, y0, "Radau", max_step)
    t_r = time.time() - t0
    t0 = time.time()
    y_d, nf_d = integrate_piecewise(ckt.fun, None, times, y0, "DOP853", max_step)
    t_d = time.time() - t0
    cols = ckt.signals(times, y_r)
    other = ckt.signals(times, y_d)
    peaks = {sig: float(np.max(np.abs(cols[sig]))) for sig in doc["watch"]}
    label = "DOP853 (%d f-evals, %.1f s) vs Radau" % (nf_d, t_d)
    checks = {label: {}}
    for sig in doc["watch"]:
        diff = float(np.max(np.abs(np.array(cols[sig]) - np.array(other[sig]))))
        checks[label][sig] = (diff, peaks[sig])
    if mp_stretch is not None:
        f, us = ckt.mp_check(mp_stretch)
        t0 = time.time()
        sig = doc["watch"][0]
        worst, npts = 0.0, 0
        for t, v in zip(times, cols[sig]):
            if t > mp_stretch:
                break
            with mpmath.workdps(25):
                worst = max(worst, abs(float(f(mpmath.mpf(t) / us)) - v))
            npts += 1
        label = ("mpmath.odefun, 25 digits, on [0, %g s] (%d samples, %.1f s) vs Radau"
                 % (mp_stretch, npts, time.time() - t0))
        checks[label] = {sig: (worst, peaks[sig])}
    info = ("Radau rtol=%g atol=%g V max_step=%g s, %d samples (%d f-evals, %.1f s); "
            "DC start %r V" % (RTOL, ATOL, max_step, len(times), nf_r, t_r, y0))
    return doc, cols, checks, info


# ---------------------------------------------------------------------------
# Output
# ---------------------------------------------------------------------------

def write_csv(name, watch, times, cols):
    path = os.path.join(HERE, name + ".csv")
    with open(path, "w") as fh:
        fh.write(",".join(["time"] + list(watch)) + "\n")
        for i, t in enumerate(times):
            row = [repr(float(t))] + [repr(float(cols[s][i])) for s in watch]
            fh.write(",".join(row) + "\n")
    return path


def report(name, checks, info):
    print("%s: %s" % (name, info))
    for label, per_signal in checks.items():
        print("  check: %s" % label)
        for sig, (diff, peak) in per_signal.items():
            print("    %-12s peak %-10.6g max|diff| %.3e   max|diff|/peak %.3e"
                  % (sig, peak, diff, diff / peak))


def main():
    mpmath.mp.dps = MP_DPS
    print("Python %s" % sys.version.split()[0])
    print("numpy %s, scipy %s, mpmath %s" % (np.__version__, scipy.__version__, mpmath.__version__))
    print("Vt = %r V" % VT)

    def stop(name):
        return si(load_circuit(name)["run"]["stop"])

    jobs = [
        # stiff-two-rc: uniform grid plus log-spaced early times
        ("stiff-two-rc", np.unique(np.concatenate([np.linspace(0.0, stop("stiff-two-rc"), 201),
                                                   np.logspace(-11, -6, 40)])),
         lambda n, t: run_linear(n, t)),
        ("rc-ladder-20", np.linspace(0.0, stop("rc-ladder-20"), 201),
         lambda n, t: run_linear(n, t)),
        ("usb-rectifier", np.linspace(0.0, stop("usb-rectifier"), 601),
         lambda n, t: run_nonlinear(n, Rectifier, t)),
        ("diode-clamp", np.linspace(0.0, stop("diode-clamp"), 601),
         lambda n, t: run_nonlinear(n, Clamp, t, mp_stretch=0.5e-6)),
    ]
    for name, times, run in jobs:
        times = [float(t) for t in times]
        doc, cols, checks, info = run(name, times)
        path = write_csv(name, doc["watch"], times, cols)
        report(name, checks, info)
        print("  wrote %s" % os.path.relpath(path, HERE))


if __name__ == "__main__":
    main()
