#!/usr/bin/env python3
"""Export the reference equations of state used by isochor from CoolProp.

Reads CoolProp 8.0.0 (PyPI, MIT licence) through
``CoolProp.CoolProp.get_fluid_param_string(name, "JSON")`` and writes, for every
gas of ``isochor_core::Gas``:

* ``host-sim/eos/data/<gas>.eos`` -- the ideal-gas and residual Helmholtz-energy
  coefficients,
  reducing and critical state, gas constant, declared range, saturation
  ancillaries and the original publication, in isochor's own text format
  (described in DEVELOPERS.md, "Reference equation of state");
* ``host-sim/eos/data/LICENSE-CoolProp.txt`` -- CoolProp's licence notice;
* ``tests/data/coolprop_points.csv`` -- reference states computed by CoolProp
  itself, against which the Rust implementation is tested;
* ``tests/data/coolprop_caloric.csv`` -- caloric properties (internal energy,
  enthalpy, heat capacities, speed of sound) computed by CoolProp at the same
  kind of states, for the ideal-gas part.

Everything written is committed: building and testing isochor needs neither
Python nor CoolProp. Run from the repository root:

    python3 host-sim/eos/tools/export_eos.py

The output is deterministic for a given CoolProp version.
"""

import json
import os
import re
import sys

import CoolProp
from CoolProp import CoolProp as CP

EXPECTED_VERSION = "8.0.0"

# isochor gas name -> CoolProp fluid name. Order = isochor_core::Gas::ALL.
GASES = [
    ("nitrogen", "Nitrogen"),
    ("oxygen", "Oxygen"),
    ("argon", "Argon"),
    ("helium", "Helium"),
    ("hydrogen", "Hydrogen"),
    ("methane", "Methane"),
    ("air", "Air"),
    ("carbon_dioxide", "CarbonDioxide"),
    ("neon", "Neon"),
    ("krypton", "Krypton"),
    ("xenon", "Xenon"),
    ("ethane", "Ethane"),
    ("propane", "Propane"),
]

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", "..", ".."))
EOS_DIR = os.path.join(ROOT, "host-sim", "eos", "data")
POINTS = os.path.join(ROOT, "tests", "data", "coolprop_points.csv")
CALORIC = os.path.join(ROOT, "tests", "data", "coolprop_caloric.csv")


def num(x):
    """Shortest text that reads back as the same binary64 value."""
    x = float(x)
    if x == int(x) and abs(x) < 1e15:
        return str(int(x))
    return repr(x)


def bibtex_entries():
    """The CoolProp BibTeX library shipped with the package, as key -> fields."""
    path = os.path.join(os.path.dirname(CoolProp.__file__), "CoolPropBibTeXLibrary.bib")
    with open(path, encoding="utf-8") as f:
        text = f.read()
    entries = {}
    for m in re.finditer(r"@\w+\{([^,]+),(.*?)\n\}", text, re.S):
        key, body = m.group(1).strip(), m.group(2)
        fields = {}
        for fm in re.finditer(r"(\w+)\s*=\s*\{(.*?)\},?\s*$", body, re.M | re.S):
            fields[fm.group(1).lower()] = " ".join(fm.group(2).replace("{", "").replace("}", "").split())
        entries[key] = fields
    return entries


def latex_to_text(s):
    return s.replace('\\"u', "ü").replace('\\"o', "ö").replace('\\"a', "ä").replace("\\", "")


def citation(entries, key):
    e = entries.get(key)
    if e is None:
        raise SystemExit(f"no BibTeX entry {key} in CoolProp's library")
    authors = latex_to_text(e.get("author", "")).replace(" and ", ", ")
    parts = [authors, f"\"{latex_to_text(e.get('title', ''))}\""]
    journal = e.get("journal")
    if journal:
        ref = journal
        if e.get("volume"):
            ref += " " + e["volume"]
        if e.get("pages"):
            ref += ", " + e["pages"]
        parts.append(ref)
    elif e.get("note"):
        parts.append(e["note"])
    parts.append("(" + e.get("year", "") + ")")
    text = ", ".join(p for p in parts[:-1] if p) + " " + parts[-1]
    if e.get("doi"):
        text += ", doi:" + e["doi"]
    return " ".join(text.split())


def ancillary_lines(kind, a):
    if a["type"] not in ("pL", "pV", "rhoV"):
        raise SystemExit(f"unsupported ancillary type {a['type']}")
    lines = [
        f"{kind} {num(a['T_r'])} {num(a['reducing_value'])} {1 if a.get('using_tau_r') else 0} "
        f"{num(a['Tmin'])} {num(a['Tmax'])}"
    ]
    for n, t in zip(a["n"], a["t"]):
        lines.append(f"{kind}_term {num(n)} {num(t)}")
    return lines


