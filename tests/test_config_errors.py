"""Sweep-file validation: every bad config gives one clear line, good ones expand as documented.

Source: common practice for input validation (one message per problem, the
key path, the bad value and what is allowed); the message template is
``codebench.errors.not_allowed``.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from codebench.config import Sweep, load_sweep, parse_rounds, parse_sweep
from codebench.errors import ConfigError
from codebench.records import DEFAULT_BATCH_BYTES, Point, Stopping

REPO = Path(__file__).resolve().parent.parent
#: A shipped example device as a TOML string (JSON string escapes are valid TOML basic-string escapes).
EXAMPLE_DEVICE = json.dumps(str(REPO / "configs" / "devices" / "larkspur_current.toml"))

TOP = 'name = "check"\nseed = 5\n'

STUDY = {
    "code": '"repetition"',
    "distances": "[3, 5]",
    "rounds": '"d"',
    "noise": '"circuit_depolarizing"',
    "p": "[0.001, 0.01]",
    "decoders": '["mwpm"]',
}


def study(**changes: str | None) -> str:
    """A ``[[study]]`` block: the valid base with keys replaced, added, or removed (None)."""
    keys = dict(STUDY)
    for key, value in changes.items():
        if value is None:
            keys.pop(key, None)
        else:
            keys[key] = value
    return "[[study]]\n" + "".join(f"{k} = {v}\n" for k, v in keys.items())


def sweep_text(top: str = TOP, *blocks: str) -> str:
    """A whole sweep file: top-level lines, then the given blocks (a valid study if none)."""
    return top + "\n" + "\n".join(blocks or (study(),))


# (id, file text, fragments the message must contain: key path first)
BAD: list[tuple[str, str, list[str]]] = [
    ("unknown top key", sweep_text(TOP + 'colour = "red"\n'),
     ["colour is not a known key", "allowed keys: name, seed, stopping, engine, cluster, study."]),
    ("study key typo", sweep_text(TOP, study(distances=None, distanse="[3]")),
     ["study[0].distanse is not a known key", "allowed keys: code, distances, rounds"]),
    ("distances wrong type", sweep_text(TOP, study(distances='"3"')),
     ["study[0].distances", "'3'", "a non-empty list of integers"]),
    ("distances empty", sweep_text(TOP, study(distances="[]")),
     ["study[0].distances", "[]", "a non-empty list of integers"]),
    ("p above 0.5 for circuit_depolarizing", sweep_text(TOP, study(p="[0.01, 1.5]")),
     ["study[0].p[1]", "1.5", "a number in [0, 0.5] for circuit_depolarizing"]),
    ("p above 0.1 for si1000", sweep_text(TOP, study(noise='"si1000"', p="[0.2]")),
     ["study[0].p[0]", "0.2", "a number in [0, 0.1] for si1000"]),
    ("p negative", sweep_text(TOP, study(p="[-0.001]")),
     ["study[0].p[0]", "-0.001", "a number in [0, 0.5]"]),
    ("p bool", sweep_text(TOP, study(p="[true]")),
     ["study[0].p[0]", "True", "a number in [0, 0.5]"]),
    ("p string", sweep_text(TOP, study(p='"0.01"')),
     ["study[0].p", "'0.01'", "geomspace = [low, high, count]"]),
    ("even rotated_surface distance", sweep_text(TOP, study(code='"rotated_surface"', distances="[3, 4]")),
     ["study[0].distances[1]", "4", "an odd integer >= 3 for rotated_surface"]),
    ("repetition distance 1", sweep_text(TOP, study(distances="[1]")),
     ["study[0].distances[0]", "1", "an integer >= 2 for repetition"]),
    ("float distance", sweep_text(TOP, study(distances="[3.0]")),
     ["study[0].distances[0]", "3.0", "an integer"]),
    ("bool distance", sweep_text(TOP, study(distances="[true]")),
     ["study[0].distances[0]", "True", "an integer"]),
    ("unknown code", sweep_text(TOP, study(code='"toric"')),
     ["study[0].code", "'toric'", "one of 'repetition', 'rotated_surface'"]),
    ("unknown noise", sweep_text(TOP, study(noise='"thermal"')),
     ["study[0].noise", "'thermal'", "'circuit_depolarizing'", "'si1000'", "'device'"]),
    ("device noise without device", sweep_text(TOP, study(noise='"device"', p=None)),
     ["study[0].device is required", "the path of a device file"]),
    ("p with device noise", sweep_text(TOP, study(noise='"device"', device='"dev.toml"')),
     ["study[0].p is not used with noise = 'device'", "scale = [...]"]),
    ("noise_options with device noise",
     sweep_text(TOP, study(noise='"device"', p=None, device='"dev.toml"', noise_options='{ a = "b" }')),
     ["study[0].noise_options is not used with noise = 'device'"]),
    ("scale without device noise", sweep_text(TOP, study(scale="[0.5]")),
     ["study[0].scale is not used with noise = 'circuit_depolarizing'", "only with noise = 'device'"]),
    ("device without device noise", sweep_text(TOP, study(device='"configs/devices/x.toml"')),
     ["study[0].device is not used with noise = 'circuit_depolarizing'", "only with noise = 'device'"]),
    ("missing device file", sweep_text(TOP, study(noise='"device"', p=None, device='"nowhere.toml"')),
     ["study[0].device", "'nowhere.toml'", "an existing device file"]),
    ("device path not a string", sweep_text(TOP, study(noise='"device"', p=None, device="3")),
     ["study[0].device", "3", "the path of a device file"]),
    ("scale above p_max", sweep_text(TOP, study(noise='"device"', p=None, device=EXAMPLE_DEVICE, scale="[0.5, 101]")),
     ["study[0].scale[1]", "101", "a number in [0, 100] for device"]),
    ("scale negative", sweep_text(TOP, study(noise='"device"', p=None, device=EXAMPLE_DEVICE, scale="[-0.5]")),
     ["study[0].scale[0]", "-0.5", "a number in [0, 100] for device"]),
    ("unknown decoder", sweep_text(TOP, study(decoders='["mwpm", "guesswork"]')),
     ["study[0].decoders[1]", "'guesswork'", "'mwpm'"]),
    ("decoders empty", sweep_text(TOP, study(decoders="[]")),
     ["study[0].decoders", "[]", "a non-empty list of names from 'mwpm'"]),
    ("missing study key", sweep_text(TOP, study(rounds=None)),
     ["study[0].rounds is required", "a multiple of d such as 'd' or '2d'"]),
    ("missing seed", sweep_text('name = "check"\n'),
     ["seed is required", "an integer in [0, 2**63 - 1]"]),
    ("missing study", 'name = "check"\nseed = 5\n',
     ["study is required", "[[study]]"]),
    ("empty study array", 'name = "check"\nseed = 5\nstudy = []\n',
     ["study must be", "[]", "a non-empty array of tables"]),
    ("rounds dd", sweep_text(TOP, study(rounds='"dd"')),
     ["study[0].rounds", "'dd'", "a multiple of d such as 'd' or '2d'"]),
    ("rounds 0d", sweep_text(TOP, study(rounds='"0d"')),
     ["study[0].rounds", "'0d'", "a multiple of d"]),
    ("rounds zero", sweep_text(TOP, study(rounds="0")),
     ["study[0].rounds", "0", "a positive integer"]),
    ("rounds list with zero", sweep_text(TOP, study(rounds="[3, 0]")),
     ["study[0].rounds[1]", "0", "a positive integer"]),
    ("rounds float", sweep_text(TOP, study(rounds="2.5")),
     ["study[0].rounds", "2.5", "a positive integer"]),
    ("basis Y", sweep_text(TOP, study(basis='"Y"')),
     ["study[0].basis", "'Y'", "one of 'Z', 'X'"]),
    ("basis list with Y", sweep_text(TOP, study(basis='["Z", "Y"]')),
     ["study[0].basis[1]", "'Y'", "one of 'Z', 'X'"]),
    ("geomspace count 0", sweep_text(TOP, study(p="{ geomspace = [0.001, 0.01, 0] }")),
     ["study[0].p.geomspace[2]", "0", "an integer in [1, 10,000]"]),
    ("geomspace low above high", sweep_text(TOP, study(p="{ geomspace = [0.01, 0.001, 3] }")),
     ["study[0].p.geomspace[1]", "0.001", "low <= high"]),
    ("geomspace low zero", sweep_text(TOP, study(p="{ geomspace = [0, 0.01, 3] }")),
     ["study[0].p.geomspace[0]", "0", "a number > 0"]),
    ("geomspace high above p_max", sweep_text(TOP, study(noise='"si1000"', p="{ geomspace = [0.01, 0.3, 3] }")),
     ["study[0].p.geomspace[1]", "0.3", "0.1"]),
    ("geomspace two entries", sweep_text(TOP, study(p="{ geomspace = [0.001, 0.01] }")),
     ["study[0].p.geomspace", "[0.001, 0.01]", "[low, high, count]"]),
    ("geomspace float count", sweep_text(TOP, study(p="{ geomspace = [0.001, 0.01, 3.0] }")),
     ["study[0].p.geomspace[2]", "3.0", "an integer in [1, 10,000]"]),
    ("p table typo", sweep_text(TOP, study(p="{ geomspac = [0.001, 0.01, 3] }")),
     ["study[0].p.geomspac is not a known key", "allowed keys: geomspace."]),
    ("negative seed", sweep_text('name = "check"\nseed = -1\n'),
     ["seed", "-1", "an integer in [0, 2**63 - 1]"]),
    ("seed too large", sweep_text('name = "check"\nseed = 9223372036854775808\n'),
     ["seed", "9223372036854775808", "an integer in [0, 2**63 - 1]"]),
    ("seed bool", sweep_text('name = "check"\nseed = true\n'),
     ["seed", "True", "an integer"]),
    ("seed string", sweep_text('name = "check"\nseed = "5"\n'),
     ["seed", "'5'", "an integer"]),
    ("bad name", sweep_text('name = "../up"\nseed = 5\n'),
     ["name", "'../up'", "[A-Za-z0-9][A-Za-z0-9_.-]*"]),
    ("shot_budget 0", sweep_text(TOP + "[stopping]\nshot_budget = 0\n"),
     ["stopping.shot_budget", "0", "an integer >= 1"]),
    ("shot_budget not a whole number", sweep_text(TOP + "[stopping]\nshot_budget = 1500.5\n"),
     ["stopping.shot_budget", "1500.5", "an integer >= 1"]),
    ("failure_target bool", sweep_text(TOP + "[stopping]\nfailure_target = true\n"),
     ["stopping.failure_target", "True", "an integer >= 1"]),
    ("failure_target fraction", sweep_text(TOP + "[stopping]\nfailure_target = 100.5\n"),
     ["stopping.failure_target", "100.5", "an integer >= 1"]),
    ("relative_precision 1.5", sweep_text(TOP + "[stopping]\nrelative_precision = 1.5\n"),
     ["stopping.relative_precision", "1.5", "a number in (0, 1)"]),
    ("stopping typo", sweep_text(TOP + "[stopping]\nshots = 10\n"),
     ["stopping.shots is not a known key", "allowed keys: failure_target, shot_budget, relative_precision."]),
    ("stopping not a table", sweep_text(TOP + "stopping = 5\n"),
     ["stopping", "5", "a table"]),
    ("batch_bytes too small", sweep_text(TOP + "[engine]\nbatch_bytes = 100\n"),
     ["engine.batch_bytes", "100", "an integer >= 1024"]),
    ("noise option value", sweep_text(TOP, study(noise='"code_capacity"', noise_options='{ data_errors = "erase" }')),
     ["study[0].noise_options.data_errors", "'erase'", "one of 'flip', 'depolarize' for code_capacity"]),
    ("noise option key", sweep_text(TOP, study(noise_options='{ data_errors = "flip" }')),
     ["study[0].noise_options.data_errors is not a known key", "allowed keys: (none)."]),
    ("label not a string", sweep_text(TOP, study(label="3")),
     ["study[0].label", "3", "a non-empty string"]),
    ("duplicate label", sweep_text(TOP, study(label='"a"'), study(label='"a"')),
     ["study[1].label", "'a'", "a label no earlier study uses"]),
    ("error in second study", sweep_text(TOP, study(), study(distances="[3, 5, 0]")),
     ["study[1].distances[2]", "0", "an integer >= 2"]),
]


@pytest.mark.parametrize(("text", "fragments"), [c[1:] for c in BAD], ids=[c[0] for c in BAD])
def test_load_sweep_rejects(tmp_path: Path, text: str, fragments: list[str]) -> None:
    """A bad sweep file raises ConfigError: one line, the source first, then path, value and allowed text."""
    cfg = tmp_path / "sweep.toml"
    cfg.write_text(text)
    with pytest.raises(ConfigError) as info:
        load_sweep(cfg)
    message = str(info.value)
    assert "\n" not in message
    assert message.startswith(f"{cfg}: {fragments[0]}")
    for fragment in fragments:
        assert fragment in message


@pytest.mark.parametrize(("text", "fragments"), [c[1:] for c in BAD], ids=[c[0] for c in BAD])
def test_cli_rejects(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], text: str, fragments: list[str]
) -> None:
    """The command line exits 2 with exactly one stderr line naming the key path, and writes nothing."""
    cli = pytest.importorskip("codebench.cli")
    cfg = tmp_path / "sweep.toml"
    cfg.write_text(text)
    out = tmp_path / "out"
    assert cli.main(["sweep", str(cfg), "--out", str(out)]) == 2
    lines = [line for line in capsys.readouterr().err.splitlines() if line.strip()]
    assert len(lines) == 1
    assert fragments[0] in lines[0]
    assert "Traceback" not in lines[0]
    assert not out.exists()


def test_malformed_toml(tmp_path: Path) -> None:
    """Text that is not TOML is reported with the file and tomllib's own reason, on one line."""
    cfg = tmp_path / "broken.toml"
    cfg.write_text('name = "check"\nseed = \n')
    with pytest.raises(ConfigError) as info:
        load_sweep(cfg)
    message = str(info.value)
    assert message.startswith(f"{cfg}: not valid TOML: ")
    assert "line 2" in message
    assert "\n" not in message


