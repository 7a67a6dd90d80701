"""Shared test configuration.

The hypothesis profile is deterministic by default (derandomised, no example
database) so that CI runs are repeatable; set FLATCHECK_HYPOTHESIS=random to
explore with fresh random examples.
"""

import os

import numpy as np
import pytest
from hypothesis import HealthCheck, settings

settings.register_profile(
    "deterministic",
    derandomize=True,
    database=None,
    deadline=None,
    max_examples=60,
    suppress_health_check=[HealthCheck.too_slow],
)
settings.register_profile("random", deadline=None, max_examples=200)
settings.load_profile("random" if os.environ.get("FLATCHECK_HYPOTHESIS") == "random" else "deterministic")


@pytest.fixture
def rng():
    """A seeded random generator (seed 1234) for reproducible synthetic data."""
    return np.random.default_rng(1234)


def render_pdf_pages(pdf, out_dir=None, dpi=30):
    """Render every page of a PDF (pypdfium2, no system tools); returns the pages as RGB arrays.

    With ``out_dir`` each page is also written there as ``page-NN.png`` (to look at) and the paths are
    returned instead.
    """
    import pypdfium2

    doc = pypdfium2.PdfDocument(str(pdf))
    try:
        images = [doc[i].render(scale=dpi / 72.0, rev_byteorder=True).to_numpy()[..., :3].astype(float) / 255.0
                  for i in range(len(doc))]
    finally:
        doc.close()
    if out_dir is None:
        return images
    from matplotlib.image import imsave

    paths = []
    for i, img in enumerate(images, start=1):
        paths.append(os.path.join(str(out_dir), f"page-{i:02d}.png"))
        imsave(paths[-1], img)
    return paths


def pdf_text(pdf):
    """The text of every page of a PDF (pypdfium2), pages joined by form feeds, lines by newlines."""
    import pypdfium2

    doc = pypdfium2.PdfDocument(str(pdf))
    try:
        pages = [doc[i].get_textpage().get_text_range().replace("\r\n", "\n").replace("\r", "\n")
                 for i in range(len(doc))]
    finally:
        doc.close()
    return "\f".join(pages)


@pytest.fixture(scope="session")
def pdf_tools():
    """``(render_pdf_pages, pdf_text)``: read a PDF back in tests with nothing but Python packages."""
    return render_pdf_pages, pdf_text


@pytest.fixture
def cli(capsys):
    """Run the command line in-process; returns ``(exit_code, stdout, stderr)``."""
    from flatcheck.cli.main import run

    def _run(*argv):
        code = run([str(a) for a in argv])
        out, err = capsys.readouterr()
        return code, out, err

    return _run


#: Longest a single refusal may take in the sweeps of bad input (seconds): each is found before any real work.
SWEEP_TIME_LIMIT_S = 20.0


@pytest.fixture
def cli_limited(cli):
    """Run the command line in-process under :data:`SWEEP_TIME_LIMIT_S`: ``(exit_code, stdout, stderr)``, or
    None when it gave no answer in time (a hang; the thread is left blocked as a daemon and the caller reports it)."""
    import threading

    def _run(*argv):
        box = {}

        def run():
            try:
                box["result"] = cli(*argv)
            except BaseException as exc:  # noqa: BLE001 - raised in the caller's thread below
                box["error"] = exc

        t = threading.Thread(target=run, daemon=True)
        t.start()
        t.join(SWEEP_TIME_LIMIT_S)
        if t.is_alive():
            return None
        if "error" in box:
            raise box["error"]
        return box["result"]

    return _run


def _refusal_problems(code, out, err, words) -> list:
    """What is wrong with a refusal of bad input (empty when it is right): exit 2, one ``flatcheck: error:``
    line on stderr containing ``words`` (case-insensitive), no traceback or internal error, no leaked warning."""
    problems = []
    if code != 2:
        problems.append(f"exit {code}")
    if len(err.splitlines()) != 1 or not err.startswith("flatcheck: error: ") or not err.endswith("\n"):
        problems.append(f"stderr is not one error line: {err[:300]!r}")
    if "Traceback" in err or "Traceback" in out or "internal error" in err:
        problems.append("internal error")
    if "Warning" in err:
        problems.append("a warning leaked")
    missing = [w for w in words if w.lower() not in err.lower()]
    if missing:
        problems.append(f"does not say {missing}: {err.strip()[:300]!r}")
    return problems


@pytest.fixture
def refusal_problems():
    """The check every sweep of bad input applies to each refusal (:func:`_refusal_problems`)."""
    return _refusal_problems


@pytest.fixture
def one_line_error():
    """Assert that a command refused bad input as it must (:func:`_refusal_problems`: exit 2, one
    ``flatcheck: error:`` line, no traceback or leaked warning), and that the line holds each of ``words``
    exactly as written; ``quiet=True`` also asserts that nothing went to standard output. Returns the line."""

    def check(code, err, *words, out="", quiet=False):
        problems = _refusal_problems(code, out, err, ())
        assert not problems, problems
        assert not quiet or out == "", out[:300]
        for w in words:
            assert w in err, (w, err)
        return err.strip()

    return check
