"""Photographs (PNG, JPEG, TIFF) read as grey pictures, through Pillow.

A colour picture is turned to grey by the luma weights of ITU-R BT.601 (0.299 R + 0.587 G +
0.114 B, the weights Pillow itself uses); a pixel is *saturated* when any of its channels is at
full scale. 8- and 16-bit pictures are accepted; the orientation a camera writes in the EXIF data
is applied, so the picture is read as it is seen. Size is bounded, and errors are one line.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputFormatError, InputValueError

__all__ = ["GreyPicture", "read_picture", "MAX_PICTURE_PIXELS", "PICTURE_FORMATS"]

#: Largest picture read (a 50-megapixel camera); bigger files are refused before decoding.
MAX_PICTURE_PIXELS = 50_000_000
PICTURE_FORMATS = ("PNG", "JPEG", "MPO", "TIFF")  # MPO: the JPEG variant some cameras write
_LUMA = np.array([0.299, 0.587, 0.114])  # ITU-R BT.601 luma weights


@dataclass(frozen=True)
class GreyPicture:
    """A photograph as a grey picture.

    Attributes
    ----------
    intensity : ndarray, shape (ny, nx)
        Grey level 0..1 of full scale, row 0 at the top.
    saturated : ndarray of bool, shape (ny, nx)
        Pixels with a channel at full scale.
    bits : int
        8 or 16.
    mode : str
        Pillow's mode of the file (``"L"``, ``"RGB"``, ``"I;16"`` ...).
    format : str
        ``"PNG"``, ``"JPEG"`` or ``"TIFF"``.
    """

    intensity: np.ndarray
    saturated: np.ndarray
    bits: int
    mode: str
    format: str

    @property
    def width(self) -> int:
        """Width in pixels."""
        return int(self.intensity.shape[1])

    @property
    def height(self) -> int:
        """Height in pixels."""
        return int(self.intensity.shape[0])


def read_picture(path, *, max_pixels: int = MAX_PICTURE_PIXELS, option: str | None = None) -> GreyPicture:
    """Read a PNG, JPEG or TIFF photograph as a grey picture.

    Parameters
    ----------
    path : str or Path
        The file.
    max_pixels : int
        Largest number of pixels accepted.
    option : str, optional
        The command-line option that named the file (``"--mask"``), put before the file in messages.

    Returns
    -------
    GreyPicture

    Raises
    ------
    InputFormatError
        Missing, empty or unreadable file; not a PNG, JPEG or TIFF; a damaged picture; a kind of
        pixel without a full scale (floating point).
    InputValueError
        A picture larger than ``max_pixels``.
    """
    import warnings

    from PIL import Image, ImageOps, UnidentifiedImageError

    from ._text import open_regular

    path = Path(path)
    label = f"{option} {path}" if option else str(path)
    try:  # a regular file only (a FIFO or a device would never end), bounded in size, readable
        fh, _size = open_regular(path, wanted="a PNG, JPEG or TIFF photograph")
    except InputFormatError as exc:
        raise InputFormatError(exc.message, where=f"{option} {exc.where}" if option else exc.where,
                               fix=exc.fix) from None
    wanted = "give the photograph as PNG, JPEG or TIFF"
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error", Image.DecompressionBombWarning)
            with fh, Image.open(fh) as im:
                if im.format not in PICTURE_FORMATS:
                    raise InputFormatError(f"a {im.format} picture, not PNG, JPEG or TIFF", where=label, fix=wanted)
                w, h = im.size
                if w * h > max_pixels:
                    raise InputValueError(
                        f"the picture is {w} x {h} pixels, more than {max_pixels // 1_000_000} megapixels",
                        where=label,
                        fix="crop the photograph to the part or scale it down",
                    )
                fmt = im.format
                seen = ImageOps.exif_transpose(im)  # as the camera was held
                if seen.mode in ("1", "P", "PA", "CMYK", "LAB", "HSV", "YCbCr"):
                    seen = seen.convert("RGB")
                mode = seen.mode
                arr = np.asarray(seen)
    except (InputFormatError, InputValueError):
        raise
    except UnidentifiedImageError:
        raise InputFormatError("not a picture Pillow can read", where=label, fix=wanted) from None
    except (Image.DecompressionBombError, Image.DecompressionBombWarning):
        raise InputValueError(
            "the picture is too large to decode safely", where=label, fix="crop the photograph to the part"
        ) from None
    except (OSError, SyntaxError, ValueError) as exc:
        raise InputFormatError(f"the picture is damaged or cut short ({' '.join(str(exc).split())})",
                               where=label, fix="export the photograph again") from None
    return _to_grey(arr, mode, fmt, label)


def _to_grey(arr: np.ndarray, mode: str, fmt: str, label: str) -> GreyPicture:
    if arr.dtype.kind == "f":
        raise InputFormatError(
            "a floating-point picture has no full scale to judge saturation by",
            where=label,
            fix="save the photograph as an 8- or 16-bit picture",
        )
    if arr.dtype == np.uint8:
        bits, full = 8, 255
    elif arr.dtype.kind in "ui" and arr.max(initial=0) <= 65535 and arr.min(initial=0) >= 0:
        bits, full = 16, 65535
    else:
        raise InputFormatError(f"pixels of kind {arr.dtype} ({mode})", where=label, fix="save as an 8- or 16-bit picture")
    a = arr.astype(float)
    if a.ndim == 3:
        channels = a[..., :3] if a.shape[2] >= 3 else a[..., :1]
        sat = (channels >= full).any(axis=2)
        grey = channels @ _LUMA if channels.shape[2] == 3 else channels[..., 0]
    else:
        sat = a >= full
        grey = a
    return GreyPicture(grey / full, sat, bits, mode, fmt)
