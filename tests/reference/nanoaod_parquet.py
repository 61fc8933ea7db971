"""Real events read by `uproot` (PyPI), for the Parquet reader's checks.

Source: ../shared/data/cms-open-data-nanoaod-200ev.root, 200 simulated
events of CMS Open Data (2015) in NanoAOD format, as redistributed in the
scikit-hep-testdata repository (see ../shared/data/README.md). Nobody in
this project wrote it.

The script
1. converts the ROOT file with scripts/root_to_parquet.py (uproot + awkward
   + pyarrow, 64 events per row group) into a temporary file and checks,
   with pyarrow, that it holds the same table as the committed fixture
   tests/fixtures/nanoaod-200ev.parquet (so the fixture is what the
   converter makes of the real file);
2. reads the ROOT file again with uproot alone (not through Parquet) and
   writes, per event: the event id and generator weight, the object counts
   before and after a stated selection, the leading jet's pt/eta/phi/mass,
   every jet's b-tag score, MET pt/phi and its covariance - each float32
   value written as the exact float64 it widens to;
3. writes the same events as quarry's long-form CSV (text in the JSON), so
   that a Rust test can check that quarry gives the same rows from the
   Parquet file and from this CSV.

Conversions applied here exactly as the column map
tests/fixtures/nanoaod-2015.toml tells quarry to: the b-tag score is
Jet_btagCSVV2 with negative values ("not computed", -10) read as 0; a
negative mass (NanoAOD stores masses with a shortened mantissa) is read
as 0.

Selection (quarry's default, common practice / from memory, see
crates/event/src/selection.rs): electrons and muons pt > 25 GeV, |eta| <
2.5; jets pt > 25 GeV, |eta| < 2.5 and Delta R >= 0.4 from every selected
lepton; large-radius jets pt > 200 GeV, |eta| < 2.0; b-tagged: score > 0.5.

Run from the repository root:  python tests/reference/nanoaod_parquet.py
(QUARRY_SHARED_DATA may point to another folder holding the ROOT file.)
Writes tests/reference/fixtures/nanoaod_parquet.json (deterministic).
"""

import json
import math
import os
import sys
import tempfile
from pathlib import Path

import awkward as ak
import numpy as np
import pyarrow.parquet as pq
import uproot

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "scripts"))
import root_to_parquet  # noqa: E402

DATA = Path(os.environ.get("QUARRY_SHARED_DATA", ROOT.parent / "shared" / "data"))
ROOT_FILE = DATA / "cms-open-data-nanoaod-200ev.root"
FIXTURE = ROOT / "tests" / "fixtures" / "nanoaod-200ev.parquet"
OUT = ROOT / "tests" / "reference" / "fixtures" / "nanoaod_parquet.json"


def f(x):
    """A float32 as the exact float64 it widens to."""
    return float(np.float32(x))


def text(x):
    """Shortest text that parses back to the same float64."""
    return repr(float(x))


