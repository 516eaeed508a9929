#!/usr/bin/env python3
"""Exports independent GERG-2008 reference data for isochor's tests.

Independent implementation: teqp 0.23.1 (PyPI; Bell, Deiters, Jäger, Ind.
Eng. Chem. Res. 62 (2023) 5452), model kind "GERG2008resid" (its own
implementation and its own coding of Kunz & Wagner 2012). Loose
sanity data: CoolProp 8.0.0's mixture model (pure-fluid reference equations
with GERG-2008-type departure functions: not GERG-2008).

Writes (committed; neither CI nor a build needs Python):
  tests/data/teqp_gerg_points.csv   random compositions of 1-6 of the 21
      components and states: alpha^r derivatives and ln(fugacity coefficients)
  tests/data/teqp_gerg_dew.csv      dew points of argon + carbon dioxide and
      methane + propane from teqp's isotherm traces of the binary VLE
  tests/data/coolprop_mixture_points.csv  densities of shielding and breathing
      gases from CoolProp's mixture model (loose check only)
  tests/data/coolprop_mixture_dew.csv     dew pressures of the same two binaries
      from CoolProp's mixture model (loose check only)

Usage: pip install teqp==0.23.1 CoolProp==8.0.0 numpy; python3 host-sim/eos/tools/export_gerg.py
"""
import csv, os, random, sys

import numpy as np
import teqp
import CoolProp
import CoolProp.CoolProp as CP

if teqp.__version__ != "0.23.1" or CoolProp.__version__ != "8.0.0":
    sys.exit(f"needs teqp 0.23.1 and CoolProp 8.0.0 (have {teqp.__version__}, {CoolProp.__version__})")

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "..")
DATA = os.path.join(ROOT, "tests", "data")

# isochor component name -> teqp GERG-2008 name (GERG order).
NAMES = [
    ("methane", "methane"), ("nitrogen", "nitrogen"), ("carbon_dioxide", "carbondioxide"),
    ("ethane", "ethane"), ("propane", "propane"), ("isobutane", "isobutane"),
    ("n_butane", "n-butane"), ("isopentane", "isopentane"), ("n_pentane", "n-pentane"),
    ("n_hexane", "n-hexane"), ("n_heptane", "n-heptane"), ("n_octane", "n-octane"),
    ("n_nonane", "n-nonane"), ("n_decane", "n-decane"), ("hydrogen", "hydrogen"),
    ("oxygen", "oxygen"), ("carbon_monoxide", "carbonmonoxide"), ("water", "water"),
    ("hydrogen_sulfide", "hydrogensulfide"), ("helium", "helium"), ("argon", "argon"),
]
TEQP = dict(NAMES)


def model(names):
    return teqp.make_model({"kind": "GERG2008resid", "model": {"names": [TEQP[n] for n in names]}})


def points(rng, n=400):
    rows = []
    while len(rows) < n:
        k = rng.randint(1, 6)
        idx = sorted(rng.sample(range(21), k))
        names = [NAMES[i][0] for i in idx]
        x = np.array([rng.gammavariate(1.0, 1.0) for _ in idx])
        x = x / x.sum()
        x = np.round(x, 6)
        x[-1] = 1.0 - x[:-1].sum()
        if min(x) <= 1e-6:
            continue
        m = model(names)
        T = rng.uniform(200.0, 450.0)
        rho_r = m.get_rhor(x)
        rho = rho_r * rng.uniform(0.0, 1.2) ** 1.5
        d = {
            "components": "+".join(names),
            "fractions": "+".join(repr(float(v)) for v in x),
            "temperature_k": repr(T),
            "density_mol_m3": repr(rho),
            "ar00": repr(m.get_Ar00(T, rho, x)),
            "ar01": repr(m.get_Ar01(T, rho, x)),
            "ar02": repr(m.get_Ar02(T, rho, x)),
            "ar10": repr(m.get_Ar10(T, rho, x)),
            "ar11": repr(m.get_Ar11(T, rho, x)),
            "ar20": repr(m.get_Ar20(T, rho, x)),
        }
        if rho > 0:
            phi = m.get_fugacity_coefficients(T, rho * x)
            d["ln_phi"] = "+".join(repr(float(np.log(v))) for v in phi)
        else:
            d["ln_phi"] = ""
        rows.append(d)
    return rows


