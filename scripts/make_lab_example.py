"""Make the lab example of results/examples/lab/: records of the fictional Aster-17 that depart from its file.

The "measured" records are simulated: stim samples the d = 3 rotated-surface memory experiment of
configs/devices/larkspur_current.toml with three departures the calibration file does not know (data
qubit a4 ten times noisier, measure qubit m1's readout five times worse, a correlated error
E(0.03) X(m0) X(m7) before the measurement of round 1). Written into the example folder: the program and
description (``codebench qasm``), the records (b8) and the sweep file of the simulated twin.

    .venv/bin/python scripts/make_lab_example.py [--shots 50000] [--out results/examples/lab]
"""

from __future__ import annotations

import argparse
from pathlib import Path

from codebench.cli import main
from codebench.lab.shots import write_records
from codebench.lab.synthetic import Perturbation, perturbed_circuit, sample_records
from codebench.qasm import load_description

ROOT = Path(__file__).resolve().parents[1]
DEVICE = ROOT / "configs" / "devices" / "larkspur_current.toml"
CHANGE = Perturbation(noisier_qubit="a4", worse_readout="m1", correlated=("m0", "m7"), correlated_p=0.03)
SEED = 20261203

SWEEP = """# The simulated twin of the lab example: the same experiment under the calibration file's model.
name = "aster17_lab"
seed = 20261203

[stopping]
failure_target = 2000
shot_budget = 200_000

[[study]]
label = "model"
code = "rotated_surface"
distances = [3, 5]
rounds = 3
basis = ["Z"]
noise = "device"
device = "../../../configs/devices/larkspur_current.toml"
decoders = ["mwpm"]
"""


def run(shots: int, out: Path) -> None:
    out.mkdir(parents=True, exist_ok=True)
    program = out / "experiment.qasm"
    status = main(["qasm", "--device", str(DEVICE), "--code", "rotated_surface", "--distance", "3", "--rounds", "3",
                   "--out", str(program)])
    if status:
        raise SystemExit(status)
    point = load_description(program.with_suffix(".json")).point
    records = sample_records(perturbed_circuit(point, CHANGE), shots, SEED)
    write_records(out / "shots.b8", records)
    (out / "sweep.toml").write_text(SWEEP)
    print(f"wrote {out / 'shots.b8'} ({shots:,} shots of {records.shape[1]} bits) and {out / 'sweep.toml'}")


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--shots", type=int, default=50_000)
    parser.add_argument("--out", type=Path, default=ROOT / "results" / "examples" / "lab")
    args = parser.parse_args()
    run(args.shots, args.out)
