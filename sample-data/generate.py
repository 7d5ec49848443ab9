#!/usr/bin/env python3
"""Deterministic generator of Diffusor's synthetic demo traces.

Everything this script writes is SYNTHETIC: computed from the model equations
below, plus seeded pseudo-random noise. Nothing here was measured, and the
files must not be used as reference data.

Usage
-----
    python3 sample-data/generate.py            # (re)write the files next to this script
    python3 sample-data/generate.py --out DIR  # write them into DIR instead
    python3 sample-data/generate.py --check    # regenerate into a temporary directory and
                                               # compare byte for byte; exit 1 on mismatch

Python 3.11 standard library only. The output is byte-for-byte reproducible:
one fixed seed, one `random.Random` per file, exact decimal formatting by
CPython, and explicit line endings.

Scenario (invented)
-------------------
Harrowmere Polytechnic (a fictional college) runs a sensor-chemistry teaching
lab. In one exercise, student groups decide whether a new lot of "FcQ" - an
invented name for a water-soluble ferrocene-derivative redox mediator destined
for a sensor ink; no particular real compound is meant - matches the
specification for its diffusion coefficient. They use potential-step
chronoamperometry on a 3.00 mm glassy-carbon disk and, for a cross-check, a
5 um radius platinum microdisk. All people, places and lot numbers in the
files are fictional.

    Solution        1.00 mM FcQ (nominal) in 0.10 M KCl (aq), N2-purged, 25.0 C
    Reference       Ag|AgCl (3 M KCl); all potentials below are against it
    Reaction        FcQ -> FcQ+ + e-   (n = 1), oxidation at the 3 mm disk
                    FcQ+ + e- -> FcQ   (n = 1), reduction at the microdisk, in a
                    solution of the oxidised form made by bulk electrolysis
    True D          7.00e-6 cm^2/s for every file. The oxidised form is given the
                    same D (a simplification: for real couples the two often
                    differ by a few per cent).
    Sign            IUPAC: anodic (oxidation) current positive, cathodic negative.

Models and their published sources
----------------------------------
Units inside the script: A (current), V, s, cm, cm^2, mol/cm^3, ohm, F (farad).
F = 96485.33212 C/mol (CODATA 2018); n = 1.

1. Planar disk, single step (Cottrell, Z. Phys. Chem. 42 (1903) 385):
       I_F(t) = n F A C sqrt(D) / sqrt(pi t),     t = time since the step
2. Double-layer charging through the uncompensated resistance, the RC
   response of a series Ru-Cdl circuit to a potential step of height dE (see
   e.g. A. J. Bard, L. R. Faulkner, Electrochemical Methods, 2nd ed., Wiley
   2001, sec. 1.2.4):
       I_C(t) = (dE / Ru) exp(-t / (Ru Cdl)),    Cdl = c_dl * A (c_dl in F/cm^2)
3. Microdisk, single step (D. Shoup, A. Szabo, J. Electroanal. Chem. 140
   (1982) 237):
       I(t) = 4 n F D C r f(tau),  tau = 4 D t / r^2,
       f(tau) = 0.7854 + 0.8862 tau^-1/2 + 0.2146 exp(-0.7823 tau^-1/2)
   Long-time limit 4 n F D C r; short-time limit the Cottrell current of the
   disk area pi r^2. The microdisk resistance is set from Ru = 1/(4 kappa r)
   (J. Newman, J. Electrochem. Soc. 113 (1966) 501) with kappa = 0.01289 S/cm
   for 0.10 M KCl at 25 C; with Cdl = 20 uF/cm^2 the charging time constant is
   about 0.6 us, so the charging term is negligible at 1 ms sampling.
4. Planar double step for a stable product, forward step for tau_f, then back
   to the rest potential (W. M. Schwarz, I. Shain, J. Phys. Chem. 69 (1965) 30,
   as the published form for equal diffusion coefficients):
       forward (0 < t <= tau_f):  I = + n F A C sqrt(D) / sqrt(pi t)
       reverse (t > tau_f):       I = - n F A C sqrt(D)/sqrt(pi) (1/sqrt(t - tau_f) - 1/sqrt(t))
   Noise-free, -I(2 tau_f) / I(tau_f) = 1 - 1/sqrt(2) = 0.292893.
5. Late natural convection, planar-convection.csv only. EMPIRICAL STAND-IN,
   NOT A PHYSICAL MODEL: the Cottrell current is multiplied by
       g(t) = 1 + s(t) (t / t_c)^p,   s(t) = 1 / (1 + exp(-(t - t_on) / w))
   with t_on = 20 s, w = 3 s, t_c = 90 s, p = 1.5, so that beyond ~15-25 s the
   current falls more slowly than t^-1/2 (g = 1.011 at 15 s, 1.052 at 20 s,
   1.186 at 30 s, 1.544 at 60 s).

Each current sample is the model at the sampling instant (point sampling).
Samples are at t_k = k dt, k = 0, 1, ..., the step happens just after the
sample k_step = t_step/dt (that sample still shows the rest potential and the
rest background), so the first post-step sample is dt after the step.

Background current: a constant I_bg,rest before the step (and after a step
back to rest) and a constant I_bg,step while the step potential is applied.

Noise model (added to the current, in amperes)
----------------------------------------------
    noise_k = e_k + w_k
    w_k ~ N(0, sigma_w^2)                    white
    e_k = phi e_(k-1) + eta_k, eta_k ~ N(0, sigma_eta^2)
                                             AR(1), started from its
                                             stationary law N(0, sigma_eta^2/(1-phi^2))
    3 mm disk:  sigma_w = 4.0 nA, phi = 0.95, sigma_eta = 1.0 nA (stationary 3.20 nA)
    microdisk:  sigma_w = 2.0 pA, phi = 0.90, sigma_eta = 0.8 pA (stationary 1.84 pA)
The recorded potential is the set potential plus white noise, sigma_E = 0.10 mV.
Values are written with 6 significant digits (current), 10 uV (potential) and
the sampling resolution (time).

Seed: SEED = 5821; file number i (see FILES) uses random.Random(SEED * 100 + i).
Per file, draws happen in time order: E noise, then the AR(1) innovation, then
the white noise, after one initial draw for the AR(1) start.

Parameters per file (true values; the lab's nominal values are A = 0.0707 cm^2
for d = 3.00 mm and C = 1.00 mM; "D_app" in the printed summary is the D a
fit would return if it used the nominal A and C - the true D times
(A_true C_true / (A_nom C_nom))^2):

    file                 A / cm^2   C / mM  Ru / ohm  c_dl / uF cm^-2  bg rest/step  dt     after step
    planar-rep1.csv      0.07118    0.994   148       22.0             1.5 / 20 nA   1 ms   20 s
    planar-rep2.csv      0.07046    1.012   162       24.5             1.5 / 24 nA   1 ms   20 s
    planar-rep3.csv      0.07093    0.987   139       20.8             1.5 / 17 nA   1 ms   20 s
    planar-convection    0.07081    1.003   155       23.0             1.5 / 21 nA   2 ms   60 s
    double-step.csv      0.07064    0.998   150       22.0             1.5 / 20 nA   1 ms   2 s + 4 s
    messy-export.txt     the same run (same numbers, same noise) as planar-rep2.csv
    microdisk-r5um.csv   r = 5.00 um, C = 1.000 mM, Ru = 38.8 kohm, c_dl = 20 uF/cm^2,
                         bg rest/step = +1.0 / -4.0 pA, 1 ms, 10 s after a 50 ms baseline
    Baselines: 100 ms at the rest potential (50 ms for the microdisk).
    Potentials: 3 mm disk rest 0.000 V, step +0.450 V (diffusion-limited oxidation);
                microdisk rest +0.450 V, step -0.050 V (diffusion-limited reduction).
"""

