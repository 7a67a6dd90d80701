"""Readings live from an instrument on a serial port (USB or RS-232), through pyserial.

An electronic level or autocollimator sends one line of text per reading (often at the
press of a button), e.g. ``"X:+0012.35 arcsec\\r\\n"``. :class:`SerialReadings` opens the port
(8 data bits, no parity, 1 stop bit), splits what arrives into lines at CR or LF, and
:func:`extract_reading` takes the reading out of a line with a regular expression: its
named group ``reading``, else its only group, else the whole match. The default pattern is
the first signed decimal number of the line.

If the port vanishes (a cable pulled, the adapter unplugged, the instrument switched off),
reading stops with :class:`InstrumentLost`, whose fix says how to resume; what was saved
stays saved. pyserial is imported only when a port is opened.
"""

from __future__ import annotations

import re
import time

from ..errors import FlatcheckError, InputValueError

__all__ = [
    "DEFAULT_READING_PATTERN",
    "InstrumentError",
    "InstrumentLost",
    "compile_reading_pattern",
    "extract_reading",
    "SerialReadings",
]

#: The first signed decimal number of a line (a decimal point or comma, an optional exponent).
DEFAULT_READING_PATTERN = r"[-+]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][-+]?\d+)?"


class InstrumentError(FlatcheckError, OSError):
    """A serial port that cannot be opened or read."""


class InstrumentLost(InstrumentError):
    """The serial port vanished or failed while readings were being taken."""


def compile_reading_pattern(text: str | None = None) -> re.Pattern:
    """The regular expression that finds the reading in a line.

    Parameters
    ----------
    text : str, optional
        A Python regular expression; with a named group ``reading`` or a single group, that
        group is the reading, else the whole match. Default :data:`DEFAULT_READING_PATTERN`.

    Raises
    ------
    InputValueError
        Not a valid regular expression, or several unnamed groups.
    """
    src = DEFAULT_READING_PATTERN if text is None else str(text)
    try:
        pat = re.compile(src)
    except re.error as exc:
        raise InputValueError(f"{src!r} is not a valid regular expression ({exc})", where="--regex",
                              fix=r"e.g. --regex 'X:(\S+)' takes what follows X:") from None
    if "reading" not in pat.groupindex and pat.groups > 1:
        raise InputValueError(
            f"{src!r} has {pat.groups} groups", where="--regex",
            fix="use one group around the reading, or name it (?P<reading>...)",
        )
    return pat


def extract_reading(line: str, pattern: re.Pattern, *, decimal: str = ".") -> float | None:
    """The reading in one line of the instrument's output, or None if the line holds none.

    Parameters
    ----------
    line : str
        One line as received (without its end-of-line characters).
    pattern : re.Pattern
        From :func:`compile_reading_pattern`.
    decimal : {".", ","}
        The decimal separator the instrument uses.

    Returns
    -------
    float or None
        None when the pattern does not match or the match is not a number (a status line).

    Examples
    --------
    >>> extract_reading("X:+0012.35 arcsec", compile_reading_pattern())
    12.35
    """
    m = pattern.search(line)
    if m is None:
        return None
    if "reading" in pattern.groupindex:
        text = m.group("reading")
    elif pattern.groups == 1:
        text = m.group(1)
    else:
        text = m.group(0)
    if text is None:
        return None
    t = text.strip().replace(" ", "")
    if decimal == ",":
        if "." in t:
            return None
        t = t.replace(",", ".")
    elif "," in t:
        return None
    try:
        v = float(t)
    except ValueError:
        return None
    return v if v == v and abs(v) != float("inf") else None


class SerialReadings:
    """Lines of text from a serial port.

    Parameters
    ----------
    port : str
        The port: ``/dev/ttyUSB0``, ``/dev/ttyACM0``, ``COM3``...
    baud : int
        Speed in bit/s (the instrument's setting).
    poll_s : float
        How long one read waits for data, s (keeps Ctrl-C and the idle timeout responsive).

    Raises
    ------
    InstrumentError
        pyserial is not installed, or the port cannot be opened.
    """

    def __init__(self, port: str, baud: int = 9600, *, poll_s: float = 0.2):
        try:
            import serial  # pyserial
        except ImportError:
            raise InstrumentError(
                "reading from a serial port needs pyserial, which is not installed", where="--port",
                fix="install it (python -m pip install pyserial)",
            ) from None
        self._serial = serial
        self.port = str(port)
        if int(baud) <= 0:
            raise InputValueError(f"the speed {baud} is not positive", where="--baud", fix="give e.g. --baud 9600")
        try:
            self._dev = serial.Serial(self.port, baudrate=int(baud), timeout=float(poll_s))
        except (serial.SerialException, OSError, ValueError) as exc:
            raise InstrumentError(
                f"cannot open the serial port {self.port}: {' '.join(str(exc).split())}", where="--port",
                fix="check the cable and the port name (ls /dev/ttyUSB* /dev/ttyACM* on Linux; COM3... on Windows) "
                "and that no other program holds the port",
            ) from None
        self._buffer = b""
        self.idle = False

    def close(self) -> None:
        """Close the port (safe to call twice)."""
        try:
            self._dev.close()
        except Exception:  # noqa: BLE001 - a vanished port may fail to close; nothing is lost
            pass

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
        return False

    def lines(self, *, idle_timeout_s: float | None = None, resume_fix=None, clock=time.monotonic):
        """Yield each line received (decoded, stripped; empty lines skipped).

        Parameters
        ----------
        idle_timeout_s : float, optional
            Stop (and set :attr:`idle`) after this many seconds without a line; None waits for ever.
        resume_fix : callable, optional
            Called when the port vanishes; returns the fix of the error (how to resume).
        clock : callable
            Monotonic clock in seconds (tests may replace it).

        Raises
        ------
        InstrumentLost
            The port failed or vanished.
        """
        serial = self._serial
        last = clock()
        while True:
            try:
                chunk = self._dev.read(max(1, getattr(self._dev, "in_waiting", 0) or 1))
            except (serial.SerialException, OSError) as exc:
                fix = resume_fix() if resume_fix is not None else "reconnect the instrument and start again"
                raise InstrumentLost(
                    f"the serial port {self.port} stopped answering ({' '.join(str(exc).split())})",
                    where=self.port, fix=fix,
                ) from None
            if chunk:
                self._buffer += chunk
                parts = re.split(rb"\r\n|\r|\n", self._buffer)
                self._buffer = parts.pop()
                for raw in parts:
                    text = raw.decode("ascii", errors="replace").strip()
                    if text:
                        last = clock()
                        yield text
            elif idle_timeout_s is not None and clock() - last > float(idle_timeout_s):
                self.idle = True
                return
