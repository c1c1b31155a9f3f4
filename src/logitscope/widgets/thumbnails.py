"""Sample previews for the gallery and the card: see :mod:`logitscope.thumbnails`, re-exported here.

The scaling of images into thumbnails lives in the neutral module
:mod:`logitscope.thumbnails`, which the HTML report uses too.
"""

from ..thumbnails import Thumbnail, ThumbnailCache, encode_png, snippet, to_uint8

__all__ = ["Thumbnail", "ThumbnailCache", "encode_png", "snippet", "to_uint8"]
