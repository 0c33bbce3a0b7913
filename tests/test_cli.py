"""The command line: one-line errors with exit 2 for bad input, an example in every --help."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent / "workflow"))
from workflow_files import MINIMAL, write_tiny_files  # noqa: E402

from strataweave.cli import EXAMPLES, build_parser, main  # noqa: E402

MALFORMED = [
    # (what the file says, the key the error must name)
    (MINIMAL.replace("[cohort]", "[cohrt]"), "cohrt"),
    (MINIMAL.replace('clinical = "clinical.tsv"', 'clinical = "no_such_file.tsv"'), "cohort.clinical"),
    (MINIMAL.replace('clinical = "clinical.tsv"', 'clinical = "clinical.tsv"\nid_colum = "x"'), "cohort.id_colum"),
    (MINIMAL.replace('clinical = "clinical.tsv"', 'clinical = "clinical.tsv"\ntime_column = "os"'), "cohort.event_column"),
    (MINIMAL.replace('kind = "log_expression"', 'kind = "rnaseq"'), "modality[rna].kind"),
    (MINIMAL.replace('kind = "log_expression"', 'kind = "counts"\norientation = "rows"'), "modality[rna].orientation"),
    (MINIMAL.replace('name = "rna"\n', ""), "modality[1].name"),
    (MINIMAL.replace('kind = "log_expression"', 'kind = "counts"\nweight = -1'), "modality[rna].weight"),
    (MINIMAL + '\n[[modality]]\nname = "rna"\npath = "rna.tsv"\nkind = "counts"\n', "modality[2].name"),
    (MINIMAL + "\n[graph]\nn_neighbours = 2.5\n", "graph.n_neighbours"),
    (MINIMAL + '\n[graph]\nrule = "quorum"\n', "graph.quorum"),
    (MINIMAL + "\n[subtypes]\ncounts = [1, 3]\n", "subtypes.counts"),
    (MINIMAL + "\n[subtypes]\ncounts = [2, 3]\nuse_count = 4\n", "subtypes.use_count"),
    (MINIMAL + "\n[resampling]\nfraction = 0\n", "resampling.fraction"),
    (MINIMAL + '\n[resampling]\nbackend = "cluster"\n', "resampling.backend"),
    (MINIMAL + '\n[resampling]\nscheduler = "tcp://127.0.0.1:8786"\n', "resampling.scheduler"),
    (MINIMAL + '\n[evaluation]\ncovariates = "age"\n', "evaluation.covariates"),
    (MINIMAL + '\n[report]\nformats = ["html", "docx"]\n', "report.formats"),
    (MINIMAL + "\nseed = -4\n", "seed"),
    (MINIMAL + "\n[factorization]\ngraph_weight = \"high\"\n", "factorization.graph_weight"),
    ("[cohort\nclinical = 1\n", "line 1"),
    ('[[modality]]\nname = "rna"\npath = "rna.tsv"\nkind = "counts"\n', "cohort"),
]


@pytest.mark.parametrize("text, key", MALFORMED, ids=[key for _, key in MALFORMED])
def test_malformed_workflow_gives_one_line_naming_the_key_and_exit_2(tmp_path, capsys, text, key) -> None:
    write_tiny_files(tmp_path)
    (tmp_path / "flow.toml").write_text(text)
    assert main(["check", str(tmp_path / "flow.toml")]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1, captured.err
    assert key in lines[0] and "Traceback" not in lines[0]


@pytest.mark.parametrize("verb", sorted(EXAMPLES))
def test_every_verb_has_help_with_an_example(capsys, verb) -> None:
    assert main([verb, "--help"]) == 0
    out = capsys.readouterr().out
    assert "example:" in out and EXAMPLES[verb] in " ".join(out.split())


@pytest.mark.parametrize(
    "argv",
    [
        ["run"],
        ["fly", "x.toml"],
        ["run", "x.toml", "--jobs", "0"],
        ["assign", "run", "--modality", "rna"],
        ["run", "x.toml", "--quiet", "--verbose"],
    ],
)
def test_bad_arguments_exit_2_with_one_line(capsys, argv) -> None:
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "error" in err[0]


@pytest.mark.parametrize(
    ("argv", "quiet", "verbose"),
    [
        (["-q", "check", "x.toml"], True, False),
        (["check", "x.toml", "--quiet"], True, False),
        (["-v", "check", "x.toml"], False, True),
        (["check", "x.toml"], False, False),
    ],
)
def test_loudness_holds_before_or_after_the_verb(argv, quiet, verbose) -> None:
    args = build_parser().parse_args(argv)
    assert (args.quiet, args.verbose) == (quiet, verbose)


def test_missing_workflow_file_is_bad_input(tmp_path, capsys) -> None:
    assert main(["run", str(tmp_path / "absent.toml"), "--out", str(tmp_path / "out")]) == 2
    assert "workflow file not found" in capsys.readouterr().err
    assert not (tmp_path / "out").exists()


def test_a_program_fault_exits_1_without_traceback_unless_verbose(tmp_path, capsys, monkeypatch) -> None:
    from strataweave.workflow import commands

    def broken(args, argv, feedback):
        raise ZeroDivisionError("division by zero")

    monkeypatch.setattr(commands, "check_command", broken)
    assert main(["check", "x.toml"]) == 1
    err = capsys.readouterr().err
    assert "internal error: ZeroDivisionError" in err and "Traceback" not in err
    assert main(["check", "x.toml", "--verbose"]) == 1
    assert "Traceback" in capsys.readouterr().err


def test_check_reads_the_inputs_and_prints_qc(tmp_path, capsys) -> None:
    write_tiny_files(tmp_path)
    before = (tmp_path / "rna.tsv").read_bytes()
    assert main(["check", str(tmp_path / "flow.toml")]) == 0
    out = capsys.readouterr().out
    assert "flow.toml: valid; 6 patients" in out
    assert "rna" in out and "log_expression" in out
    assert (tmp_path / "rna.tsv").read_bytes() == before  # inputs are never modified


def test_check_names_a_clinical_column_that_is_absent(tmp_path, capsys) -> None:
    write_tiny_files(tmp_path)
    text = MINIMAL.replace('clinical = "clinical.tsv"', 'clinical = "clinical.tsv"\ntime_column = "os"\nevent_column = "os_event"')
    (tmp_path / "flow.toml").write_text(text)
    assert main(["check", str(tmp_path / "flow.toml")]) == 2
    assert "'cohort.time_column'" in capsys.readouterr().err


@pytest.mark.parametrize(("cell", "column"), [("soon", "os_months"), ("-3", "os_months"), ("2", "os_event")])
def test_check_refuses_a_survival_cell_before_any_work(tmp_path, capsys, cell, column) -> None:
    write_tiny_files(tmp_path)
    clinical = tmp_path / "clinical.tsv"
    lines = clinical.read_text().splitlines()
    header = lines[0].split("\t")
    row = lines[3].split("\t")
    row[header.index(column)] = cell
    clinical.write_text("\n".join([*lines[:3], "\t".join(row), *lines[4:]]) + "\n")
    text = MINIMAL.replace('clinical = "clinical.tsv"', 'clinical = "clinical.tsv"\ntime_column = "os_months"\nevent_column = "os_event"')
    (tmp_path / "flow.toml").write_text(text)
    assert main(["check", str(tmp_path / "flow.toml")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "clinical.tsv" in err[0] and "'P2'" in err[0] and repr(column) in err[0]


def test_run_refuses_a_folder_that_is_not_a_run_folder(tmp_path, capsys) -> None:
    write_tiny_files(tmp_path)
    (tmp_path / "out").mkdir()
    (tmp_path / "out" / "notes.txt").write_text("mine")
    assert main(["run", str(tmp_path / "flow.toml"), "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "no run manifest" in err[0]
    assert [p.name for p in (tmp_path / "out").iterdir()] == ["notes.txt"]


@pytest.mark.parametrize("verb", [["assign", "{run}", "--modality", "rna=x.tsv"], ["report", "{run}"],
                                  ["compare", "{run}", "{run}"]])
def test_verbs_that_read_a_run_refuse_other_folders(tmp_path, capsys, verb) -> None:
    assert main([word.format(run=tmp_path) for word in verb]) == 2
    assert "no run manifest" in capsys.readouterr().err


def test_synth_writes_a_cohort_that_check_accepts(tmp_path, capsys) -> None:
    assert main(["synth", str(tmp_path / "cohort"), "--patients", "120", "--seed", "5", "--quiet"]) == 0
    names = sorted(p.name for p in (tmp_path / "cohort").iterdir())
    assert {"clinical.tsv", "planted_subtypes.tsv", "gene_sets.tsv"} <= set(names)
    (tmp_path / "flow.toml").write_text(
        '[cohort]\nclinical = "cohort/clinical.tsv"\n[[modality]]\nname = "protein"\n'
        'path = "cohort/protein_abundance.tsv"\nkind = "abundance"\n'
    )
    assert main(["check", str(tmp_path / "flow.toml")]) == 0
    assert "120 patients" in capsys.readouterr().out


def test_evaluate_refuses_groups_that_name_no_analysis_patient(tmp_path, capsys) -> None:
    write_tiny_files(tmp_path)
    (tmp_path / "groups.tsv").write_text("patient_id\tgroup\nX1\tA\nX2\tB\n")
    argv = ["evaluate", str(tmp_path / "flow.toml"), "--groups", str(tmp_path / "groups.tsv"),
            "--out", str(tmp_path / "out"), "--quiet"]
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--groups: found 0 group(s) among the 6 analysis patients" in err[0]
