"""Pulse captures of a saturating coil made by ngspice (external reference: the circuit simulator).

The coil is flux-controlled: its current is an explicit function of its flux linkage,
i = g(λ), so every quantity of its λ–i curve has an exact value (the "truth"):

- :class:`PowerSaturation`: g(λ) = λ/L0 · (1 + (|λ|/λs)^m). m ≈ 2–4 saturates softly,
  m ≈ 8–12 hard; no λs (``math.inf``) is a linear (air-core) coil. Then
  L_inc = 1/g'(λ) = L0 / (1 + (m + 1)(|λ|/λs)^m), the current where L_inc = (1 − X)·L0 is
  g(λs·(X / ((1 − X)(m + 1)))^(1/m)), and E = ∫ i dλ = λ²/(2 L0) + λ^(m+2)/((m + 2) L0 λs^m).
- :class:`PiecewiseLinear`: λ(i) = L1·i up to the break current, slope L2 beyond it: the
  closed form of a step in L_inc.

In ngspice the coil is an integrator: a B current source drives the voltage across the coil's
magnetic part (its terminals without the DCR) into a 1 F capacitor, whose node voltage is then
λ in webers (a 1e12 Ω leak gives the node a DC path), and a second B source carries g(V(λ))
through the coil's terminals. λ starts from the operating point, L0 times the open switch's
leak (about 1e-12 Wb), not from ``.ic v(lam)=0``: that holds the coil's current at zero while
the operating point is solved, so the leak lifts the coil's terminal to the bank voltage and the
record starts with a false flux step and a ring.

The bench (:class:`PulseBench`): a capacitor bank, charged from a supply through a resistor,
is switched (an ``S`` element, .model SW) through the wiring's inductance across the coil, its
DCR and a low-side shunt; a freewheeling diode (with a series resistor that speeds the decay)
takes the current at turn-off. The shunt lies inside the freewheel loop, so the record shows
the falling current too. A snubbed capacitance across the coil (winding and probe) rings with
the wiring at the switching edges, as a real switch does; a damped capacitance across the
switch (its output capacitance) takes the wiring's current at turn-off (without it ngspice stops
there: "timestep too small"). The capture has the columns
``time``, ``i_shunt`` (the shunt's voltage, V) and ``v_coil`` (the coil's terminal voltage,
its DCR drop included, as a differential probe sees it).

References
----------
Faraday's law of induction, v = dλ/dt, and the series RL charging law: common practice.
IEC 62024-2:2020, High frequency inductive components – Part 2: Rated current of inductors for
DC-to-DC converters (the saturation current as a stated fall of inductance).
ngspice User's Manual (version 39): non-linear dependent sources (B), voltage-controlled
switches (S, .model SW), the ``linearize`` command.
"""
from __future__ import annotations

import math
from abc import ABC, abstractmethod
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np
import pandas as pd
from scipy import integrate, optimize

from spice import simulate
from wavefit.synth.scope import ScopeModel

#: Forward drop assumed for the freewheel diode when the decay time is estimated (V); the
#: record's tail is made longer than this estimate, so it need not be exact.
DIODE_DROP_ESTIMATE = 0.8
#: Samples on the ramp (the switch's on-time) by default: a derivative along the ramp has at
#: least 2000 points to work with.
RAMP_SAMPLES = 2500
#: ngspice tolerances: tighter ones (reltol 1e-7, abstol 1e-15) stop the run at the switch's turn-off
#: ("timestep too small"); reltol 1e-6 with gear integration runs and meets the checks of
#: tests/test_saturation_fixture.py.
SPICE_OPTIONS = ".options reltol=1e-6 method=gear maxord=2"
#: A pulse follows the last after the bank has recharged for this many time constants (e^-7: a
#: droop of 1 V is made up to 1 mV).
RECHARGE_TIME_CONSTANTS = 7.0
#: Rise and fall of the switch's control voltage (s); the switch turns at half of it (vt = 0.5 of 1 V).
CONTROL_EDGE = 1e-9
#: Parts of the pulse length recorded before the first pulse (the record's zero level).
PRE_TRIGGER_FRACTION = 0.1
#: The record runs this much longer than the estimated freewheel decay.
TAIL_MARGIN = 1.3
#: The saturation fractions reported in the truth (IEC 62024-2 rates I_sat at a stated fall of L).
SATURATION_FRACTIONS = (0.1, 0.2, 0.3)
#: Peak current of a pulse through a coil that does not saturate, when none is given (A).
LINEAR_PEAK_CURRENT = 10.0


