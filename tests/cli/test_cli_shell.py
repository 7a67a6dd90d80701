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
