"""Sample previews: PNG thumbnails encoded on demand, and text snippets.

The one place where a sample's image becomes a thumbnail: the gallery, the
card and the HTML report all use it, so a digit looks the same in each. It
imports no widget code.

Images come from a frame's payload: an array ``(N, H, W)`` or ``(N, H, W, C)``
(C = 1, 3 or 4; uint8 as is, floats in [0, 1] scaled by 255, anything else
stretched from its own minimum to maximum) or image files opened with Pillow.
Small images (an 8 x 8 digit) are enlarged by a whole factor with
nearest-neighbour sampling, so every pixel stays a crisp square; large ones
are shrunk to fit. Only the rows a view shows are encoded, and the results
are kept in a small least-recently-used cache keyed by row.
"""

from __future__ import annotations

import io
import os
from collections import OrderedDict
from typing import Any, NamedTuple

import numpy as np

from .errors import ParameterError, ShapeError

__all__ = ["Thumbnail", "ThumbnailCache", "encode_png", "snippet", "to_uint8"]


class Thumbnail(NamedTuple):
    """A PNG preview (``png`` None and ``error`` set when the image could not be read)."""

    png: bytes | None
    width: int
    height: int
    error: str | None = None


def to_uint8(image: Any) -> np.ndarray:
    """One image as uint8 ``(H, W)`` or ``(H, W, C)``, ready for Pillow.

    uint8 passes unchanged; booleans map to 0 / 255; floats in [0, 1] are scaled
    by 255; other values are stretched linearly from the image's minimum to its
    maximum. NaN counts as 0. A trailing channel of size 1 is dropped.

    Examples
    --------
    >>> to_uint8(np.array([[0.0, 0.5], [1.0, 0.25]])).tolist()
    [[0, 128], [255, 64]]
    >>> to_uint8(np.array([[0, 1000], [500, 250]], dtype=np.int64)).tolist()
    [[0, 255], [128, 64]]
    """
    a = np.asarray(image)
    if a.ndim == 3 and a.shape[2] == 1:
        a = a[:, :, 0]
    if a.ndim not in (2, 3) or (a.ndim == 3 and a.shape[2] not in (3, 4)):
        raise ShapeError(f"an image must have shape (H, W) or (H, W, C) with C in 1, 3, 4; got {a.shape}")
    if a.dtype == np.uint8:
        return a
    if a.dtype == bool:
        return a.astype(np.uint8) * np.uint8(255)
    if a.dtype.kind not in "iuf":
        raise ShapeError(f"image values must be numbers, got dtype {a.dtype}")
    f = np.nan_to_num(a.astype(np.float64), nan=0.0, posinf=0.0, neginf=0.0)
    lo, hi = (float(f.min()), float(f.max())) if f.size else (0.0, 0.0)
    if a.dtype.kind == "f" and lo >= 0.0 and hi <= 1.0:
        scaled = f * 255.0
    elif a.dtype.kind in "iu" and lo >= 0 and hi <= 255:
        scaled = f
    elif hi > lo:
        scaled = (f - lo) * (255.0 / (hi - lo))
    else:
        scaled = np.zeros_like(f)
    return np.clip(np.round(scaled), 0, 255).astype(np.uint8)