class FluxLaw(ABC):
    """A coil's current as a function of its flux linkage, i = g(λ), odd and increasing."""

    @abstractmethod
    def current(self, flux: np.ndarray | float) -> np.ndarray:
        """g(λ) in A for λ in Wb."""

    @abstractmethod
    def current_slope(self, flux: np.ndarray | float) -> np.ndarray:
        """g'(λ) in A/Wb (the reciprocal incremental inductance)."""

    @abstractmethod
    def energy_at_flux(self, flux: np.ndarray | float) -> np.ndarray:
        """E = ∫₀^λ g(λ') dλ' in J."""

    @abstractmethod
    def spice_current(self, node: str) -> str:
        """g of the node voltage ``V(node)`` as an ngspice B-source expression."""

    @abstractmethod
    def saturation_current(self, fraction: float) -> float | None:
        """The current where L_inc has fallen to (1 − fraction)·L0; None if it never does."""

    @property
    def L0(self) -> float:
        """Small-current inductance L_inc(0) in H."""
        return float(1.0 / self.current_slope(0.0))

    # ---- the truth as functions of the current -------------------------------------------
    def flux_linkage(self, current: np.ndarray | float) -> np.ndarray:
        """λ(i), the inverse of g, by root finding (g is increasing; λ lies in [0, 2·L0·|i|) since
        g(λ) >= λ/L0 for both laws here)."""
        i = np.atleast_1d(np.asarray(current, dtype=float))
        out = np.zeros_like(i)
        for k, value in enumerate(np.abs(i)):
            if value > 0:
                upper = 2.0 * self.L0 * value
                out[k] = optimize.brentq(lambda lam: float(self.current(lam)) - value, 0.0, upper,
                                         xtol=1e-18, rtol=1e-14)
        out = np.sign(i) * out
        return out if np.ndim(current) else out[0]

    def incremental_inductance(self, current: np.ndarray | float) -> np.ndarray:
        """L_inc(i) = dλ/di = 1 / g'(λ(i)) in H."""
        return 1.0 / self.current_slope(self.flux_linkage(current))

    def apparent_inductance(self, current: np.ndarray | float) -> np.ndarray:
        """L_app(i) = λ(i)/i in H (L0 at i = 0, its limit)."""
        i = np.asarray(current, dtype=float)
        lam = self.flux_linkage(i)
        safe = np.where(i == 0, 1.0, i)
        return np.where(i == 0, self.L0, lam / safe)

    def energy(self, current: np.ndarray | float) -> np.ndarray:
        """E(i) = ∫ i dλ stored up to the current i, in J."""
        return self.energy_at_flux(self.flux_linkage(current))


@dataclass(frozen=True)
class PowerSaturation(FluxLaw):
    """g(λ) = λ/L0 · (1 + (|λ|/λs)^m): linear at small flux, saturating with sharpness m.

    ``saturation_flux`` = math.inf makes a linear coil (no saturation current).
    """

    small_current_inductance: float
    saturation_flux: float
    exponent: float

    @classmethod
    def with_saturation_current(cls, L0: float, i_sat_20: float, exponent: float) -> "PowerSaturation":
        """The law whose L_inc falls by 20 % at ``i_sat_20``: λ_20 = λs·(1/(4(m + 1)))^(1/m) and
        i_sat_20 = λ_20/L0·(1 + 1/(4(m + 1)))."""
        ratio = 1.0 / (4.0 * (exponent + 1.0))
        flux_20 = L0 * i_sat_20 / (1.0 + ratio)
        return cls(L0, flux_20 / ratio ** (1.0 / exponent), exponent)

    @classmethod
    def linear(cls, L0: float) -> "PowerSaturation":
        """An air-core coil: λ = L0·i at any current."""
        return cls(L0, math.inf, 2.0)

    def _reduced(self, flux):
        return (np.abs(np.asarray(flux, dtype=float)) / self.saturation_flux) ** self.exponent

    def current(self, flux):
        return np.asarray(flux, dtype=float) / self.small_current_inductance * (1.0 + self._reduced(flux))

    def current_slope(self, flux):
        return (1.0 + (self.exponent + 1.0) * self._reduced(flux)) / self.small_current_inductance

    def energy_at_flux(self, flux):
        lam = np.abs(np.asarray(flux, dtype=float))
        return lam ** 2 / self.small_current_inductance * (0.5 + self._reduced(lam) / (self.exponent + 2.0))

    def spice_current(self, node: str) -> str:
        linear = f"V({node})/{self.small_current_inductance:.12e}"
        if math.isinf(self.saturation_flux):
            return linear
        return f"{linear}*(1+pow(abs(V({node}))/{self.saturation_flux:.12e},{self.exponent:.12g}))"

    def saturation_current(self, fraction: float) -> float | None:
        if math.isinf(self.saturation_flux):
            return None
        reduced = fraction / ((1.0 - fraction) * (self.exponent + 1.0))
        return float(self.current(self.saturation_flux * reduced ** (1.0 / self.exponent)))


