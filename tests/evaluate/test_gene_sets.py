"""Gene-set readers: both file layouts, and one-line errors naming file and line."""

import pytest

from strataweave import InputError
from strataweave.evaluate.gene_sets import read_gene_set_lines, read_gene_set_table


def test_read_two_column_table(tmp_path):
    path = tmp_path / "sets.tsv"
    path.write_text("set\tgene\nalpha\tGENA\nalpha\tGENB\nbeta\tGENA\nalpha\tGENA\n\n", encoding="utf-8")
    assert read_gene_set_table(path) == {"alpha": ["GENA", "GENB"], "beta": ["GENA"]}


def test_read_tab_separated_lines(tmp_path):
    path = tmp_path / "sets.txt"
    path.write_text("alpha\tfirst set\tGENA\tGENB\tGENA\n\nbeta\t\tGENC\n", encoding="utf-8")
    assert read_gene_set_lines(path) == {"alpha": ["GENA", "GENB"], "beta": ["GENC"]}


@pytest.mark.parametrize(
    ("reader", "text", "message"),
    [
        (read_gene_set_table, "name\tgene\n", r"sets.txt, line 1: no column 'set'"),
        (read_gene_set_table, "set\tgene\nalpha\tGENA\nbeta\n", r"sets.txt, line 3: found 'beta', expected a set name and a gene"),
        (read_gene_set_table, "", r"sets.txt: file is empty"),
        (read_gene_set_lines, "alpha\tdesc\tGENA\nbeta\tdesc\n", r"sets.txt, line 2: found 0 member\(s\) for set 'beta'"),
        (read_gene_set_lines, "alpha\tdesc\tGENA\nalpha\tdesc\tGENB\n", r"sets.txt, line 2: set 'alpha' appears again"),
    ],
)
def test_errors_name_file_and_line(tmp_path, reader, text, message):
    path = tmp_path / "sets.txt"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError, match=message):
        reader(path)


def test_unreadable_file_raises(tmp_path):
    with pytest.raises(InputError, match="absent.txt: cannot be read"):
        read_gene_set_lines(tmp_path / "absent.txt")
