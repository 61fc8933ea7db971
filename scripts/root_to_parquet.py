#!/usr/bin/env python3
"""Converts a ROOT ntuple (a flat TTree with jagged branches, such as NanoAOD's
`Events`) into quarry's per-event Parquet layout: one row per event, one list
column per jagged branch (`Jet_pt` as list<float32>, ...), scalar branches as
scalar columns (`nJet`, `MET_pt`, `event`, ...). quarry reads the result with
a column map (`quarry reco events.parquet --columns nanoaod`).

Why a script and not a ROOT reader inside quarry: no Rust ROOT reader read
this project's real NanoAOD test file as `uproot` does (see README, "ROOT
ntuples"), and writing a ROOT decoder is out of scope. `uproot` (PyPI) reads
the file, `awkward` holds the jagged arrays, `pyarrow` writes Parquet; the
versions are pinned in tests/reference/requirements.txt.

Memory stays bounded: the tree is read `--step` events at a time and each
step becomes one Parquet row group.

    python scripts/root_to_parquet.py in.root out.parquet            # quarry's default branches
    python scripts/root_to_parquet.py in.root out.parquet --all      # every branch
    python scripts/root_to_parquet.py in.root out.parquet --tree Events --step 100000 \
        --branches 'Jet_*' 'nJet' 'MET_*' event genWeight
"""

import argparse
import fnmatch
import os
import sys

import awkward as ak
import pyarrow as pa
import pyarrow.parquet as pq
import uproot

# The branches quarry's shipped `nanoaod` column map and the tests use, as
# glob patterns: object kinematics, b-tag scores, charges, counts, MET and its
# covariance, event id and generator weight.
DEFAULT_BRANCHES = [
    "run", "luminosityBlock", "event", "genWeight",
    "nJet", "Jet_pt", "Jet_eta", "Jet_phi", "Jet_mass",
    "Jet_btagDeepFlavB", "Jet_btagDeepB", "Jet_btagCSVV2",
    "nFatJet", "FatJet_pt", "FatJet_eta", "FatJet_phi", "FatJet_mass",
    "nElectron", "Electron_pt", "Electron_eta", "Electron_phi", "Electron_mass", "Electron_charge",
    "nMuon", "Muon_pt", "Muon_eta", "Muon_phi", "Muon_mass", "Muon_charge",
    "MET_pt", "MET_phi", "MET_covXX", "MET_covXY", "MET_covYY",
]


def select_branches(tree, patterns, take_all):
    names = list(tree.keys())
    if take_all:
        return names
    chosen = [n for n in names if any(fnmatch.fnmatchcase(n, p) for p in patterns)]
    if not chosen:
        raise SystemExit(f"no branch of the tree matches {patterns}")
    return chosen


def convert(root_path, parquet_path, tree_name="Events", branches=None, take_all=False,
            step=100_000, compression="zstd"):
    """Writes `parquet_path` (atomically: a hidden temporary file renamed into
    place) and returns the number of events written."""
    tree = uproot.open(root_path)[tree_name]
    chosen = select_branches(tree, branches or DEFAULT_BRANCHES, take_all)
    directory, base = os.path.split(os.path.abspath(parquet_path))
    temporary = os.path.join(directory, f".{base}.tmp")
    writer = None
    events = 0
    try:
        for chunk in tree.iterate(chosen, step_size=step, library="ak"):
            # Plain Arrow types (list<float32>, uint32, ...), no awkward
            # extension metadata, so any Parquet reader sees ordinary columns.
            table = ak.to_arrow_table(chunk, extensionarray=False, list_to32=True)
            if writer is None:
                writer = pq.ParquetWriter(temporary, table.schema, compression=compression)
            writer.write_table(table, row_group_size=step)
            events += len(chunk)
        if writer is None:
            raise SystemExit(f"{root_path}: tree '{tree_name}' has no events")
        writer.close()
        writer = None
        os.replace(temporary, parquet_path)
    finally:
        if writer is not None:
            writer.close()
        if os.path.exists(temporary):
            os.remove(temporary)
    return events


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("input", help="ROOT file")
    p.add_argument("output", help="Parquet file to write")
    p.add_argument("--tree", default="Events", help="TTree name (default: Events)")
    p.add_argument("--branches", nargs="+", help="glob patterns of branches to keep (default: quarry's list)")
    p.add_argument("--all", action="store_true", help="keep every branch")
    p.add_argument("--step", type=int, default=100_000, help="events per row group (default: 100000)")
    a = p.parse_args(argv)
    n = convert(a.input, a.output, a.tree, a.branches, a.all, a.step)
    print(f"{a.output}: {n} events", file=sys.stderr)


if __name__ == "__main__":
    main()