def ideal_lines(cp_name, alpha0):
    """The ideal-gas part alpha0(tau, delta) in isochor's records.

    CoolProp's forms (FluidLibrary.h of CoolProp 8.0.0): Lead = ln(delta) + a1 +
    a2 tau; EnthalpyEntropyOffset = a1 + a2 tau; LogTau = a ln(tau); Power =
    sum n tau^t; PlanckEinstein = sum n ln(1 - exp(-t tau)), kept as the
    generalised n ln(c + d exp(theta tau)) with theta = -t, c = 1, d = -1;
    PlanckEinsteinFunctionT = the same with theta = -v/Tcrit;
    PlanckEinsteinGeneralized = n ln(c + d exp(t tau)) as given.
    """
    lines = []
    for term in alpha0:
        ty = term["type"]
        if ty == "IdealGasHelmholtzLead":
            lines.append(f"ideal_lead {num(term['a1'])} {num(term['a2'])}")
        elif ty == "IdealGasHelmholtzEnthalpyEntropyOffset":
            lines.append(f"ideal_offset {num(term['a1'])} {num(term['a2'])}")
        elif ty == "IdealGasHelmholtzLogTau":
            lines.append(f"ideal_log_tau {num(term['a'])}")
        elif ty == "IdealGasHelmholtzPower":
            for n, t in zip(term["n"], term["t"]):
                lines.append(f"ideal_power {num(n)} {num(t)}")
        elif ty == "IdealGasHelmholtzPlanckEinstein":
            for n, t in zip(term["n"], term["t"]):
                lines.append(f"ideal_planck_einstein {num(n)} {num(-t)} 1 -1")
        elif ty == "IdealGasHelmholtzPlanckEinsteinFunctionT":
            tc = term["Tcrit"]
            for n, v in zip(term["n"], term["v"]):
                lines.append(f"ideal_planck_einstein {num(n)} {num(-v / tc)} 1 -1")
        elif ty == "IdealGasHelmholtzPlanckEinsteinGeneralized":
            for n, t, c, d in zip(term["n"], term["t"], term["c"], term["d"]):
                lines.append(f"ideal_planck_einstein {num(n)} {num(t)} {num(c)} {num(d)}")
        else:
            raise SystemExit(f"{cp_name}: unsupported ideal-gas term {ty}")
    return lines


def export_fluid(gas, cp_name, bib):
    d = json.loads(CP.get_fluid_param_string(cp_name, "JSON"))[0]
    eos = d["EOS"][0]
    red = eos["STATES"]["reducing"]
    crit = d["STATES"]["critical"]
    anc = d["ANCILLARIES"]
    # Pure fluids carry pS; the pseudo-pure air carries bubble (pL) and dew
    # (pV) lines: the gas phase ends at the dew line.
    psat = anc["pS"] if "pS" in anc else anc["pV"]
    keys = [k.strip() for k in eos["BibTeX_EOS"].split(",") if k.strip()]
    out = [
        "# isochor reference equation of state (Helmholtz energy), format 2.",
        "# Generated by host-sim/eos/tools/export_eos.py from CoolProp "
        + CoolProp.__version__
        + " -- do not edit.",
        "# Coefficients (c) CoolProp developers, MIT licence: see LICENSE-CoolProp.txt.",
        "format isochor-eos 2",
        f"gas {gas}",
        f"coolprop {cp_name} {CoolProp.__version__}",
    ]
    for k in keys:
        out.append(f"source {citation(bib, k)}")
    out += [
        f"molar_mass_kg_mol {num(eos['molar_mass'])}",
        f"gas_constant_j_mol_k {num(eos['gas_constant'])}",
        f"reducing {num(red['T'])} {num(red['rhomolar'])}",
        f"critical {num(crit['T'])} {num(crit['p'])} {num(crit['rhomolar'])}",
        f"range {num(eos['Ttriple'])} {num(eos['T_max'])} {num(eos['p_max'])}",
    ]
    out += ancillary_lines("psat", psat)
    out += ancillary_lines("rhov", anc["rhoV"])
    out += ideal_lines(cp_name, eos["alpha0"])
    for term in eos["alphar"]:
        ty = term["type"]
        if ty == "ResidualHelmholtzPower":
            for n, dd, t, l in zip(term["n"], term["d"], term["t"], term["l"]):
                out.append(f"power {num(n)} {num(dd)} {num(t)} {num(l)}")
        elif ty == "ResidualHelmholtzGaussian":
            for v in zip(term["n"], term["d"], term["t"], term["eta"], term["epsilon"], term["beta"], term["gamma"]):
                out.append("gauss " + " ".join(num(x) for x in v))
        elif ty == "ResidualHelmholtzNonAnalytic":
            for v in zip(term["n"], term["a"], term["b"], term["beta"], term["A"], term["B"], term["C"], term["D"]):
                out.append("nonanalytic " + " ".join(num(x) for x in v))
        else:
            raise SystemExit(f"{cp_name}: unsupported residual term {ty}")
    with open(os.path.join(EOS_DIR, gas + ".eos"), "w", encoding="utf-8") as f:
        f.write("\n".join(out) + "\n")
    return eos, d


