"""Where the anywidget ES modules live, and how a view loads one.

The modules are kept in the repository's top-level ``js/`` folder. An
installed wheel carries them as ``logitscope/js`` (pyproject force-includes
the folder); an editable install reads them from ``<repo>/js``. An anywidget
module is one file, so the DOM helpers they share (``js/shared.js``) are put
before each module's own text.
"""

from __future__ import annotations

from pathlib import Path

from ..errors import FileFormatError

__all__ = ["SHARED", "esm", "js_dir"]

#: The helpers every module uses, put before its text by :func:`esm`.
SHARED = "shared.js"


def js_dir() -> Path:
    """The folder holding the ES modules: ``logitscope/js`` when installed, else ``<repo>/js``.

    Examples
    --------
    >>> (js_dir() / "gallery.js").is_file()
    True
    """
    installed = Path(__file__).resolve().parents[1] / "js"
    if installed.is_dir():
        return installed
    return Path(__file__).resolve().parents[3] / "js"


def esm(name: str) -> str:
    """The text of the ES module ``name`` (e.g. ``"gallery.js"``), after the shared helpers.

    Raises
    ------
    FileFormatError
        When the module is not where the package expects it.

    Examples
    --------
    >>> text = esm("gallery.js")
    >>> "export default" in text, text.count("function short(")
    (True, 1)
    """
    return _read(SHARED) + "\n" + _read(name)


def _read(name: str) -> str:
    path = js_dir() / name
    try:
        return path.read_text(encoding="utf-8")
    except OSError as exc:
        raise FileFormatError(
            f"the widget module {name!r} is missing: looked for {path} (is the package installed completely?)"
        ) from exc