def main():
    if not ROOT_FILE.exists():
        raise SystemExit(f"{ROOT_FILE} not found (set QUARRY_SHARED_DATA)")
    with tempfile.TemporaryDirectory() as tmp:
        converted = Path(tmp) / "converted.parquet"
        root_to_parquet.convert(str(ROOT_FILE), str(converted), step=64)
        fresh = pq.read_table(converted)
        committed = pq.read_table(FIXTURE)
        if not fresh.equals(committed):
            raise SystemExit(f"{FIXTURE} differs from what scripts/root_to_parquet.py makes of {ROOT_FILE}")
        groups = pq.ParquetFile(converted).metadata.num_row_groups

    tree = uproot.open(ROOT_FILE)["Events"]
    a = tree.arrays(library="ak")
    events = []
    csv = ["event,kind,pt,eta,phi,mass,btag,charge,weight,met_cov_xx,met_cov_xy,met_cov_yy"]
    for i in range(len(a)):
        e = a[i]
        eid = int(e.event)
        w = f(e.genWeight)
        btag = [max(f(b), 0.0) for b in e.Jet_btagCSVV2]
        mass = lambda m: max(f(m), 0.0)

        def passes(pt, eta, pt_min, eta_max):
            return f(pt) > pt_min and abs(f(eta)) < eta_max

        ele = [k for k in range(len(e.Electron_pt)) if passes(e.Electron_pt[k], e.Electron_eta[k], 25.0, 2.5)]
        mu = [k for k in range(len(e.Muon_pt)) if passes(e.Muon_pt[k], e.Muon_eta[k], 25.0, 2.5)]
        leptons = [(f(e.Electron_eta[k]), f(e.Electron_phi[k])) for k in ele] + [
            (f(e.Muon_eta[k]), f(e.Muon_phi[k])) for k in mu
        ]

        def far(eta, phi):
            for (le, lp) in leptons:
                dphi = (f(phi) - lp + math.pi) % (2 * math.pi) - math.pi
                if (f(eta) - le) ** 2 + dphi**2 < 0.4**2:
                    return False
            return True

        jets = [
            k
            for k in range(len(e.Jet_pt))
            if passes(e.Jet_pt[k], e.Jet_eta[k], 25.0, 2.5) and far(e.Jet_eta[k], e.Jet_phi[k])
        ]
        fat = [k for k in range(len(e.FatJet_pt)) if passes(e.FatJet_pt[k], e.FatJet_eta[k], 200.0, 2.0)]
        lead = None
        if len(e.Jet_pt) > 0:
            lead = [f(e.Jet_pt[0]), f(e.Jet_eta[0]), f(e.Jet_phi[0]), f(e.Jet_mass[0])]
        events.append(
            {
                "event": eid,
                "weight": w,
                "counts": {
                    "jets": len(e.Jet_pt),
                    "fatjets": len(e.FatJet_pt),
                    "electrons": len(e.Electron_pt),
                    "muons": len(e.Muon_pt),
                },
                "selected": {
                    "jets": len(jets),
                    "bjets": sum(1 for k in jets if btag[k] > 0.5),
                    "fatjets": len(fat),
                    "electrons": len(ele),
                    "muons": len(mu),
                },
                "lead_jet": lead,
                "btag": btag,
                "met": {
                    "pt": f(e.MET_pt),
                    "phi": f(e.MET_phi),
                    "cov": [f(e.MET_covXX), f(e.MET_covXY), f(e.MET_covYY)],
                },
            }
        )
        # The same event as quarry long-form CSV rows.
        wt = text(w)
        for k in range(len(e.Jet_pt)):
            csv.append(f"{eid},jet,{text(f(e.Jet_pt[k]))},{text(f(e.Jet_eta[k]))},{text(f(e.Jet_phi[k]))},"
                       f"{text(mass(e.Jet_mass[k]))},{text(btag[k])},,{wt},,,")
        for k in range(len(e.FatJet_pt)):
            csv.append(f"{eid},fatjet,{text(f(e.FatJet_pt[k]))},{text(f(e.FatJet_eta[k]))},{text(f(e.FatJet_phi[k]))},"
                       f"{text(mass(e.FatJet_mass[k]))},,,{wt},,,")
        for kind, p in (("electron", "Electron"), ("muon", "Muon")):
            for k in range(len(e[f"{p}_pt"])):
                csv.append(f"{eid},{kind},{text(f(e[f'{p}_pt'][k]))},{text(f(e[f'{p}_eta'][k]))},"
                           f"{text(f(e[f'{p}_phi'][k]))},{text(mass(e[f'{p}_mass'][k]))},,"
                           f"{int(e[f'{p}_charge'][k])},{wt},,,")
        cov = events[-1]["met"]["cov"]
        csv.append(f"{eid},met,{text(f(e.MET_pt))},,{text(f(e.MET_phi))},,,,{wt},"
                   f"{text(cov[0])},{text(cov[1])},{text(cov[2])}")

    out = {
        "source": "CMS Open Data 2015 simulation, NanoAOD (scikit-hep-testdata nanoAOD_2015_CMS_Open_Data_ttbar.root), read with uproot",
        "uproot": uproot.__version__,
        "awkward": ak.__version__,
        "row_groups": groups,
        "events": events,
        "csv": "\n".join(csv) + "\n",
    }
    OUT.write_text(json.dumps(out, indent=1) + "\n")
    print(f"wrote {OUT} ({len(events)} events)")


if __name__ == "__main__":
    main()