def dew(system, first, second, temps, ys):
    """Dew pressures of vapour with mole fraction y of `first`, from teqp's
    isotherm trace starting at the pure saturation of `second`."""
    m = model([first, second])
    pure = model([second])
    cp_name = {"carbon_dioxide": "CO2", "propane": "Propane"}[second]
    rows = []
    for T in temps:
        rl = CP.PropsSI("Dmolar", "T", T, "Q", 0, cp_name)
        rv = CP.PropsSI("Dmolar", "T", T, "Q", 1, cp_name)
        rl, rv = pure.pure_VLE_T(T, rl, rv, 20)
        tr = m.trace_VLE_isotherm_binary(T, np.array([0.0, rl]), np.array([0.0, rv]))
        pts = []
        for d in tr:
            xl, xv = d["xL_0 / mole frac."], d["xV_0 / mole frac."]
            if pts and xv > 0.02 and (abs(xl - xv) < 2e-3 or xv < pts[-1][1]):
                break  # at the critical point of the mixture
            pts.append((d["pV / Pa"], xv, xl, np.array(d["rhoL / mol/m^3"]), np.array(d["rhoV / mol/m^3"])))
        for y in ys:
            for (p0, y0, x0, rl0, rv0), (p1, y1, x1, rl1, rv1) in zip(pts, pts[1:]):
                if y0 <= y <= y1 and y1 > y0:
                    # The trace point nearest in liquid composition, refined
                    # to an exact equilibrium at that liquid composition
                    # (teqp's mix_VLE_Tx): the vapour composition is then
                    # the one the dew pressure belongs to.
                    f = (y - y0) / (y1 - y0)
                    xl = x0 + f * (x1 - x0)
                    rl = rl0 + f * (rl1 - rl0)
                    rv = rv0 + f * (rv1 - rv0)
                    code, rhol, rhov = m.mix_VLE_Tx(T, rl, rv, np.array([xl, 1 - xl]), 1e-10, 1e-12, 1e-10, 1e-12, 50)
                    yv = rhov[0] / rhov.sum()
                    pv = m.get_pr(T, rhov) + rhov.sum() * m.get_R(rhov / rhov.sum()) * T
                    rows.append({
                        "system": system,
                        "first": first,
                        "second": second,
                        "temperature_k": repr(T),
                        "y_first": repr(float(yv)),
                        "dew_pressure_pa": repr(float(pv)),
                        "x_first_liquid": repr(float(rhol[0] / rhol.sum())),
                    })
                    break
    return rows


def coolprop_points():
    """CoolProp's mixture densities (loose check only)."""
    mixes = [
        ("argon=82%,carbon_dioxide=18%", "Argon[0.82]&CarbonDioxide[0.18]"),
        ("argon=92%,carbon_dioxide=8%", "Argon[0.92]&CarbonDioxide[0.08]"),
        ("helium=79%,oxygen=21%", "Helium[0.79]&Oxygen[0.21]"),
        ("nitrogen=68%,oxygen=32%", "Nitrogen[0.68]&Oxygen[0.32]"),
        ("methane=90%,ethane=6%,propane=2%,nitrogen=2%",
         "Methane[0.90]&Ethane[0.06]&Propane[0.02]&Nitrogen[0.02]"),
    ]
    rows = []
    for ours, theirs in mixes:
        for T in [273.15, 288.15, 313.15]:
            for p in [50e5, 100e5, 200e5, 300e5]:
                try:
                    rho = CP.PropsSI("Dmolar", "T", T, "P", p, theirs)
                except ValueError:
                    continue
                rows.append({"composition": ours.replace(",", ";"), "temperature_k": repr(T),
                             "pressure_pa": repr(p), "density_mol_m3": repr(rho)})
    return rows


def coolprop_dew():
    """CoolProp's dew pressures of the two binaries (loose check only)."""
    rows = []
    for first, second, cp1, cp2, cases in [
        ("argon", "carbon_dioxide", "Argon", "CarbonDioxide",
         [(220.0, 0.3), (235.0, 0.5), (250.0, 0.3), (270.0, 0.2)]),
        ("methane", "propane", "Methane", "Propane",
         [(250.0, 0.5), (280.0, 0.7), (300.0, 0.4), (320.0, 0.3)]),
    ]:
        for T, y in cases:
            mix = f"{cp1}[{y}]&{cp2}[{1 - y}]"
            try:
                p = CP.PropsSI("P", "T", T, "Q", 1, mix)
            except ValueError:
                continue
            rows.append({"first": first, "second": second, "temperature_k": repr(T),
                         "y_first": repr(y), "dew_pressure_pa": repr(p)})
    return rows


def write(name, rows):
    path = os.path.join(DATA, name)
    with open(path, "w", newline="") as f:
        w = csv.DictWriter(f, fieldnames=list(rows[0].keys()))
        w.writeheader()
        w.writerows(rows)
    print(f"wrote {path}: {len(rows)} rows")


def main():
    rng = random.Random(2012)
    write("teqp_gerg_points.csv", points(rng))
    rows = dew("argon_carbon_dioxide", "argon", "carbon_dioxide", [220.0, 235.0, 250.0, 270.0],
               [0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8])
    rows += dew("methane_propane", "methane", "propane", [250.0, 280.0, 300.0, 320.0],
                [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9])
    write("teqp_gerg_dew.csv", rows)
    write("coolprop_mixture_points.csv", coolprop_points())
    write("coolprop_mixture_dew.csv", coolprop_dew())


main()