def test_not_utf8(tmp_path: Path) -> None:
    """Bytes that are not UTF-8 are reported as not valid TOML, not as a UnicodeDecodeError."""
    cfg = tmp_path / "latin.toml"
    cfg.write_bytes(b'name = "caf\xe9"\n')
    with pytest.raises(ConfigError, match="not valid TOML"):
        load_sweep(cfg)


def test_missing_file(tmp_path: Path) -> None:
    """A path that does not exist is a ConfigError naming it."""
    cfg = tmp_path / "nowhere.toml"
    with pytest.raises(ConfigError) as info:
        load_sweep(cfg)
    assert str(info.value) == f"sweep file {str(cfg)!r} does not exist."


def test_directory(tmp_path: Path) -> None:
    """A directory given as the sweep file is a ConfigError naming it."""
    with pytest.raises(ConfigError, match="is a directory"):
        load_sweep(tmp_path)


@pytest.mark.parametrize("kind", ["malformed", "missing"])
def test_cli_file_problems(tmp_path: Path, capsys: pytest.CaptureFixture[str], kind: str) -> None:
    """Malformed and missing sweep files also give exit status 2 and one stderr line naming the file."""
    cli = pytest.importorskip("codebench.cli")
    cfg = tmp_path / "sweep.toml"
    if kind == "malformed":
        cfg.write_text("name = = 1\n")
    out = tmp_path / "out"
    assert cli.main(["sweep", str(cfg), "--out", str(out)]) == 2
    lines = [line for line in capsys.readouterr().err.splitlines() if line.strip()]
    assert len(lines) == 1
    assert "sweep.toml" in lines[0]
    assert not out.exists()