@dataclass(frozen=True)
class PiecewiseLinear(FluxLaw):
    """λ = L1·i for |i| <= i_b, λ = L1·i_b + L2·(i − i_b) beyond: L_inc steps from L1 to L2."""

    low_inductance: float
    high_inductance: float
    break_current: float

    @property
    def break_flux(self) -> float:
        return self.low_inductance * self.break_current

    def current(self, flux):
        lam = np.asarray(flux, dtype=float)
        below = lam / self.low_inductance
        beyond = np.sign(lam) * (self.break_current + (np.abs(lam) - self.break_flux) / self.high_inductance)
        return np.where(np.abs(lam) <= self.break_flux, below, beyond)

    def current_slope(self, flux):
        lam = np.asarray(flux, dtype=float)
        return np.where(np.abs(lam) <= self.break_flux, 1.0 / self.low_inductance, 1.0 / self.high_inductance)

    def energy_at_flux(self, flux):
        lam = np.abs(np.asarray(flux, dtype=float))
        below = lam ** 2 / (2.0 * self.low_inductance)
        extra = lam - self.break_flux
        beyond = (self.break_flux ** 2 / (2.0 * self.low_inductance) + self.break_current * extra
                  + extra ** 2 / (2.0 * self.high_inductance))
        return np.where(lam <= self.break_flux, below, beyond)

    def spice_current(self, node: str) -> str:
        lam, lb = f"V({node})", f"{self.break_flux:.12e}"
        beyond = (f"sgn({lam})*({self.break_current:.12e}+(abs({lam})-{lb})/{self.high_inductance:.12e})")
        return f"(abs({lam}) <= {lb}) ? ({lam}/{self.low_inductance:.12e}) : ({beyond})"

    def saturation_current(self, fraction: float) -> float | None:
        return self.break_current if self.high_inductance <= (1.0 - fraction) * self.low_inductance else None


