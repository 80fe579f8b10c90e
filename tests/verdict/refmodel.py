"""refmodel.py: an independent model of a ringup circuit file for the verdict corpus
(tests/ref_verdict.py): the file's parts read with PyYAML, their laws written here
from the README's formulas ("The circuit file", "More laws and parts"), assembled
into node equations and integrated with scipy. Nothing of ringup's code or output is
used.

States: the free node voltages (every node but ground and the nodes a supply to
ground fixes), then each inductor's current (a -> b through the coil), each opamp's
integrator voltage vint, each thermal resistor's temperature rise. The equations are
M x' = r(t, x): M holds the capacitors and the stray capacitance from every free
node to ground (the file's `stray:`, default 1 pF) for the node rows and 1 for the
others; r is the sum of the currents into each node (KCL) and the other states'
own laws. A capacitor to a supply node adds -C dVs/dt to the free node's row.

Reference: Kirchhoff's current law and the part laws as the README states them
(Shockley's law with vt = kT/q, the long-tailed pair's tanh, the opamp macro model
with softplus rails and anti-windup, the lamp's first-order heat balance)."""
import math
import os

import numpy as np
import scipy.integrate
import scipy.optimize
import yaml

from refutil import si

MODELS = os.environ.get("RINGUP_MODELS",
                        os.path.join(os.path.dirname(__file__), "..", "..", "models"))
K_B = 1.380649e-23      # J/K, exact SI (2019)
Q_E = 1.602176634e-19   # C, exact SI (2019)
U_MAX = 40.0            # README: exponents above 40 continue linearly
OPAMP_BAND = 20.0       # README: K holds vint within the rails widened by 20 knees

LAW_DEFAULTS = {  # README tables ("amplifier", "New amplifier laws")
    "follower-tanh": {"gain": 0.98, "swing": 1.0, "center": 0.0, "rout": 50.0},
    "exp-stage": {"is": 10e-15, "n": 1.0, "beta": 100.0, "vsat": 0.2, "temp": 27.0},
    "diff-pair-tanh": {"itail": 1e-3, "n": 1.0, "temp": 27.0, "rout": 0.0, "sign": 1.0},
    "opamp": {"gain": 1e5, "gbw": 1e6, "vmax": 12.0, "vmin": -12.0, "knee": 0.1,
              "slew": 1e6, "rout": 50.0},
}


def vt(temp_c):
    return K_B * (temp_c + 273.15) / Q_E


def limexp(u):
    if u > U_MAX:
        return math.exp(U_MAX) * (1.0 + u - U_MAX)
    return math.exp(u)


def softplus(z):
    return z + math.log1p(math.exp(-z)) if z > 0 else math.log1p(math.exp(z))


def num(v):
    """A value with its SI prefix and unit (the units of the corpus and the presets)."""
    if isinstance(v, str):
        for unit in ("V/s", "K/W", "J/K", "C"):
            if v.endswith(unit):
                return si(v[:-len(unit)])
    return si(v)


def node_name(n):
    n = str(n)
    return "gnd" if n in ("0", "gnd") else n


class Wave:
    """A supply's or current source's waveform (README, the wave table)."""

    def __init__(self, p):
        self.kind = p.get("wave", "dc")
        g = lambda k, d=0.0: num(p[k]) if k in p else d  # noqa: E731
        if self.kind == "dc":
            self.value, self.rise = g("value"), g("rise")
        elif self.kind == "sine":
            self.offset, self.amp, self.freq = g("offset"), g("amplitude"), g("freq")
            self.phase, self.at = math.radians(g("phase")), g("at")
        else:
            raise ValueError("wave %s not modelled" % self.kind)

    def value_at(self, t):
        if self.kind == "dc":
            if self.rise > 0 and t < self.rise:
                return self.value * t / self.rise, self.value / self.rise
            return self.value, 0.0
        if t < self.at:
            return self.offset, 0.0
        w = 2 * math.pi * self.freq
        arg = w * (t - self.at) + self.phase
        return self.offset + self.amp * math.sin(arg), self.amp * w * math.cos(arg)

    def final(self):
        return self.value if self.kind == "dc" else self.offset

    def drive_hz(self):
        return self.freq if self.kind == "sine" else None