def test_parse_sweep_uses_source_and_rejects_non_table() -> None:
    """parse_sweep puts its source in front of messages; a non-table sweep is rejected."""
    with pytest.raises(ConfigError, match=r"^<dict>: seed is required"):
        parse_sweep({"name": "x"})
    with pytest.raises(ConfigError, match=r"^here: the sweep must be a table"):
        parse_sweep([1, 2], source="here")  # type: ignore[arg-type]


def test_parse_rounds_forms() -> None:
    """Rounds may be an int, a list of ints, or 'd', 'kd' multiplied by the distance."""
    assert parse_rounds(4, 5, "r") == [4]
    assert parse_rounds([2, 7], 5, "r") == [2, 7]
    assert parse_rounds("d", 5, "r") == [5]
    assert parse_rounds("1d", 5, "r") == [5]
    assert parse_rounds("3d", 5, "r") == [15]
    for bad in ("dd", "0d", "2 d", "d2", "", [], [1.5], True, None):
        with pytest.raises(ConfigError, match=r"^r(\[0\])? must be"):
            parse_rounds(bad, 5, "r")


def test_valid_grid_count_and_order(tmp_path: Path) -> None:
    """A valid file expands study by study, then distance, rounds, basis, p, decoder."""
    text = sweep_text(
        TOP + "[stopping]\nfailure_target = 50\nshot_budget = 20_000\nrelative_precision = 0.2\n"
        "[engine]\nbatch_bytes = 4096\n",
        study(distances="[3, 5]", rounds="[2, 4]", basis='["Z", "X"]', p="[0.001, 0.01]",
              decoders='["mwpm", "mwpm_correlated"]', label='"first"'),
        study(code='"rotated_surface"', distances="[3]", noise='"si1000"', p="[0.002]"),
    )
    cfg = tmp_path / "grid.toml"
    cfg.write_text(text)
    sweep = load_sweep(cfg)
    assert sweep.name == "check" and sweep.seed == 5
    assert sweep.stopping == Stopping(failure_target=50, shot_budget=20_000, relative_precision=0.2)
    assert sweep.batch_bytes == 4096
    assert sweep.source == str(cfg) and sweep.source_text == text
    assert len(sweep.points) == 2 * 2 * 2 * 2 * 2 + 1
    expected = [
        (d, r, b, p, dec)
        for d in (3, 5) for r in (2, 4) for b in ("Z", "X") for p in (0.001, 0.01)
        for dec in ("mwpm", "mwpm_correlated")
    ]
    first = [(pt.distance, pt.rounds, pt.basis, pt.p, pt.decoder) for pt in sweep.points[:-1]]
    assert first == expected
    assert {pt.study for pt in sweep.points[:-1]} == {"first"}
    last = sweep.points[-1]
    assert (last.code, last.distance, last.rounds, last.noise, last.study) == ("rotated_surface", 3, 3, "si1000", "1")