from __future__ import annotations

import argparse
import hashlib
import math
import os
import random
import sys
import tempfile

SEED = 5821

FARADAY = 96485.33212  # C/mol, CODATA 2018
N_ELECTRONS = 1
D_TRUE = 7.00e-6  # cm^2/s
MOLAR = 1e-6  # 1 mM = 1e-6 mol/cm^3

A_NOMINAL = 0.0707  # cm^2, pi (0.150 cm)^2 = 0.070686 to 3 s.f.
C_NOMINAL = 1.00  # mM

# Noise of the 3 mm disk runs (amperes) and of the microdisk (amperes).
PLANAR_NOISE = dict(white=4.0e-9, phi=0.95, innovation=1.0e-9)
MICRO_NOISE = dict(white=2.0e-12, phi=0.90, innovation=0.8e-12)
SIGMA_E = 0.10e-3  # V

# Empirical convection stand-in (planar-convection.csv only).
CONV_T_ON = 20.0  # s
CONV_WIDTH = 3.0  # s
CONV_T_C = 90.0  # s
CONV_P = 1.5

# Conductivity of 0.10 M KCl at 25 C, S/cm, for the microdisk resistance.
KAPPA = 0.01289

REST_PLANAR = 0.000  # V
STEP_PLANAR = 0.450  # V
REST_MICRO = 0.450  # V
STEP_MICRO = -0.050  # V


