"""`acquire grr analyse`: CSV files read and refused, text and JSON output, pictures."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from acquire.cli import main
from acquire.errors import InputError
from acquire.msa.grr_data import read_grr_csv

HOSTILE = "[bold red]Eve[/] $x$ \x1b[31m"


def write_study(path: Path, header="part,operator,trial,value [uH]", drop=None, extra=None,
                names=("Ana", "Ben", HOSTILE)) -> Path:  # fmt: skip
    rng = np.random.default_rng(3)
    part = rng.normal(0, 2, 10)
    lines = ["# quantity: Ls@100kHz", header]
    for t in (1, 2, 3):
        for j, name in enumerate(names):
            for i in range(10):
                if drop == (i + 1, name, t):
                    continue
                v = 100 + part[i] + 0.2 * j + rng.normal(0, 0.3)
                quoted = '"' + name.replace('"', '""') + '"'
                lines.append(f"{i + 1},{quoted},{t},{v:.4f}")
    if extra:
        lines.append(extra)
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def test_csv_read_in_si_units(tmp_path: Path) -> None:
    data = read_grr_csv(write_study(tmp_path / "s.csv"))
    assert data.unit == "H" and data.quantity == "Ls@100kHz"
    assert data.value.size == 90 and 9e-5 < data.value.mean() < 1.1e-4
    assert HOSTILE in set(data.operator)


@pytest.mark.parametrize(
    ("kwargs", "words"),
    [
        ({"drop": (4, "Ben", 2)}, "unbalanced study: part 4, operator 'Ben' has no trial 2"),
        ({"header": "part,operator,value"}, "no column trial"),
        ({"header": "part,operator,trial,value,note"}, "column 'note' is not one of"),
        ({"extra": "1,Ana,4,nan"}, "not a finite number"),
        ({"extra": "1,Ana,4,inf"}, "not a finite number"),
        ({"extra": "1,Ana,1,100"}, "measured twice"),
        ({"extra": "x,Ana,1,100"}, "part 'x' is not a whole number"),
        ({"header": "part,operator,trial,value [furlong]"}, "unit 'furlong' is not understood"),
        ({"names": ("Ana",)}, "at least 2 operators (it has 1)"),
    ],
)
def test_csv_refusals(tmp_path: Path, kwargs, words: str) -> None:
    path = write_study(tmp_path / "bad.csv", **kwargs)
    with pytest.raises(InputError, match=None) as info:
        read_grr_csv(path)
    assert words in str(info.value)
    assert "\n" not in str(info.value)


def test_cli_refusal_is_one_line(tmp_path: Path, capsys) -> None:
    path = write_study(tmp_path / "bad.csv", drop=(1, "Ana", 1))
    assert main(["grr", "analyse", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("acquire grr: error: unbalanced study") and "\n" not in err


def test_a_missing_file_says_what_to_give(tmp_path: Path, capsys) -> None:
    assert main(["grr", "analyse", str(tmp_path / "missing.csv")]) == 2
    err = capsys.readouterr().err.strip()
    assert "missing.csv: no such file; give a CSV with the columns part,operator,trial,value" in err
    assert "Errno" not in err and "\n" not in err


def test_cli_text_keeps_hostile_names_as_text(tmp_path: Path, capsys) -> None:
    path = write_study(tmp_path / "s.csv")
    assert main(["grr", "analyse", str(path), "--tolerance", "20uH"]) == 0
    out = capsys.readouterr().out
    assert "[bold red]Eve[/] $x$ \\x1b[31m" in out and "\x1b" not in out
    assert "ANOVA with the part x operator interaction" in out
    assert "%GRR of total variation" in out and "common practice" in out
    assert "%GRR of tolerance (20.00 µH, 6σ spread)" in out


def test_cli_json_keys_and_tolerance_units(tmp_path: Path, capsys) -> None:
    path = write_study(tmp_path / "s.csv")
    assert main(["grr", "analyse", str(path), "--json"]) == 0
    plain = json.loads(capsys.readouterr().out)
    for key in ("repeatability", "reproducibility", "grr", "part_variation", "total_variation",
                "percent_grr_total", "percent_grr_tolerance", "ndc", "anova", "pooling",
                "average_range", "bands"):  # fmt: skip
        assert key in plain
    assert plain["percent_grr_tolerance"] is None
    assert plain["operators"] == ["Ana", "Ben", HOSTILE]
    assert plain["grr"] == pytest.approx(math.hypot(plain["repeatability"],
                                                    plain["reproducibility"]))  # fmt: skip
    assert main(["grr", "analyse", str(path), "--json", "--tolerance", "20uH"]) == 0
    with_units = json.loads(capsys.readouterr().out)
    assert main(["grr", "analyse", str(path), "--json", "--tolerance", "2e-5"]) == 0
    plain_number = json.loads(capsys.readouterr().out)
    expected = 100 * 6 * plain["grr"] / 20e-6
    assert with_units["percent_grr_tolerance"] == pytest.approx(expected)
    assert plain_number["percent_grr_tolerance"] == pytest.approx(expected)
    assert main(["grr", "analyse", str(path), "--json", "--tolerance", "20uH",
                 "--spread", "5.15"]) == 0  # fmt: skip
    older = json.loads(capsys.readouterr().out)
    assert older["percent_grr_tolerance"] == pytest.approx(expected * 5.15 / 6)


def test_cli_pictures_written(tmp_path: Path, capsys) -> None:
    path = write_study(tmp_path / "s.csv")
    folder = tmp_path / "pictures"
    assert main(["grr", "analyse", str(path), "--pictures", str(folder)]) == 0
    names = sorted(p.name for p in folder.iterdir())
    assert names == ["grr-average.png", "grr-by-operator.png", "grr-by-part.png",
                     "grr-components.png", "grr-range.png"]  # fmt: skip
    store = tmp_path / "results.db"
    store.write_bytes(b"")
    code = main(["grr", "analyse", str(path), "--store", f"sqlite:///{store}",
                 "--pictures", str(store)])  # fmt: skip
    assert code == 2 and "results store's own file" in capsys.readouterr().err


def test_cli_study_number_without_store(tmp_path: Path, capsys) -> None:
    missing = tmp_path / "none.db"
    assert main(["grr", "analyse", "7", "--store", f"sqlite:///{missing}"]) == 2
    assert "there is no results store" in capsys.readouterr().err
    assert main(["grr", "analyse", "study.txt"]) == 2
    assert "a file ending in .csv" in capsys.readouterr().err