@dataclass(frozen=True)
class PulseBench:
    """The pulse circuit's parts (SI units). ``edge_capacitance`` = 0 leaves out the ringing."""

    bank_voltage: float = 24.0
    bank_capacitance: float = 100e-6
    charge_resistance: float = 0.5
    switch_on_resistance: float = 5e-3
    wiring_inductance: float = 100e-9
    dcr: float = 20e-3
    shunt_resistance: float = 10e-3
    freewheel_resistance: float = 2.0
    switch_capacitance: float = 2e-9
    switch_damping: float = 1.0
    edge_capacitance: float = 1e-9
    edge_damping: float = 2.0

    @property
    def recharge_time_constant(self) -> float:
        """The bank's recharge through its resistor, R·C in s."""
        return self.charge_resistance * self.bank_capacitance

    @property
    def loop_resistance(self) -> float:
        """Resistance in series with the coil while the switch is on."""
        return self.switch_on_resistance + self.dcr + self.shunt_resistance

    def netlist(self, law: FluxLaw, pulse_start: float, pulse_length: float, period: float) -> str:
        """Netlist lines (no .tran/.end): bank, switch, coil with DCR, shunt, freewheel path; the
        switch closes at ``pulse_start`` for ``pulse_length``, every ``period``."""
        edge = "" if self.edge_capacitance <= 0 else (
            f"Cedge a snub {self.edge_capacitance:.6e}\nRsnub snub b {self.edge_damping:.6e}\n")
        return f"""
Vsupply supply 0 {self.bank_voltage:.9e}
Rcharge supply bank {self.charge_resistance:.6e}
Cbank bank 0 {self.bank_capacitance:.6e}
Lwire bank sw {self.wiring_inductance:.6e}
S1 sw a ctl 0 pulse_switch
Cswitch sw swd {self.switch_capacitance:.6e}
Rswitch swd a {self.switch_damping:.6e}
.model pulse_switch sw(vt=0.5 vh=0 ron={self.switch_on_resistance:.6e} roff=1e9)
Vctl ctl 0 PULSE(0 1 {pulse_start - CONTROL_EDGE / 2:.9e} {CONTROL_EDGE:.1e} {CONTROL_EDGE:.1e} \
{pulse_length - CONTROL_EDGE:.9e} {period:.9e})
Bcoil a m I={law.spice_current('lam')}
Bflux 0 lam I=V(a,m)
Cflux lam 0 1
Rflux lam 0 1e12
Rdcr m b {self.dcr:.6e}
{edge}Rshunt b 0 {self.shunt_resistance:.6e}
Rfree 0 fw {self.freewheel_resistance:.6e}
Dfree fw a freewheel_diode
.model freewheel_diode d(is=1e-9 n=1.6 rs=5e-3 cjo=300e-12)
"""

    def pulse_length_for(self, law: FluxLaw, peak_current: float) -> float:
        """On-time that brings the coil to ``peak_current``: dλ/dt = V_bank − i·R_loop with the bank
        discharged by i and recharged through its resistor (the wiring inductance left out)."""
        def rates(t, y):
            lam, v_bank = y
            i = float(law.current(lam))
            return [v_bank - i * self.loop_resistance,
                    (-i + (self.bank_voltage - v_bank) / self.charge_resistance) / self.bank_capacitance]

        def reached(t, y):
            return float(law.current(y[0])) - peak_current
        reached.terminal = True
        horizon = 20.0 * law.L0 * peak_current / self.bank_voltage
        sol = integrate.solve_ivp(rates, (0.0, horizon), [0.0, self.bank_voltage], events=reached,
                                  rtol=1e-9, atol=[1e-12, 1e-9], max_step=horizon / 2000)
        if not sol.t_events[0].size:
            raise ValueError(f"the bench cannot drive {peak_current} A through this coil")
        return float(sol.t_events[0][0])

    def decay_time(self, law: FluxLaw, peak_current: float) -> float:
        """Freewheel time from ``peak_current`` to zero: dλ/dt = −(V_diode + i·(R_free + DCR + R_shunt))."""
        resistance = self.freewheel_resistance + self.dcr + self.shunt_resistance

        def rates(t, y):
            return [-(DIODE_DROP_ESTIMATE + float(law.current(y[0])) * resistance)]

        def empty(t, y):
            return y[0]
        empty.terminal = True
        start = float(law.flux_linkage(peak_current))
        horizon = 50.0 * start / DIODE_DROP_ESTIMATE
        sol = integrate.solve_ivp(rates, (0.0, horizon), [start], events=empty, rtol=1e-8,
                                  max_step=horizon / 2000)
        return float(sol.t_events[0][0])


@dataclass(frozen=True)
class PulseTruth:
    """What the capture's coil is: its law, the bench, and what the simulation reached."""

    law: FluxLaw
    bench: PulseBench
    #: The instant the switch closes for the first pulse (s on the capture's time axis).
    pulse_start: float
    pulse_length: float
    period: float
    pulses: int
    sample_interval: float
    #: The coil's peak current in the simulation (g of the simulated λ), A.
    peak_current: float
    #: Simulated λ (Wb) and coil current g(λ) (A) on the capture's time axis.
    flux: np.ndarray = field(repr=False)
    coil_current: np.ndarray = field(repr=False)

    def saturation_currents(self) -> dict[str, float | None]:
        """I_sat_10, I_sat_20, I_sat_30 of the law (None for a coil that does not saturate)."""
        return {f"I_sat_{round(100 * x)}": self.law.saturation_current(x) for x in SATURATION_FRACTIONS}

    def table(self, points: int = 200) -> dict[str, list[float]]:
        """(i, L_inc, L_app) at ``points`` currents evenly over 0 … the peak current."""
        i = np.linspace(0.0, self.peak_current, points)
        return {"i": i.tolist(), "L_inc": self.law.incremental_inductance(i).tolist(),
                "L_app": self.law.apparent_inductance(i).tolist()}

    def as_dict(self) -> dict:
        """JSON-ready truth: L0, DCR, the table, saturation currents, E at the peak, the peak."""
        return {"L0": self.law.L0, "DCR": self.bench.dcr, "shunt_resistance": self.bench.shunt_resistance,
                **self.saturation_currents(), "E_at_peak": float(self.law.energy(self.peak_current)),
                "peak_current": self.peak_current, "pulse_start": self.pulse_start,
                "pulse_length": self.pulse_length, "pulses": self.pulses, "period": self.period,
                "sample_interval": self.sample_interval, "law": repr(self.law), "table": self.table()}