def planar_run(area, conc_mM, ru, cdl_per_cm2, bg_step, duration, dt_ms, baseline_ms=100):
    return dict(
        area=area,
        conc=conc_mM * MOLAR,
        conc_mM=conc_mM,
        ru=ru,
        cdl=cdl_per_cm2 * 1e-6 * area,
        cdl_per_cm2=cdl_per_cm2,
        bg_rest=1.5e-9,
        bg_step=bg_step,
        duration=duration,
        dt_ms=dt_ms,
        baseline_ms=baseline_ms,
    )


RUNS = {
    "planar-rep1": planar_run(0.07118, 0.994, 148.0, 22.0, 20e-9, 20.0, 1),
    "planar-rep2": planar_run(0.07046, 1.012, 162.0, 24.5, 24e-9, 20.0, 1),
    "planar-rep3": planar_run(0.07093, 0.987, 139.0, 20.8, 17e-9, 20.0, 1),
    "planar-convection": planar_run(0.07081, 1.003, 155.0, 23.0, 21e-9, 60.0, 2),
    "double-step": planar_run(0.07064, 0.998, 150.0, 22.0, 20e-9, 6.0, 1),
}
DOUBLE_STEP_TAU = 2.0  # s, length of the forward step

MICRO_RADIUS = 5.00e-4  # cm
MICRO_CONC_MM = 1.000
MICRO_RU = 1.0 / (4.0 * KAPPA * MICRO_RADIUS)  # ohm, about 38.8 kohm
MICRO_CDL = 20e-6 * math.pi * MICRO_RADIUS**2  # F
MICRO_BG_REST = 1.0e-12
MICRO_BG_STEP = -4.0e-12
MICRO_DURATION = 10.0
MICRO_BASELINE_MS = 50

# File number -> name (the number picks the random stream).
FILES = {
    1: "planar-rep1.csv",
    2: "planar-rep2.csv",
    3: "planar-rep3.csv",
    4: "planar-convection.csv",
    5: "microdisk-r5um.csv",
    6: "double-step.csv",
    7: "messy-export.txt",  # no stream of its own: it re-writes run 2
}

BANNER = "# Synthetic demonstration data made by sample-data/generate.py - not a measurement"


# --- models -----------------------------------------------------------------------------


def cottrell(t, area, conc):
    return N_ELECTRONS * FARADAY * area * conc * math.sqrt(D_TRUE / (math.pi * t))


def charging(t, d_e, ru, cdl):
    x = t / (ru * cdl)
    return 0.0 if x > 700.0 else d_e / ru * math.exp(-x)


def shoup_szabo(t, radius, conc):
    tau = 4.0 * D_TRUE * t / radius**2
    x = 1.0 / math.sqrt(tau)
    f = 0.7854 + 0.8862 * x + 0.2146 * math.exp(-0.7823 * x)
    return 4.0 * N_ELECTRONS * FARADAY * D_TRUE * conc * radius * f


def convection_factor(t):
    s = 1.0 / (1.0 + math.exp(-(t - CONV_T_ON) / CONV_WIDTH))
    return 1.0 + s * (t / CONV_T_C) ** CONV_P


def schwarz_shain_reverse(t, tau, area, conc):
    k = N_ELECTRONS * FARADAY * area * conc * math.sqrt(D_TRUE / math.pi)
    return -k * (1.0 / math.sqrt(t - tau) - 1.0 / math.sqrt(t))