def reference_points(gas, cp_name, eos, d):
    """CoolProp states over the gas and supercritical region of the EOS."""
    tmin, tmax, pmax = eos["Ttriple"], eos["T_max"], eos["p_max"]
    tc = d["STATES"]["critical"]["T"]
    temps = [213.15, 233.15, 253.15, 273.15, 288.15, 300.0, 323.15, 358.15, 423.15]
    temps += [round(1.05 * tc, 3), round(1.5 * tc, 3), round(0.95 * tc, 3)]
    pressures = [1e3, 1e5, 1e6, 3e6, 5e6, 1e7, 2e7, 3.5e7, 5e7, 7e7, 1e8, 2e8]
    rows = []
    for t in sorted(set(temps)):
        if not (tmin < t < tmax):
            continue
        psat = None
        if t < tc:
            psat = CP.PropsSI("P", "T", t, "Q", 1, cp_name)
        for p in pressures:
            if p > pmax:
                continue
            if psat is not None and p > 0.98 * psat:
                continue
            try:
                rho = CP.PropsSI("Dmolar", "T", t, "P", p, cp_name)
                z = CP.PropsSI("Z", "T", t, "P", p, cp_name)
                drdp = CP.PropsSI("d(Dmolar)/d(P)|T", "T", t, "P", p, cp_name)
                drdt = CP.PropsSI("d(Dmolar)/d(T)|P", "T", t, "P", p, cp_name)
            except ValueError:
                # Below the melting line: solid, outside every EOS here.
                continue
            rows.append(f"{gas},{num(t)},{num(p)},{num(rho)},{num(z)},{num(drdp)},{num(drdt)}")
    return rows


def caloric_points(gas, cp_name, eos, d):
    """Caloric properties by CoolProp (molar basis, CoolProp's reference state)."""
    tmin, tmax, pmax = eos["Ttriple"], eos["T_max"], eos["p_max"]
    tc = d["STATES"]["critical"]["T"]
    temps = [213.15, 253.15, 288.15, 323.15, 423.15, round(1.5 * tc, 3), round(0.95 * tc, 3)]
    pressures = [1e3, 1e5, 1e6, 1e7, 3.5e7, 7e7, 1e8]
    rows = []
    for t in sorted(set(temps)):
        if not (tmin < t < tmax):
            continue
        psat = CP.PropsSI("P", "T", t, "Q", 1, cp_name) if t < tc else None
        for p in pressures:
            if p > pmax or (psat is not None and p > 0.98 * psat):
                continue
            try:
                vals = [CP.PropsSI(k, "T", t, "P", p, cp_name)
                        for k in ("Umolar", "Hmolar", "Cvmolar", "Cpmolar", "speed_of_sound")]
            except ValueError:
                continue
            rows.append(f"{gas},{num(t)},{num(p)}," + ",".join(num(v) for v in vals))
    return rows


def main():
    if CoolProp.__version__ != EXPECTED_VERSION:
        sys.exit(f"CoolProp {EXPECTED_VERSION} expected, found {CoolProp.__version__}")
    os.makedirs(EOS_DIR, exist_ok=True)
    os.makedirs(os.path.dirname(POINTS), exist_ok=True)
    licence = os.path.join(
        os.path.dirname(CoolProp.__file__), "..", f"coolprop-{CoolProp.__version__}.dist-info", "licenses", "LICENSE"
    )
    with open(licence, encoding="utf-8") as f:
        text = f.read()
    with open(os.path.join(EOS_DIR, "LICENSE-CoolProp.txt"), "w", encoding="utf-8") as f:
        f.write(
            "The coefficient files in this folder were exported from CoolProp "
            + CoolProp.__version__
            + " (PyPI package CoolProp), which carries this licence:\n\n"
            + text
        )
    bib = bibtex_entries()
    rows = [
        "# Reference states computed by CoolProp " + CoolProp.__version__ + " (PropsSI, HEOS backend)",
        "# by host-sim/eos/tools/export_eos.py -- do not edit.",
        "gas,temperature_k,pressure_pa,density_mol_m3,z,drho_dp_mol_m3_pa,drho_dt_mol_m3_k",
    ]
    caloric = [
        "# Caloric properties computed by CoolProp " + CoolProp.__version__ + " (PropsSI, HEOS backend)",
        "# by host-sim/eos/tools/export_eos.py -- do not edit. Molar basis, CoolProp's reference states.",
        "gas,temperature_k,pressure_pa,u_j_mol,h_j_mol,cv_j_mol_k,cp_j_mol_k,speed_of_sound_m_s",
    ]
    for gas, cp_name in GASES:
        eos, d = export_fluid(gas, cp_name, bib)
        rows += reference_points(gas, cp_name, eos, d)
        caloric += caloric_points(gas, cp_name, eos, d)
    with open(POINTS, "w", encoding="utf-8") as f:
        f.write("\n".join(rows) + "\n")
    with open(CALORIC, "w", encoding="utf-8") as f:
        f.write("\n".join(caloric) + "\n")
    print(f"wrote {len(GASES)} fluids to {EOS_DIR} and {len(rows) - 3} points to {POINTS}")


if __name__ == "__main__":
    main()