def default_peak_current(law: FluxLaw) -> float:
    """Twice I_sat_20 (well into saturation: L_inc near L0/2 for m = 2, L0/6 for m = 10), or
    LINEAR_PEAK_CURRENT."""
    i_sat_20 = law.saturation_current(0.2)
    return LINEAR_PEAK_CURRENT if i_sat_20 is None else 2.0 * i_sat_20


@lru_cache(maxsize=8)
def simulate_pulses(law: FluxLaw, bench: PulseBench, pulse_length: float, pulses: int, period: float,
                    sample_interval: float, pre_trigger: float, record_length: float
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(t, v(a), v(b), λ) of the bench on a uniform grid of ``sample_interval`` (ngspice's linearize)."""
    t, v = simulate(bench.netlist(law, pre_trigger, pulse_length, period), sample_interval, record_length,
                    ["v(a)", "v(b)", "v(lam)"], options=SPICE_OPTIONS)
    out = (t - t[0], v["v(a)"], v["v(b)"], v["v(lam)"])
    for array in out:
        array.flags.writeable = False  # cached: shared by every caller
    return out


def pulse_capture(law: FluxLaw, bench: PulseBench = PulseBench(), *, peak_current: float | None = None,
                  pulse_length: float | None = None, pulses: int = 1, period: float | None = None,
                  sample_interval: float | None = None, scopes: dict[str, ScopeModel] | None = None,
                  seed: int = 0) -> tuple[pd.DataFrame, PulseTruth]:
    """A synthetic capture of ``pulses`` pulses and the truth of its coil.

    The on-time is ``pulse_length``, or the time to reach ``peak_current`` (default: twice the
    law's I_sat_20, or LINEAR_PEAK_CURRENT for a coil that does not saturate); with
    ``pulse_length`` given, ``peak_current`` only sets the record's tail.
    The sample interval defaults to the on-time / RAMP_SAMPLES; the record starts
    PRE_TRIGGER_FRACTION of an on-time before the first pulse and ends after the last pulse's
    estimated freewheel decay (× TAIL_MARGIN); pulses repeat after the decay or the bank's
    recharge (RECHARGE_TIME_CONSTANTS), whichever is longer. ``scopes`` maps a column (``i_shunt``,
    ``v_coil``) to the ScopeModel that records it; a column not named is recorded clean.
    """
    target = peak_current or default_peak_current(law)
    if pulse_length is None:
        pulse_length = bench.pulse_length_for(law, target)
    tail = TAIL_MARGIN * bench.decay_time(law, target)
    period = period or pulse_length + max(tail, RECHARGE_TIME_CONSTANTS * bench.recharge_time_constant)
    sample_interval = sample_interval or pulse_length / RAMP_SAMPLES
    pre_trigger = PRE_TRIGGER_FRACTION * pulse_length
    record_length = pre_trigger + (pulses - 1) * period + pulse_length + tail
    t, v_a, v_b, lam = simulate_pulses(law, bench, pulse_length, pulses, period, sample_interval,
                                       pre_trigger, record_length)
    clean = {"i_shunt": v_b, "v_coil": v_a - v_b}
    rng = np.random.default_rng(seed)
    recorded = {name: (scopes[name].apply(y, rng) if scopes and name in scopes else y.copy())
                for name, y in clean.items()}
    coil_current = np.asarray(law.current(lam))
    truth = PulseTruth(law, bench, pre_trigger, pulse_length, period, pulses, sample_interval,
                       float(np.max(coil_current)), lam, coil_current)
    return pd.DataFrame({"time": t, **recorded}), truth


def scope_for(y: np.ndarray, *, span_fraction: float = 0.8, noise_fraction: float = 1 / 500,
              correlation_samples: float = 3.0, bits: int = 8) -> ScopeModel:
    """A channel whose full scale the waveform's span fills to ``span_fraction`` (centred), with
    noise ``noise_fraction`` of full scale and 2**bits codes."""
    lo, hi = float(np.min(y)), float(np.max(y))
    full = (hi - lo) / span_fraction
    pad = 0.5 * (full - (hi - lo))
    return ScopeModel(noise_rms=noise_fraction * full, correlation_samples=correlation_samples, bits=bits,
                      full_scale=(lo - pad, hi + pad))


def noisy_scopes(law: FluxLaw, bench: PulseBench = PulseBench(), **capture_options) -> dict[str, ScopeModel]:
    """The scope settings of :func:`scope_for` for each column of the clean capture."""
    clean, _ = pulse_capture(law, bench, **capture_options)
    return {name: scope_for(clean[name].to_numpy()) for name in ("i_shunt", "v_coil")}