# --- noise ------------------------------------------------------------------------------


class Noise:
    """White noise plus AR(1)-correlated noise, started from the stationary law."""

    def __init__(self, rng, white, phi, innovation):
        self.rng = rng
        self.white = white
        self.phi = phi
        self.innovation = innovation
        self.e = rng.gauss(0.0, innovation / math.sqrt(1.0 - phi * phi))

    def draw(self):
        self.e = self.phi * self.e + self.rng.gauss(0.0, self.innovation)
        return self.e + self.rng.gauss(0.0, self.white)


# --- traces -----------------------------------------------------------------------------


def planar_trace(number, name):
    """Rows (k, E in V, I in A) of a planar single-step, convection or double-step run."""
    p = RUNS[name]
    rng = random.Random(SEED * 100 + number)
    noise = Noise(rng, **PLANAR_NOISE)
    dt = p["dt_ms"] / 1000.0
    k_step = p["baseline_ms"] // p["dt_ms"]
    k_end = k_step + round(p["duration"] / dt)
    k_back = k_step + round(DOUBLE_STEP_TAU / dt) if name == "double-step" else None
    d_e = STEP_PLANAR - REST_PLANAR
    rows = []
    for k in range(k_end + 1):
        t = (k - k_step) * dt  # time since the step
        if k <= k_step:
            e_set, current = REST_PLANAR, p["bg_rest"]
        elif k_back is None or k <= k_back:
            e_set = STEP_PLANAR
            faradaic = cottrell(t, p["area"], p["conc"])
            if name == "planar-convection":
                faradaic *= convection_factor(t)
            current = faradaic + charging(t, d_e, p["ru"], p["cdl"]) + p["bg_step"]
        else:
            e_set = REST_PLANAR
            t_back = (k - k_back) * dt
            current = (
                schwarz_shain_reverse(t, DOUBLE_STEP_TAU, p["area"], p["conc"])
                + charging(t, d_e, p["ru"], p["cdl"])
                - charging(t_back, d_e, p["ru"], p["cdl"])
                + p["bg_rest"]
            )
        e = e_set + rng.gauss(0.0, SIGMA_E)
        rows.append((k, e, current + noise.draw()))
    return rows


def micro_trace(number):
    rng = random.Random(SEED * 100 + number)
    noise = Noise(rng, **MICRO_NOISE)
    dt = 0.001
    k_step = MICRO_BASELINE_MS
    k_end = k_step + round(MICRO_DURATION / dt)
    d_e = STEP_MICRO - REST_MICRO
    rows = []
    for k in range(k_end + 1):
        t = (k - k_step) * dt
        if k <= k_step:
            e_set, current = REST_MICRO, MICRO_BG_REST
        else:
            e_set = STEP_MICRO
            current = (
                -shoup_szabo(t, MICRO_RADIUS, MICRO_CONC_MM * MOLAR)
                + charging(t, d_e, MICRO_RU, MICRO_CDL)
                + MICRO_BG_STEP
            )
        e = e_set + rng.gauss(0.0, SIGMA_E)
        rows.append((k, e, current + noise.draw()))
    return rows


# --- formatting -------------------------------------------------------------------------


