"""Where the anywidget ES modules live, and how a view loads one.

The modules are kept in the repository's top-level ``js/`` folder. An
installed wheel carries them as ``logitscope/js`` (pyproject force-includes
the folder); an editable install reads them from ``<repo>/js``.
"""

from __future__ import annotations

from pathlib import Path

from ..errors import FileFormatError

__all__ = ["esm", "js_dir"]


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
    """The text of the ES module ``name`` (e.g. ``"gallery.js"``).

    Raises
    ------
    FileFormatError
        When the module is not where the package expects it.

    Examples
    --------
    >>> "export default" in esm("gallery.js")
    True
    """
    path = js_dir() / name
    try:
        return path.read_text(encoding="utf-8")
    except OSError as exc:
        raise FileFormatError(
            f"the widget module {name!r} is missing: looked for {path} (is the package installed completely?)"
        ) from exc
