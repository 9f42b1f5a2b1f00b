"""``synthcorona`` itself (synthcorona.cli.main): the emissivity table of a run, and the one-line errors."""
import os
import pathlib
import shutil

import pytest
from astropy.table import QTable

from synthcorona.cli import build_parser, main
from synthcorona.emissivity import load_emissivity
from synthcorona.settings import TABLE_ENV

SCENARIO = str(pathlib.Path(__file__).parent.parent.parent / "examples" / "scenarios" / "sun_as_a_star_euv.toml")


@pytest.fixture(scope="module")
def table_copy(tmp_path_factory):
    """A copy of the embedded table under another name (same content, so the same numbers)."""
    copy = tmp_path_factory.mktemp("tables") / "my_table.nc"
    shutil.copyfile(load_emissivity().path, copy)
    return copy


def test_environment_selects_the_default_table(tmp_path, monkeypatch, table_copy):
    monkeypatch.setenv(TABLE_ENV, str(table_copy))
    assert load_emissivity().path.resolve() == table_copy.resolve()
    monkeypatch.setenv(TABLE_ENV, str(tmp_path / "absent.nc"))
    with pytest.raises(Exception, match="SYNTHCORONA_TABLE=.*absent.nc: no such emissivity table file"):
        load_emissivity()


def test_table_option_is_passed_down_and_leaves_the_environment_alone(tmp_path, monkeypatch, capsys, table_copy):
    monkeypatch.delenv(TABLE_ENV, raising=False)
    rc = main(["spectrum", SCENARIO, "--table", str(tmp_path / "absent.nc"), "--out", str(tmp_path / "o")])
    err = capsys.readouterr().err
    assert rc == 2 and "--table" in err and "absent.nc" in err and "Traceback" not in err
    before = dict(os.environ)
    assert main(["spectrum", SCENARIO, "--table", str(table_copy), "--out", str(tmp_path / "o"), "--no-figures"]) == 0
    written = QTable.read(tmp_path / "o" / "band_fluxes.ecsv")
    assert written.meta["table"] == str(table_copy.resolve())      # the run used the given table ...
    assert dict(os.environ) == before and TABLE_ENV not in os.environ  # ... and never touched the environment


def test_environment_still_selects_the_table_without_the_option(tmp_path, monkeypatch, table_copy):
    monkeypatch.setenv(TABLE_ENV, str(table_copy))
    assert main(["spectrum", SCENARIO, "--out", str(tmp_path / "o"), "--no-figures"]) == 0
    assert QTable.read(tmp_path / "o" / "band_fluxes.ecsv").meta["table"] == str(table_copy.resolve())


def test_every_subcommand_writes_to_out():
    # one option name for the output of every subcommand that writes files
    parser = build_parser()
    sub = next(a for a in parser._actions if a.dest == "command")
    for name in ("forecast", "spectrum", "cycle", "emission", "build-table"):
        opts = {o for a in sub.choices[name]._actions for o in a.option_strings}
        assert "--out" in opts and "--output" not in opts and "-o" not in opts, name


def _subparsers():
    parser = build_parser()
    return next(a for a in parser._actions if a.dest == "command").choices


def test_folder_writing_subcommands_default_to_their_name_plus_out():
    # one rule for the default output folder: <subcommand>_out
    for name, sp in _subparsers().items():
        out = next((a for a in sp._actions if "--out" in a.option_strings), None)
        if out is None or name == "build-table":      # build-table writes one file: --out FILE is required
            continue
        assert out.default == f"{name}_out", name


def test_help_texts_are_plain_text():
    # what --help shows carries no reStructuredText markup (the descriptions are not module docstrings)
    markup = ("``", ":func:", ":mod:", ":class:", ":data:", ":meth:", ":math:", ":doc:", ".. ")
    texts = {"synthcorona": build_parser().format_help()}
    texts.update({name: sp.format_help() for name, sp in _subparsers().items()})
    for name, text in texts.items():
        for m in markup:
            assert m not in text, (name, m)


def test_list_help_names_every_choice(capsys):
    from synthcorona.cli.list_items import WHAT

    with pytest.raises(SystemExit):
        main(["list", "--help"])
    text = capsys.readouterr().out
    assert set(WHAT) == {"instruments", "bands", "abundances", "dems", "table", "all"}
    for choice, what in WHAT.items():
        assert f"  {choice} " in text and what.split()[1] in text, choice