class Circuit:
    def __init__(self, path):
        with open(path) as f:
            doc = yaml.safe_load(f)
        self.doc = doc
        self.title = doc.get("title", "")
        self.stray = num(doc.get("stray", "1p"))
        parts = doc["parts"]
        self.parts = {name: dict(p) for name, p in parts.items()}
        self.fixed = {}       # node -> Wave (supplies to ground)
        nodes = []

        def add(n):
            n = node_name(n)
            if n != "gnd" and n not in nodes:
                nodes.append(n)
            return n

        for name, p in self.parts.items():
            for key in ("nodes",):
                if key in p:
                    p[key] = [add(n) for n in p[key]]
            for key in ("in", "out", "ref", "inv"):
                if key in p:
                    p[key] = add(p[key])
            if p["type"] == "supply":
                a, b = p["nodes"]
                if b != "gnd":
                    raise ValueError("only supplies to ground are modelled")
                self.fixed[a] = Wave(p)
        self.free = [n for n in nodes if n not in self.fixed]
        self.index = {n: i for i, n in enumerate(self.free)}
        nf = len(self.free)
        self.extra = []       # (kind, part name)
        for name, p in self.parts.items():
            if p["type"] == "inductor":
                self.extra.append(("iL", name))
            elif p["type"] == "amplifier" and self._law_name(p) == "opamp":
                self.extra.append(("vint", name))
            elif p["type"] == "thermal-resistor":
                self.extra.append(("rise", name))
        self.n = nf + len(self.extra)
        self.slot = {name: nf + k for k, (_, name) in enumerate(self.extra)}
        self._laws()
        self._mass()
        self.drives = [w.drive_hz() for w in self._waves() if w.drive_hz()]

    @staticmethod
    def _law_name(p):
        if "law" in p:
            return p["law"]
        with open(os.path.join(MODELS, p["model"] + ".yaml")) as f:
            return yaml.safe_load(f)["law"]

    def _waves(self):
        out = list(self.fixed.values())
        for p in self.parts.values():
            if p["type"] == "current":
                p["_wave"] = p.get("_wave") or Wave(p)
                out.append(p["_wave"])
        return out

    def _laws(self):
        for p in self.parts.values():
            if p["type"] in ("resistor", "inductor"):
                p["_value"] = num(p["value"])
                p["_series"] = num(p.get("series", 0))
            if p["type"] in ("amplifier", "thermal-resistor") and "model" in p:
                # a preset, then the part's keys
                with open(os.path.join(MODELS, p["model"] + ".yaml")) as f:
                    preset = yaml.safe_load(f)
                for k, v in preset.items():
                    if k != "description":
                        p.setdefault(k, v)
            if p["type"] == "amplifier":
                law = dict(LAW_DEFAULTS[p["law"]])
                for k in law:
                    if k in p:
                        law[k] = num(p[k])
                p["_law"] = law
                p.setdefault("ref", "gnd")
                p.setdefault("inv", p["ref"])
            elif p["type"] == "diode":
                p["_law"] = {"is": num(p.get("is", 10e-15)), "n": num(p.get("n", 1)),
                             "temp": num(p.get("temp", 27))}
                if num(p.get("rs", 0)) != 0:
                    raise ValueError("diode rs not modelled")
            elif p["type"] == "thermal-resistor":
                if p.get("kind", "lamp") != "lamp":
                    raise ValueError("only lamps are modelled")
                lamp = {"r0": 50.0, "alpha": 4.5e-3, "t0": 25.0, "tamb": 25.0,
                        "rth": 20e3, "cth": 5e-6}  # README, thermal-resistor table
                p["_law"] = {k: num(p.get(k, d)) for k, d in lamp.items()}
            elif p["type"] == "poly-conductance":
                p["_law"] = [num(c) for c in p["coeffs"]]

    def _mass(self):
        nf = len(self.free)
        m = np.zeros((self.n, self.n))
        self.cap_to_fixed = []    # (free index, C, fixed node)
        for i in range(nf):
            m[i, i] += self.stray
        for p in self.parts.values():
            if p["type"] != "capacitor":
                continue
            c = num(p["value"])
            a, b = p["nodes"]
            ia, ib = self.index.get(a), self.index.get(b)
            if ia is not None:
                m[ia, ia] += c
            if ib is not None:
                m[ib, ib] += c
            if ia is not None and ib is not None:
                m[ia, ib] -= c
                m[ib, ia] -= c
            if ia is not None and b in self.fixed:
                self.cap_to_fixed.append((ia, c, b))
            if ib is not None and a in self.fixed:
                self.cap_to_fixed.append((ib, c, a))
        for i in range(nf, self.n):
            m[i, i] = 1.0
        # the resistors as a conductance matrix: r_free += G x_free + Gs v_fixed
        self.fixed_names = list(self.fixed)
        self.G = np.zeros((nf, nf))
        self.Gs = np.zeros((nf, len(self.fixed_names)))
        for p in self.parts.values():
            if p["type"] != "resistor":
                continue
            g = 1.0 / p["_value"]
            a, b = p["nodes"]
            for u, w in ((a, b), (b, a)):
                if u not in self.index:
                    continue
                iu = self.index[u]
                self.G[iu, iu] -= g
                if w in self.index:
                    self.G[iu, self.index[w]] += g
                elif w in self.fixed:
                    self.Gs[iu, self.fixed_names.index(w)] += g
        self.mass = m
        self.minv = np.linalg.inv(m)

    # ---- the residual ---------------------------------------------------------
    def _v(self, x, node, t, final):
        if node == "gnd":
            return 0.0
        if node in self.fixed:
            w = self.fixed[node]
            return w.final() if final else w.value_at(t)[0]
        return x[self.index[node]]

    def residual(self, t, x, final=False):
        r = np.zeros(self.n)
        ix = self.index

        def inj(node, i):  # current i into node
            k = ix.get(node)
            if k is not None:
                r[k] += i

        V = lambda n: self._v(x, n, t, final)  # noqa: E731
        nf = len(self.free)
        vs = np.array([self._v(x, nm, t, final) for nm in self.fixed_names])
        r[:nf] += self.G @ x[:nf] + (self.Gs @ vs if len(vs) else 0.0)
        for name, p in self.parts.items():
            ty = p["type"]
            if ty == "resistor":
                continue
            elif ty == "inductor":
                a, b = p["nodes"]
                k = self.slot[name]
                i = x[k]
                inj(a, -i)
                inj(b, i)
                r[k] = (V(a) - V(b) - p["_series"] * i) / p["_value"]
            elif ty == "current":
                a, b = p["nodes"]
                w = p["_wave"]
                i = w.final() if final else w.value_at(t)[0]
                inj(a, -i)
                inj(b, i)
            elif ty == "poly-conductance":
                a, b = p["nodes"]
                v = V(a) - V(b)
                i = sum(c * v ** k for k, c in enumerate(p["_law"]))
                inj(a, -i)
                inj(b, i)
            elif ty == "diode":
                a, b = p["nodes"]
                d = p["_law"]
                i = d["is"] * (limexp((V(a) - V(b)) / (d["n"] * vt(d["temp"]))) - 1)
                inj(a, -i)
                inj(b, i)
            elif ty == "thermal-resistor":
                a, b = p["nodes"]
                L = p["_law"]
                k = self.slot[name]
                rise = x[k]
                R = L["r0"] * (1 + L["alpha"] * (L["tamb"] + rise - L["t0"]))
                v = V(a) - V(b)
                inj(a, -v / R)
                inj(b, v / R)
                r[k] = (v * v / R - rise / L["rth"]) / L["cth"]
            elif ty == "amplifier":
                self._amp(name, p, x, V, inj, r)
        if not final:
            for i, c, node in self.cap_to_fixed:
                r[i] -= c * self.fixed[node].value_at(t)[1]
        return r

    def _amp(self, name, p, x, V, inj, r):
        L, law = p["_law"], p["law"]
        vc = V(p["in"]) - V(p["inv"])
        vo = V(p["out"]) - V(p["ref"])
        i_out = i_in = 0.0   # into out (out of ref); into in (out of inv)
        if law == "follower-tanh":
            e = L["center"] + L["gain"] * L["swing"] * math.tanh((vc - L["center"]) / L["swing"])
            i_out = (e - vo) / L["rout"]
        elif law == "exp-stage":
            nvt = L["n"] * vt(L["temp"])
            ie = L["is"] * (limexp(vc / nvt) - 1)
            i_out = -ie * math.tanh(vo / L["vsat"])   # the collector sinks it
            i_in = -ie / L["beta"]                    # the base draws ie/beta
        elif law == "diff-pair-tanh":
            i_out = L["sign"] * L["itail"] * math.tanh(vc / (2 * L["n"] * vt(L["temp"])))
            if L["rout"] > 0:
                i_out -= vo / L["rout"]
        elif law == "opamp":
            k = self.slot[name]
            xs = x[k]
            wt = 2 * math.pi * L["gbw"]
            wp = wt / L["gain"]
            kn, band, sl = L["knee"], OPAMP_BAND * L["knee"], L["slew"]
            clamp = sl * (softplus((xs - L["vmax"] - band) / kn)
                          - softplus((L["vmin"] - band - xs) / kn))
            r[k] = sl * math.tanh(wt * vc / sl) - wp * xs - clamp
            rail = L["vmin"] + kn * (softplus((xs - L["vmin"]) / kn)
                                     - softplus((xs - L["vmax"]) / kn))
            i_out = (rail - vo) / L["rout"]
        inj(p["out"], i_out)
        inj(p["ref"], -i_out)
        inj(p["in"], i_in)
        inj(p["inv"], -i_in)

    def rhs(self, t, x):
        return self.minv @ self.residual(t, x)

    # ---- operating point and poles ------------------------------------------------
    def operating_point(self):
        """r(x) = 0 with the sources at their final values; source stepping from 0
        (the supplies scaled 0.1, 0.2, ..., 1) when a plain solve fails."""
        x = np.zeros(self.n)
        f = lambda y: self.residual(0.0, y, final=True) * self._rscale()  # noqa: E731
        sol, info, ok, _ = scipy.optimize.fsolve(f, x, full_output=True, xtol=1e-13)
        if ok == 1 and np.max(np.abs(f(sol))) < 1e-9:
            return sol
        saved = {n: w.value for n, w in self.fixed.items() if w.kind == "dc"}
        for s in np.linspace(0.05, 1.0, 20):
            for n, v in saved.items():
                self.fixed[n].value = s * v
            x, info, ok, _ = scipy.optimize.fsolve(f, x, full_output=True, xtol=1e-13)
        for n, v in saved.items():
            self.fixed[n].value = v
        if np.max(np.abs(f(x))) > 1e-8:
            raise RuntimeError("no operating point")
        return x

    def _rscale(self):
        s = np.ones(self.n)
        s[:len(self.free)] = 1e3    # node rows are currents: mA
        return s

    def jacobian(self, x, final=True):
        n, h = self.n, 1e-7
        jac = np.zeros((n, n))
        for k in range(n):
            d = np.zeros(n)
            d[k] = h * max(1.0, abs(x[k]))
            jac[:, k] = (self.residual(0, x + d, final) - self.residual(0, x - d, final)) / (2 * d[k])
        return self.minv @ jac

    def poles(self, x_op):
        return np.linalg.eigvals(self.jacobian(x_op))

    # ---- the run ----------------------------------------------------------------
    def initial_state(self, preset=None):
        x = np.zeros(self.n)
        for node, v in (preset or {}).items():
            x[self.index[node_name(node)]] = num(v)
        return x

    def probe_of(self, xs, ts, probe):
        """Probe voltage (`a` or `a-b`) over states xs[:, k] at times ts."""
        names = str(probe).split("-")
        out = np.zeros(len(ts))
        for sign, nm in zip((1.0, -1.0), names):
            nm = node_name(nm)
            if nm == "gnd":
                continue
            if nm in self.fixed:
                out += sign * np.array([self.fixed[nm].value_at(t)[0] for t in ts])
            else:
                out += sign * xs[self.index[nm]]
        return out

    def simulate(self, x0, t_end, method="LSODA", rtol=1e-9, atol=1e-12):
        """scipy's LSODA (or BDF) with tight tolerances and dense output; restarts at
        the end of each supply ramp (the slope jumps there)."""
        cuts = sorted({w.rise for w in self.fixed.values()
                       if w.kind == "dc" and 0 < w.rise < t_end})
        pieces, t0, x = [], 0.0, np.array(x0, float)
        for t1 in cuts + [t_end]:
            s = scipy.integrate.solve_ivp(self.rhs, (t0, t1), x, method=method,
                                          rtol=rtol, atol=atol, dense_output=True)
            if not s.success:
                raise RuntimeError(s.message)
            pieces.append((t0, t1, s.sol))
            t0, x = t1, s.y[:, -1]
        return Dense(pieces), x


class Dense:
    """Piecewise dense output of a simulation."""

    def __init__(self, pieces):
        self.pieces = pieces

    def __call__(self, ts):
        ts = np.asarray(ts, float)
        out = None
        for t0, t1, sol in self.pieces:
            sel = (ts >= t0) & (ts <= t1)
            if not sel.any():
                continue
            y = sol(ts[sel])
            if out is None:
                out = np.zeros((y.shape[0], len(ts)))
            out[:, sel] = y
        return out