def _fit(img: Any, size: int) -> Any:
    """Enlarge by a whole factor (nearest neighbour) or shrink (Lanczos) so the long side is about ``size``."""
    from PIL import Image

    w, h = img.size
    long_side = max(w, h, 1)
    if long_side < size:
        factor = max(1, size // long_side)
        if factor > 1:
            img = img.resize((w * factor, h * factor), Image.Resampling.NEAREST)
    elif long_side > size:
        img = img.copy()
        img.thumbnail((size, size), Image.Resampling.LANCZOS)
    return img


def _png(img: Any) -> bytes:
    buf = io.BytesIO()
    img.save(buf, format="PNG", optimize=False, compress_level=6)
    return buf.getvalue()


def encode_png(image: Any, size: int = 64) -> Thumbnail:
    """Encode one image array as a PNG thumbnail whose long side is about ``size`` pixels.

    Examples
    --------
    >>> t = encode_png(np.zeros((8, 8), dtype=np.uint8), size=64)
    >>> t.png[:8] == b"\\x89PNG\\r\\n\\x1a\\n", t.width, t.height
    (True, 64, 64)
    """
    from PIL import Image

    img = _fit(Image.fromarray(to_uint8(image)), size)
    return Thumbnail(_png(img), img.size[0], img.size[1])


def _open_file(path: str, size: int) -> Thumbnail:
    from PIL import Image, ImageOps, UnidentifiedImageError

    try:
        with Image.open(path) as src:
            if src.format == "JPEG":
                src.draft("RGB", (size * 2, size * 2))  # decode at a reduced scale: faster for photos
            im: Any = ImageOps.exif_transpose(src)
            if im.mode in ("I", "I;16", "I;16B", "I;16L", "F"):
                im = Image.fromarray(to_uint8(np.asarray(im)))
            elif im.mode == "P":
                im = im.convert("RGBA")
            elif im.mode not in ("L", "RGB", "RGBA"):
                im = im.convert("RGB")
            img = _fit(im, size)
            img.load()
    except FileNotFoundError:
        return Thumbnail(None, 0, 0, f"file not found: {path}")
    except (UnidentifiedImageError, OSError, ValueError) as exc:
        return Thumbnail(None, 0, 0, f"cannot read image {path}: {exc}")
    return Thumbnail(_png(img), img.size[0], img.size[1])


def snippet(text: str, limit: int = 160) -> str:
    """The start of a text, whitespace collapsed, cut at a word boundary near ``limit`` characters.

    Examples
    --------
    >>> snippet("printer   on floor 3\\nis jammed again", 18)
    'printer on floor…'
    >>> snippet("short")
    'short'
    """
    flat = " ".join(str(text).split())
    if len(flat) <= limit:
        return flat
    cut = flat[:limit]
    space = cut.rfind(" ")
    if space > limit * 0.6:
        cut = cut[:space]
    return cut.rstrip() + "…"


class ThumbnailCache:
    """PNG thumbnails of a frame's image payload, encoded on first use, least recently used dropped.

    Parameters
    ----------
    payload : logitscope.Payload or None
        The frame's payload; only kinds ``images`` and ``image_paths`` give thumbnails.
    size : int, default 64
        Long side of a thumbnail in pixels (small images are enlarged by a whole factor).
    max_items : int, default 512
        How many thumbnails to keep.

    Examples
    --------
    >>> import logitscope
    >>> frame = logitscope.load_demo("mailroom")
    >>> cache = ThumbnailCache(frame.payload, size=64)
    >>> cache.get(0).width, cache.get(0).height, cache.misses, cache.hits
    (64, 64, 1, 1)
    """

    def __init__(self, payload: Any, size: int = 64, max_items: int = 512) -> None:
        if int(size) < 1 or int(max_items) < 1:
            raise ParameterError(f"size and max_items must be positive, got {size} and {max_items}")
        self.payload = payload
        self.size = int(size)
        self.max_items = int(max_items)
        self._items: OrderedDict[int, Thumbnail] = OrderedDict()
        self.hits = 0
        self.misses = 0

    @property
    def has_images(self) -> bool:
        """Whether the payload holds images (an array or file paths)."""
        return self.payload is not None and self.payload.kind in ("images", "image_paths")

    def __len__(self) -> int:
        return len(self._items)

    def get(self, row: int) -> Thumbnail | None:
        """The thumbnail of ``row``, or None when the payload holds no images."""
        if not self.has_images:
            return None
        row = int(row)
        hit = self._items.get(row)
        if hit is not None:
            self.hits += 1
            self._items.move_to_end(row)
            return hit
        self.misses += 1
        if self.payload.kind == "images":
            thumb = encode_png(self.payload.data[row], self.size)
        else:
            thumb = _open_file(os.fspath(self.payload.data[row]), self.size)
        self._items[row] = thumb
        while len(self._items) > self.max_items:
            self._items.popitem(last=False)
        return thumb