def test_counts_written_as_whole_floats_are_accepted(tmp_path: Path) -> None:
    # 1e6 is how people write a million; a float with an integer value is that integer.
    cfg = tmp_path / "floats.toml"
    cfg.write_text(sweep_text(TOP + "[stopping]\nfailure_target = 2e2\nshot_budget = 1e6\n", study()))
    sweep = load_sweep(cfg)
    assert sweep.stopping == Stopping(failure_target=200, shot_budget=1_000_000, relative_precision=None)


def test_rounds_multiple_of_d_per_distance() -> None:
    """rounds = "2d" gives 2*d rounds at each distance."""
    sweep = parse_sweep({
        "name": "r", "seed": 1,
        "study": [{"code": "repetition", "distances": [3, 5, 9], "rounds": "2d",
                   "noise": "phenomenological", "p": [0.01], "decoders": ["mwpm"]}],
    })
    assert [(pt.distance, pt.rounds) for pt in sweep.points] == [(3, 6), (5, 10), (9, 18)]


def test_geomspace_expansion() -> None:
    """A geomspace table expands with numpy.geomspace, each value rounded to 12 significant digits."""
    sweep = parse_sweep({
        "name": "g", "seed": 1,
        "study": [{"code": "repetition", "distances": [3], "rounds": 3, "noise": "circuit_depolarizing",
                   "p": {"geomspace": [0.001, 0.1, 5]}, "decoders": ["mwpm"]}],
    })
    rates = [pt.p for pt in sweep.points]
    assert rates == [float(f"{v:.12g}") for v in np.geomspace(0.001, 0.1, 5)]
    assert rates[0] == 0.001 and rates[2] == 0.01 and rates[-1] == 0.1
    assert all(len(repr(p).replace("0.", "").lstrip("0")) <= 12 for p in rates)