def fmt_time(k, dt_ms):
    # Exact from the integer sample number: no accumulated rounding.
    ms = k * dt_ms
    return "%d.%03d" % (ms // 1000, ms % 1000)


def fmt_e(e):
    s = "%.5f" % e
    return "0.00000" if s == "-0.00000" else s


def csv_text(banner2, header, rows, dt_ms, current_scale, current_fmt):
    lines = [BANNER, "# " + banner2, header]
    for k, e, i in rows:
        lines.append("%s,%s,%s" % (fmt_time(k, dt_ms), fmt_e(e), current_fmt % (i * current_scale)))
    return ("\n".join(lines) + "\n").encode("utf-8")


def european_current_ma(sci_ua):
    """'1.01812e+01' (uA) -> '1,01812E-02' (mA), exactly the same decimal value."""
    mantissa, exponent = sci_ua.split("e")
    return "%sE%+03d" % (mantissa.replace(".", ","), int(exponent) - 3)


def messy_text(rows, dt_ms):
    p = RUNS["planar-rep2"]
    k_step = p["baseline_ms"] // dt_ms
    k_bad = k_step + 9731  # 9.831 s into the file: one unreadable row
    pre = [
        "Synthetic chronoamperometry file - NOT a measurement, made for testing importers",
        "Written by sample-data/generate.py of the Diffusor project; see sample-data/README.md",
        "Harrowmere Polytechnic (fictional) - sensor-chemistry teaching lab, bench 3",
        "Same run as planar-rep2.csv, re-exported through the group's spreadsheet template",
        "Operator = R. Amberley (fictional)",
        "Group = B2",
        "Mediator lot = FcQ-0417 (fictional)",
        "Electrode: glassy carbon disk, d = 3,00 mm, A = 0,0707 cm²",
        "Electrolyte: 1,00 mM FcQ in 0,10 M KCl (aq), N2-purged, 25,0 °C",
        "Reference: Ag|AgCl (3 M KCl)",
        "Rest potential = 0,000 V",
        "Step potential = 0,450 V",
        "Step after = 100,0 ms",
        "Sample interval = 1,0 ms",
        "Note: synthetic data, computed from a model with added noise",
        "",
        "Zeit (ms);Potential (V);Strom (mA)",
    ]
    lines = list(pre)
    for k, e, i in rows:
        t_ms = "%d,0" % (k * dt_ms)
        e_txt = fmt_e(e).replace(".", ",")
        i_txt = "----" if k == k_bad else european_current_ma("%.5e" % (i * 1e6))
        lines.append("%s;%s;%s" % (t_ms, e_txt, i_txt))
    lines.append("")  # trailing blank line
    return "\ufeff".encode("utf-8") + ("\r\n".join(lines) + "\r\n").encode("utf-8")


def build():
    """All files as {name: bytes}."""
    out = {}
    rep1 = planar_trace(1, "planar-rep1")
    out[FILES[1]] = csv_text(
        "3 mm disk - replicate 1 - true values in sample-data/README.md",
        "time (s),potential (V),current (µA)",
        rep1, 1, 1e6, "%.6g",
    )
    rep2 = planar_trace(2, "planar-rep2")
    out[FILES[2]] = csv_text(
        "3 mm disk - replicate 2 - true values in sample-data/README.md",
        "Time/s,E/V,I/uA",
        rep2, 1, 1e6, "%.5e",
    )
    rep3 = planar_trace(3, "planar-rep3")
    out[FILES[3]] = csv_text(
        "3 mm disk - replicate 3 - true values in sample-data/README.md",
        '"Time [s]","Potential [V]","Current [µA]"',
        rep3, 1, 1e6, "%.6g",
    )
    conv = planar_trace(4, "planar-convection")
    out[FILES[4]] = csv_text(
        "3 mm disk - 60 s run with a late natural-convection upturn (empirical stand-in)",
        "time_s,E_V,I_uA",
        conv, 2, 1e6, "%.6g",
    )
    micro = micro_trace(5)
    out[FILES[5]] = csv_text(
        "5 um radius Pt microdisk - reduction step (cathodic current negative)",
        "Time/s,E / V,I (nA)",
        micro, 1, 1e9, "%.6g",
    )
    double = planar_trace(6, "double-step")
    out[FILES[6]] = csv_text(
        "3 mm disk - double step: +0.450 V for 2 s then back to 0.000 V",
        "t (s),E (V),i (µA)",
        double, 1, 1e6, "%.6g",
    )
    out[FILES[7]] = messy_text(rep2, 1)
    return out


# --- summary ----------------------------------------------------------------------------


def summary():
    lines = []
    a = lines.append
    a("True D = %.3e cm^2/s for every file; n = %d; F = %.8f C/mol" % (D_TRUE, N_ELECTRONS, FARADAY))
    for name, p in RUNS.items():
        ratio = (p["area"] * p["conc_mM"]) / (A_NOMINAL * C_NOMINAL)
        i1 = cottrell(1.0, p["area"], p["conc"])
        a(
            "%-18s A=%.5f cm2 C=%.3f mM Ru=%.0f ohm Cdl=%.3f uF tau_c=%.1f us "
            "I_F(1 s)=nFAC*sqrt(D/pi)=%.5f uA  D_app(nominal A,C)=%.4e"
            % (
                name, p["area"], p["conc_mM"], p["ru"], p["cdl"] * 1e6,
                p["ru"] * p["cdl"] * 1e6, i1 * 1e6, D_TRUE * ratio**2,
            )
        )
    p = RUNS["double-step"]
    tau = DOUBLE_STEP_TAU
    ratio = -schwarz_shain_reverse(2 * tau, tau, p["area"], p["conc"]) / cottrell(
        tau, p["area"], p["conc"]
    )
    a("double-step: I_f(tau)=%.5f uA  I_r(2 tau)=%.5f uA  ratio=%.6f" % (
        cottrell(tau, p["area"], p["conc"]) * 1e6,
        schwarz_shain_reverse(2 * tau, tau, p["area"], p["conc"]) * 1e6, ratio))
    for t in (10.0, 15.0, 20.0, 30.0, 60.0):
        a("convection factor g(%g s) = %.4f" % (t, convection_factor(t)))
    iss = 4 * N_ELECTRONS * FARADAY * D_TRUE * MICRO_CONC_MM * MOLAR * MICRO_RADIUS
    a("microdisk: Ru=%.1f kohm Cdl=%.2f pF tau_c=%.3f us  4nFDCr=%.5f nA  I(1 ms)=%.5f nA"
      "  I(10 s)=%.5f nA (model magnitudes; sign negative in the file)" % (
          MICRO_RU / 1e3, MICRO_CDL * 1e12, MICRO_RU * MICRO_CDL * 1e6, iss * 1e9,
          shoup_szabo(1e-3, MICRO_RADIUS, MICRO_CONC_MM * MOLAR) * 1e9,
          shoup_szabo(10.0, MICRO_RADIUS, MICRO_CONC_MM * MOLAR) * 1e9))
    for label, n in (("planar", PLANAR_NOISE), ("microdisk", MICRO_NOISE)):
        a("%s noise: white %.3g A, AR(1) phi %.2f innovation %.3g A, stationary AR sd %.3g A"
          % (label, n["white"], n["phi"], n["innovation"], n["innovation"] / math.sqrt(1 - n["phi"] ** 2)))
    return "\n".join(lines)


def write_all(directory, files):
    os.makedirs(directory, exist_ok=True)
    for name, data in files.items():
        with open(os.path.join(directory, name), "wb") as fh:
            fh.write(data)


def main(argv=None):
    here = os.path.dirname(os.path.abspath(__file__))
    ap = argparse.ArgumentParser(description="Write Diffusor's synthetic demo traces.")
    ap.add_argument("--out", default=here, help="directory to write into (default: this script's)")
    ap.add_argument("--check", action="store_true",
                    help="regenerate into a temporary directory and compare with --out")
    ap.add_argument("--summary", action="store_true", help="print the true values and stop")
    args = ap.parse_args(argv)
    if args.summary:
        print(summary())
        return 0
    files = build()
    if args.check:
        bad = 0
        with tempfile.TemporaryDirectory() as tmp:
            write_all(tmp, files)
            for name in sorted(files):
                fresh = open(os.path.join(tmp, name), "rb").read()
                path = os.path.join(args.out, name)
                try:
                    committed = open(path, "rb").read()
                except OSError:
                    print("MISSING  %s" % name)
                    bad += 1
                    continue
                if committed == fresh:
                    print("ok       %s  %s" % (hashlib.sha256(fresh).hexdigest(), name))
                else:
                    print("DIFFERS  %s" % name)
                    bad += 1
        # The end-to-end tests read every .csv and .txt here, so strays count too.
        for name in sorted(os.listdir(args.out)):
            if name.endswith((".csv", ".txt")) and name not in files:
                print("EXTRA    %s (not made by the generator)" % name)
                bad += 1
        if bad:
            print("%d file(s) missing, different or extra" % bad, file=sys.stderr)
            return 1
        return 0
    write_all(args.out, files)
    for name in sorted(files):
        print("%s  %8d bytes  %s" % (hashlib.sha256(files[name]).hexdigest(), len(files[name]), name))
    return 0


if __name__ == "__main__":
    sys.exit(main())
