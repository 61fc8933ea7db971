"""Reference values for crates/pdg: the PDG mass/width table shipped in the
`particle` package (PyPI, scikit-hep).

The `particle` package ships the Particle Data Group's machine-readable
"masses, widths, and MC ID numbers" file of the Review of Particle Physics
(RPP). This script finds the file the package loads, reads its edition from
its first line, and takes the decimal texts of each needed mass and width
with their uncertainties straight from the fixed-width lines (in GeV, as the
file gives them), so the fixture holds exactly the table's numbers. It also
checks them against `particle.Particle` (which converts to MeV) as a guard
against misreading the columns.

Run from the repository root:  python tests/reference/pdg_constants.py
Writes tests/reference/fixtures/pdg_constants.json (deterministic).
"""

import json
import re
from importlib import resources

import particle
from particle import Particle

# PDG Monte Carlo ids (RPP "Monte Carlo particle numbering scheme").
WANTED = {
    "W": 24,
    "Z": 23,
    "H": 25,
    "top": 6,
    "bottom": 5,
    "electron": 11,
    "muon": 13,
    "tau": 15,
}


def table_file():
    names = sorted(
        p.name
        for p in resources.files("particle.data").iterdir()
        if re.fullmatch(r"mass_width_\d{4}\.txt", p.name)
    )
    return resources.files("particle.data") / names[-1]


def field(line, start, end):
    """1-based inclusive columns, as the file's header describes them."""
    return line[start - 1 : end].strip()


def main():
    path = table_file()
    text = path.read_text()
    first = text.splitlines()[0]
    edition = re.search(r"FROM (\d{4}) EDITION OF RPP", first)
    assert edition, first
    rows = {}
    for line in text.splitlines():
        if line.startswith("*") or not line.strip():
            continue
        ids = [int(x) for x in line[:32].split()]
        for name, pid in WANTED.items():
            if pid in ids:
                rows[name] = line
    out = {
        "source": "PDG Review of Particle Physics mass/width table, as shipped in the "
        "`particle` package (PyPI)",
        "particle_version": particle.__version__,
        "table_file": path.name,
        "table_header": first.strip(),
        "edition": int(edition.group(1)),
        "unit": "GeV",
        "particles": {},
    }
    for name, pid in WANTED.items():
        line = rows[name]
        entry = {
            "pdgid": pid,
            "mass": float(field(line, 34, 51)),
            "mass_err_plus": float(field(line, 53, 60)),
            "mass_err_minus": abs(float(field(line, 62, 69))),
        }
        width = field(line, 71, 88)
        if width:
            entry["width"] = float(width)
            entry["width_err_plus"] = float(field(line, 90, 97))
            entry["width_err_minus"] = abs(float(field(line, 99, 106)))
        # Cross-check with the package's own parsed table (MeV).
        p = Particle.from_pdgid(pid)
        assert abs(p.mass / 1000.0 - entry["mass"]) <= 1e-12 * entry["mass"], (name, p.mass)
        if "width" in entry and p.width:
            assert abs(p.width / 1000.0 - entry["width"]) <= 1e-12 * entry["width"], name
        out["particles"][name] = entry
    dest = "tests/reference/fixtures/pdg_constants.json"
    with open(dest, "w") as f:
        json.dump(out, f, indent=1, sort_keys=True)
        f.write("\n")
    print(f"wrote {dest}: {first.strip()}")


if __name__ == "__main__":
    main()