def test_defaults_filled() -> None:
    """Optional keys get their documented defaults, and noise options are filled in."""
    sweep = parse_sweep({
        "name": "defaults", "seed": 0,
        "study": [{"code": "repetition", "distances": [3], "rounds": 2, "noise": "code_capacity",
                   "p": [0, 0.05], "decoders": ["mwpm"]}],
    })
    assert isinstance(sweep, Sweep)
    assert sweep.stopping == Stopping(failure_target=200, shot_budget=1_000_000, relative_precision=None)
    assert sweep.batch_bytes == DEFAULT_BATCH_BYTES
    assert sweep.source == "<dict>" and sweep.source_text == ""
    assert sweep.output_dir_default == Path("results") / "defaults"
    assert [pt.p for pt in sweep.points] == [0.0, 0.05]
    for pt in sweep.points:
        assert pt.basis == "Z"
        assert pt.study == "0"
        assert pt.noise_options == (("data_errors", "flip"),)
        assert isinstance(pt.p, float)


def test_chosen_noise_option_kept() -> None:
    """An allowed noise option value is stored on the point."""
    sweep = parse_sweep({
        "name": "opt", "seed": 0,
        "study": [{"code": "repetition", "distances": [3], "rounds": 1, "noise": "code_capacity",
                   "noise_options": {"data_errors": "depolarize"}, "p": [0.01], "decoders": ["mwpm"]}],
    })
    assert sweep.points[0].noise_options == (("data_errors", "depolarize"),)


