"""Demo data in scenarios of our own (for demos and examples only).

- *Mail room*: a sorting office reads handwritten postcode digits. Images are
  scikit-learn's bundled 8 x 8 digits (Alpaydin and Kaynak, UCI); a few
  labels are deliberately flipped, as a tired keyer might, and the logits are
  out-of-fold outputs of a multinomial logistic regression.
- *Help desk*: invented support tickets routed to teams by a TF-IDF model.

Both are bundled with the package as ``.npz`` files built by the functions
here (no download); :func:`load_demo` reads them.
"""

from __future__ import annotations

import os
from importlib import resources
from pathlib import Path
from typing import Literal

import numpy as np
import pandas as pd

from .frame import LogitFrame

__all__ = ["DEMO_NAMES", "load_demo", "make_helpdesk_tickets", "make_mailroom_digits"]

DEMO_NAMES = ("mailroom", "helpdesk")
_FILES = {"mailroom": "mailroom_digits.npz", "helpdesk": "helpdesk_tickets.npz"}
DIGIT_NAMES = ("zero", "one", "two", "three", "four", "five", "six", "seven", "eight", "nine")


def load_demo(name: Literal["mailroom", "helpdesk"] = "mailroom") -> LogitFrame:
    """Load a bundled demo frame.

    Examples
    --------
    >>> f = load_demo("mailroom")
    >>> f.n_classes, f.payload.kind
    (10, 'images')
    """
    if name not in _FILES:
        from .errors import ParameterError

        raise ParameterError(f"unknown demo {name!r}; choose one of {', '.join(DEMO_NAMES)}")
    with resources.as_file(resources.files("logitscope") / "data" / _FILES[name]) as path:
        return LogitFrame.read(path)


def make_mailroom_digits(n_flips: int = 36, seed: int = 7, folds: int = 5) -> LogitFrame:
    """Build the mail-room frame: out-of-fold logits on the digits data with flipped labels.

    The metadata records the sorting desk that keyed each card (invented),
    whether its label was flipped, and the label before the flip.
    """
    from sklearn.datasets import load_digits
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import StratifiedKFold, cross_val_predict
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    digits = load_digits()
    x, y_true = digits.data, digits.target
    rng = np.random.default_rng(seed)
    n = y_true.shape[0]
    flipped = rng.choice(n, size=n_flips, replace=False)
    y = y_true.copy()
    # a keyer's slip: a look-alike digit, else any other digit
    lookalike = {1: 7, 7: 1, 3: 8, 8: 3, 5: 6, 6: 5, 4: 9, 9: 4, 0: 6, 2: 7}
    for i in flipped:
        y[i] = lookalike[int(y[i])] if rng.random() < 0.7 else int((y[i] + rng.integers(1, 10)) % 10)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.05, max_iter=2000))
    cv = StratifiedKFold(n_splits=folds, shuffle=True, random_state=seed)
    z = cross_val_predict(model, x, y, cv=cv, method="decision_function")
    desks = np.array(["north desk", "south desk", "night shift"])[rng.integers(0, 3, n)]
    is_flip = np.zeros(n, dtype=bool)
    is_flip[flipped] = True
    meta = pd.DataFrame({"desk": desks, "was_flipped": is_flip, "keyed_before_flip": y_true})
    ids = np.array([f"card-{i:05d}" for i in range(n)])
    images = (digits.images * (255.0 / 16.0)).round().astype(np.uint8)
    return LogitFrame(z.astype(np.float32), labels=y, classes=list(DIGIT_NAMES), ids=ids, meta=meta, images=images)


_TEAMS = ("billing", "password reset", "hardware", "shipping", "account closure")
_PHRASES = {
    "billing": [
        "charged twice",
        "invoice total is wrong",
        "refund for last month",
        "card was billed",
        "update payment method",
        "tax on my invoice",
    ],
    "password reset": [
        "cannot log in",
        "forgot my password",
        "reset link expired",
        "locked out of account",
        "two-factor code not arriving",
        "password rejected",
    ],
    "hardware": [
        "laptop will not boot",
        "screen flickers",
        "keyboard keys stuck",
        "printer jams",
        "docking station not detected",
        "battery drains fast",
    ],
    "shipping": [
        "parcel has not arrived",
        "tracking number invalid",
        "wrong address on label",
        "package arrived damaged",
        "delivery date moved",
        "courier left no note",
    ],
    "account closure": [
        "close my account",
        "delete my data",
        "cancel subscription",
        "remove my profile",
        "stop all emails and close",
        "end my membership",
    ],
}
_FILLER = [
    "hello team",
    "please help",
    "urgent",
    "thanks in advance",
    "since yesterday",
    "again today",
    "this is the third time",
    "my order 4471",
    "from the mobile app",
    "on the website",
]


def make_helpdesk_tickets(n: int = 1200, seed: int = 11, n_flips: int = 30) -> LogitFrame:
    """Build the help-desk frame: invented tickets routed by a TF-IDF logistic regression.

    Some tickets mix two teams' phrases (hard cases) and a few carry a wrong
    routing label. Logits are out of fold.
    """
    from sklearn.feature_extraction.text import TfidfVectorizer
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import StratifiedKFold, cross_val_predict
    from sklearn.pipeline import make_pipeline

    rng = np.random.default_rng(seed)
    k = len(_TEAMS)
    y = rng.integers(0, k, n)
    texts, channel = [], []
    for team in y:
        words = [str(rng.choice(_PHRASES[_TEAMS[team]]))]
        if rng.random() < 0.25:  # a second issue from another team
            other = int((team + rng.integers(1, k)) % k)
            words.append("also " + str(rng.choice(_PHRASES[_TEAMS[other]])))
        words.insert(int(rng.integers(0, 2)), str(rng.choice(_FILLER)))
        texts.append(", ".join(words))
        channel.append(str(rng.choice(["email", "chat", "phone note"])))
    flipped = rng.choice(n, size=n_flips, replace=False)
    y_given = y.copy()
    y_given[flipped] = (y[flipped] + rng.integers(1, k, n_flips)) % k
    model = make_pipeline(TfidfVectorizer(ngram_range=(1, 2)), LogisticRegression(C=3.0, max_iter=2000))
    cv = StratifiedKFold(n_splits=5, shuffle=True, random_state=seed)
    z = cross_val_predict(model, texts, y_given, cv=cv, method="decision_function")
    is_flip = np.zeros(n, dtype=bool)
    is_flip[flipped] = True
    meta = pd.DataFrame({"channel": channel, "was_flipped": is_flip})
    ids = np.array([f"T-{10000 + i}" for i in range(n)])
    return LogitFrame(z.astype(np.float32), labels=y_given, classes=list(_TEAMS), ids=ids, meta=meta, texts=texts)


def build_bundled(directory: str | os.PathLike[str]) -> list[Path]:
    """Regenerate the bundled demo files into ``directory`` (used when releasing)."""
    out = []
    for name, make in (("mailroom", make_mailroom_digits), ("helpdesk", make_helpdesk_tickets)):
        path = Path(directory) / _FILES[name]
        make().write(path)
        out.append(path)
    return out
