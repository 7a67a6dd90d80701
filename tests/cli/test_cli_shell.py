"""The command-line shell: usage errors are one line with exit code 2."""


def test_unknown_command(cli):
    code, out, err = cli("no-such-command")
    assert code == 2
    assert err.count("\n") == 1 and err.startswith("flatcheck: error: No such command")
    assert "Traceback" not in err


def test_unknown_option(cli):
    code, out, err = cli("units", "--nope")
    assert code == 2 and "No such option: --nope" in err and err.count("\n") == 1


def test_units_table(cli):
    code, out, err = cli("units")
    assert code == 0 and "arcsec" in out and "mm/m" in out


def test_help_fits_an_80_column_terminal_without_cutting_option_names(cli, monkeypatch):
    # A narrow terminal must still show every option's full name: rich cuts a name that does not fit
    # its column with an ellipsis, and a cut name cannot be typed.
    monkeypatch.setenv("COLUMNS", "80")
    for command in ("plan", "reduce", "grade", "bearing", "lap", "compare", "report", "demo", "units"):
        code, out, err = cli(command, "--help")
        assert code == 0, (command, err)
        assert "--help" in out and "…" not in out, command
        assert max(len(line) for line in out.splitlines()) <= 80, command