def test_duplicate_point_across_studies_once() -> None:
    """A point an earlier study already produced is not repeated; it keeps the first study's label."""
    base = {"code": "repetition", "rounds": "d", "noise": "circuit_depolarizing", "decoders": ["mwpm"]}
    sweep = parse_sweep({
        "name": "dup", "seed": 3,
        "study": [
            {**base, "distances": [3, 5], "p": [0.01], "label": "a"},
            {**base, "distances": [5, 7], "p": [0.01, 0.02], "label": "b"},
        ],
    })
    got = [(pt.distance, pt.p, pt.study) for pt in sweep.points]
    assert got == [(3, 0.01, "a"), (5, 0.01, "a"), (5, 0.02, "b"), (7, 0.01, "b"), (7, 0.02, "b")]
    assert len(set(sweep.points)) == len(sweep.points)
    same = Point("repetition", 5, 5, "Z", "circuit_depolarizing", 0.01, "mwpm", study="b")
    assert sweep.points.count(same) == 1


def test_demo_config_loads() -> None:
    """The shipped demo sweep, if present, is valid."""
    demo = REPO / "configs" / "demo.toml"
    if not demo.exists():
        pytest.skip("configs/demo.toml not written yet")
    sweep = load_sweep(demo)
    assert sweep.points
