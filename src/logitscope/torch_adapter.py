"""Running a torch model over a data loader and gathering its logits into a frame.

:func:`frame_from_torch` (also :meth:`logitscope.LogitFrame.from_torch`) runs
the model in eval mode under :func:`torch.no_grad`, batch by batch, and puts
the logits, labels, ids and (if asked) the inputs into arrays allocated once:
``len(loader.dataset)`` rows when the loader knows its dataset's length, else
a first guess that doubles whenever it fills. Every module's train/eval flag
is put back afterwards, also when the model raises.

Batches the loader may yield
----------------------------
==================================  ==================================================
batch                               read as
==================================  ==================================================
``inputs``  (a tensor)              inputs only, no labels
``(inputs,)``                       inputs only (a ``TensorDataset`` of one tensor)
``(inputs, labels)``                inputs and class indices
``(inputs, labels, ids)``           inputs, class indices and sample ids
``{"input_ids": ..., ...}``         the model is called with the dict's tensors as
                                    keyword arguments, less ``labels`` and ``ids``,
                                    which are read as labels and ids (text models)
==================================  ==================================================

``inputs`` in a tuple may itself be a dict of tensors (keyword arguments).

Outputs the model may return: a tensor ``(B, K)`` of logits, a tuple or list
whose first item is that tensor, or a dict or object with a ``logits`` entry
(as text models return). One logit per sample, ``(B,)`` or ``(B, 1)``, is read
as a binary model's log-odds of class 1 (see ``LogitFrame(..., binary=True)``).

torch is imported only when a model is run, so logitscope imports without it.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from .errors import InputTypeError, ParameterError, ShapeError

if TYPE_CHECKING:
    from .frame import LogitFrame

__all__ = ["frame_from_torch"]

#: Keys of a dict batch that are read as labels and ids, never passed to the model.
LABEL_KEY = "labels"
ID_KEY = "ids"


def _import_torch() -> Any:
    try:
        import torch
    except ImportError as exc:  # pragma: no cover - torch is installed where the tests run
        raise ImportError(
            "LogitFrame.from_torch needs PyTorch, which is not installed; "
            "install it (pip install 'logitscope[torch]') or pass the logits to LogitFrame directly"
        ) from exc
    return torch


class _Rows:
    """Rows gathered batch by batch into one array, allocated once and doubled when full.

    Examples
    --------
    >>> r = _Rows(capacity=3)
    >>> r.put(np.array([[1.0, 2.0], [3.0, 4.0]]), "logits", 0)
    >>> r.put(np.array([[5.0, 6.0], [7.0, 8.0]]), "logits", 1)  # grows to 6 rows
    >>> r.result().tolist(), r.allocated
    ([[1.0, 2.0], [3.0, 4.0], [5.0, 6.0], [7.0, 8.0]], 6)
    """

    def __init__(self, capacity: int | None) -> None:
        self.capacity = capacity
        self.array: np.ndarray | None = None
        self.n = 0

    @property
    def allocated(self) -> int:
        return 0 if self.array is None else int(self.array.shape[0])

    def put(self, block: np.ndarray, what: str, batch: int) -> None:
        b = int(block.shape[0])
        if self.array is None:
            rows = max(self.capacity or 0, b)
            self.array = np.empty((rows, *block.shape[1:]), dtype=block.dtype)
        elif block.shape[1:] != self.array.shape[1:]:
            raise ShapeError(
                f"batch {batch}: {what} have shape {tuple(block.shape)} but earlier batches had "
                f"(batch, {', '.join(str(s) for s in self.array.shape[1:])})"
            )
        elif block.dtype != self.array.dtype:
            if (block.dtype.kind in "OSU") != (self.array.dtype.kind in "OSU"):  # numbers after strings or back
                raise InputTypeError(
                    f"batch {batch}: {what} are of dtype {block.dtype} but earlier batches gave {self.array.dtype}"
                )
            wider = np.result_type(block.dtype, self.array.dtype)
            if wider != self.array.dtype:
                self.array = self.array.astype(wider)
        if self.n + b > self.array.shape[0]:
            grown = np.empty((max(2 * self.array.shape[0], self.n + b), *self.array.shape[1:]), self.array.dtype)
            grown[: self.n] = self.array[: self.n]
            self.array = grown
        self.array[self.n : self.n + b] = block
        self.n += b

    def result(self) -> np.ndarray:
        assert self.array is not None
        if self.n == self.array.shape[0]:
            return self.array
        return self.array[: self.n].copy()  # do not keep the unused tail alive


@dataclass
class _Batch:
    args: tuple[Any, ...]
    kwargs: dict[str, Any]
    labels: Any
    ids: Any
    texts: Any
    images: Any


def _describe(x: Any) -> str:
    shape = getattr(x, "shape", None)
    if shape is not None:
        return f"{type(x).__name__} of shape {tuple(shape)}"
    return type(x).__name__


def _split_batch(torch: Any, batch: Any, i: int, text_key: str | None, keep_inputs: bool) -> _Batch:
    """Read one batch into model arguments, labels, ids, texts and images (not yet on the device)."""
    labels = ids = texts = images = None
    if isinstance(batch, Mapping):
        fields: Mapping[str, Any] = batch
        inputs: Any = None
        labels, ids = fields.get(LABEL_KEY), fields.get(ID_KEY)
    elif isinstance(batch, torch.Tensor):
        fields, inputs = {}, batch
    elif isinstance(batch, (tuple, list)):
        if not 1 <= len(batch) <= 3:
            raise InputTypeError(
                f"batch {i} is a {type(batch).__name__} of {len(batch)} items; expected (inputs,), "
                "(inputs, labels) or (inputs, labels, ids)"
            )
        fields, inputs = {}, batch[0]
        labels = batch[1] if len(batch) > 1 else None
        ids = batch[2] if len(batch) > 2 else None
        if isinstance(inputs, Mapping):
            fields, inputs = inputs, None
    else:
        raise InputTypeError(
            f"batch {i} is a {type(batch).__name__}; expected a tensor, a tuple (inputs, labels[, ids]) "
            "or a dict of tensors"
        )
    if text_key is not None:
        if text_key not in fields:
            have = ", ".join(repr(k) for k in fields) or "none (the batch is not a dict)"
            raise InputTypeError(f"batch {i} has no key {text_key!r} for the texts; its keys: {have}")
        texts = fields[text_key]
        if isinstance(texts, str) or not isinstance(texts, Sequence) or not all(isinstance(t, str) for t in texts):
            raise InputTypeError(f"batch {i}: {text_key!r} must hold a list of strings, got {_describe(texts)}")
    if inputs is not None:
        if not isinstance(inputs, torch.Tensor):
            raise InputTypeError(
                f"batch {i}: the inputs must be a tensor or a dict of tensors, got {_describe(inputs)}"
            )
        if keep_inputs and text_key is None:
            images = inputs
        return _Batch((inputs,), {}, labels, ids, texts, images)
    skip = {LABEL_KEY, ID_KEY, text_key}
    kwargs = {k: v for k, v in fields.items() if k not in skip and isinstance(v, torch.Tensor)}
    if not kwargs:
        raise InputTypeError(f"batch {i} is a dict without tensors to pass to the model (keys {list(fields)})")
    if keep_inputs and text_key is None:
        raise ParameterError(
            f"batch {i} is a dict: say which key holds the texts to keep with text_key=..., "
            "or yield (images, labels) batches to keep images"
        )
    return _Batch((), kwargs, labels, ids, texts, images)


def _logits_of(torch: Any, out: Any, i: int) -> Any:
    """The logits tensor in a model's output (tensor, tuple, dict or object with ``logits``)."""
    if isinstance(out, torch.Tensor):
        return out
    if isinstance(out, Mapping):
        if "logits" in out:
            found = out["logits"]
        else:
            raise InputTypeError(f"batch {i}: the model returned a dict without 'logits' (keys {list(out)})")
    elif isinstance(out, (tuple, list)):
        if not out:
            raise InputTypeError(f"batch {i}: the model returned an empty {type(out).__name__}")
        found = out[0]
    elif hasattr(out, "logits"):
        found = out.logits
    else:
        raise InputTypeError(
            f"batch {i}: the model returned a {type(out).__name__}; expected a tensor of logits, a tuple whose "
            "first item is the logits, or a dict or object with 'logits'"
        )
    if not isinstance(found, torch.Tensor):
        raise InputTypeError(f"batch {i}: the model's logits are a {type(found).__name__}, not a tensor")
    return found


def _to_numpy(torch: Any, t: Any) -> np.ndarray:
    t = t.detach()
    if t.dtype == torch.bfloat16:  # numpy has no bfloat16
        t = t.float()
    return np.asarray(t.cpu().numpy())


def _per_sample(torch: Any, value: Any, b: int, what: str, i: int) -> np.ndarray:
    """Labels or ids of one batch as a 1-D array of length ``b``."""
    arr = _to_numpy(torch, value) if isinstance(value, torch.Tensor) else np.asarray(value)
    if arr.ndim != 1 or arr.shape[0] != b:
        raise ShapeError(
            f"batch {i}: {what} have shape {tuple(arr.shape)} but the model gave {b} rows of logits; "
            f"expected ({b},)" + (" class indices (one-hot labels are not read)" if what == "labels" else "")
        )
    return arr


def _images_of(torch: Any, x: Any, b: int, i: int) -> np.ndarray:
    """One batch of image tensors as numpy (B, H, W, C) or (B, H, W) for thumbnails."""
    if x.ndim == 4 and x.shape[1] in (1, 3, 4):
        x = x[:, 0] if x.shape[1] == 1 else x.permute(0, 2, 3, 1)
    elif x.ndim != 3:
        raise ShapeError(
            f"batch {i}: keep_inputs=True keeps images of shape (B, C, H, W) with C in 1, 3, 4, or (B, H, W); "
            f"the inputs have shape {tuple(x.shape)}"
        )
    if x.shape[0] != b:
        raise ShapeError(f"batch {i}: {x.shape[0]} images but {b} rows of logits")
    return _to_numpy(torch, x)


def _model_device(torch: Any, model: Any, device: Any) -> Any:
    if device is not None:
        try:
            return torch.device(device)
        except (RuntimeError, TypeError) as exc:
            raise ParameterError(f"device {device!r} is not a torch device: {exc}") from exc
    if isinstance(model, torch.nn.Module):
        for tensor in (*model.parameters(), *model.buffers()):
            return tensor.device
    return torch.device("cpu")


def _expected_rows(loader: Any) -> int | None:
    try:
        return len(loader.dataset)
    except (AttributeError, TypeError, NotImplementedError):
        return None


def _batches_expected(loader: Any) -> int | None:
    try:
        return len(loader)
    except (TypeError, NotImplementedError):
        return None


def _shuffles(torch: Any, loader: Any) -> bool:
    sampler = getattr(loader, "sampler", None)
    return isinstance(sampler, torch.utils.data.RandomSampler)


def _to_device(torch: Any, x: Any, device: Any) -> Any:
    return x.to(device, non_blocking=True) if isinstance(x, torch.Tensor) else x


@dataclass
class _Gathered:
    logits: np.ndarray
    labels: np.ndarray | None
    ids: np.ndarray | None
    images: np.ndarray | None
    texts: list[str] | None
    binary: bool


def _gather(
    torch: Any, model: Any, loader: Iterable[Any], device: Any, progress: bool, keep_inputs: bool,
    text_key: str | None,
) -> _Gathered:  # fmt: skip
    from tqdm.auto import tqdm

    capacity = _expected_rows(loader)
    logits, labels, ids, images = _Rows(capacity), _Rows(capacity), _Rows(capacity), _Rows(capacity)
    texts: list[str] = []
    first: _Batch | None = None
    binary = False
    bar = tqdm(loader, total=_batches_expected(loader), disable=not progress, desc="logits", unit="batch", leave=False)
    try:
        for i, batch in enumerate(bar):
            part = _split_batch(torch, batch, i, text_key, keep_inputs)
            if first is None:
                first = part
            for what, now, then in (("labels", part.labels, first.labels), ("ids", part.ids, first.ids)):
                if (now is None) != (then is None):
                    had = "had" if then is not None else "had no"
                    raise InputTypeError(f"batch {i} {'has no' if now is None else 'has'} {what}; batch 0 {had} {what}")
            args = tuple(_to_device(torch, a, device) for a in part.args)
            kwargs = {k: _to_device(torch, v, device) for k, v in part.kwargs.items()}
            try:
                out = model(*args, **kwargs)
            except Exception as exc:
                exc.add_note(f"logitscope: raised by the model on batch {i} of the loader")
                raise
            z = _to_numpy(torch, _logits_of(torch, out, i))
            one_column = z.ndim == 1 or (z.ndim == 2 and z.shape[1] == 1)
            if i == 0:
                binary = one_column
            if z.ndim not in (1, 2) or one_column != binary:
                want = "(batch,) or (batch, 1) as in batch 0" if binary else "(batch, classes)"
                raise ShapeError(f"batch {i}: the model's logits have shape {tuple(z.shape)}; expected {want}")
            if binary:
                z = z.reshape(-1, 1)
            b = int(z.shape[0])
            logits.put(z, "the model's logits", i)
            if part.labels is not None:
                labels.put(_per_sample(torch, part.labels, b, "labels", i), "labels", i)
            if part.ids is not None:
                ids.put(_per_sample(torch, part.ids, b, "ids", i), "ids", i)
            if part.images is not None:
                images.put(_images_of(torch, part.images, b, i), "images", i)
            if part.texts is not None:
                if len(part.texts) != b:
                    raise ShapeError(f"batch {i}: {len(part.texts)} texts under {text_key!r} but {b} rows of logits")
                texts.extend(part.texts)
    finally:
        bar.close()
    if first is None:
        raise ShapeError("the loader yielded no batches")
    z_all = logits.result()
    return _Gathered(
        logits=z_all[:, 0] if binary else z_all,
        labels=labels.result() if first.labels is not None else None,
        ids=ids.result() if first.ids is not None else None,
        images=images.result() if first.images is not None else None,
        texts=texts if text_key is not None else None,
        binary=binary,
    )


def frame_from_torch(
    model: Any,
    loader: Iterable[Any],
    *,
    classes: Sequence[str] | None = None,
    device: Any = None,
    ids: Any = None,
    progress: bool = True,
    keep_inputs: bool = False,
    text_key: str | None = None,
    frame_type: type[LogitFrame] | None = None,
) -> LogitFrame:
    """Run ``model`` over ``loader`` in eval mode without gradients and return its logits as a frame.

    Parameters
    ----------
    model : torch.nn.Module or callable
        Called as ``model(inputs)`` or ``model(**dict_batch)``. A module is put
        in eval mode for the run (dropout off, batch norm on its running
        statistics) and every submodule's train/eval flag is restored
        afterwards, also when the model raises.
    loader : iterable of batches
        A ``torch.utils.data.DataLoader`` or any iterable of batches (layouts
        in the module docstring).
    classes : sequence of str, optional
        Class names; default the dataset's ``classes`` attribute when it has
        one of the right length (as torchvision datasets do), else ``"0" ..``.
    device : str or torch.device, optional
        Where the batches are sent; default the device of the model's first
        parameter or buffer (the CPU for a model without any). The model is
        never moved.
    ids : sequence, optional
        Sample ids in the loader's order, when the batches carry none.
    progress : bool, default True
        Show a progress bar (``tqdm.auto``: a widget in Jupyter, text on a
        terminal); it is removed when the run ends.
    keep_inputs : bool, default False
        Keep the image tensors of ``(images, labels)`` batches as the frame's
        image payload: (C, H, W) becomes (H, W, C), one channel (H, W).
    text_key : str, optional
        Keep the strings under this key of dict batches as the text payload.
    frame_type : type, optional
        The frame class to build (:meth:`LogitFrame.from_torch` passes its own).

    Returns
    -------
    LogitFrame
        Logits in the model's output dtype (bfloat16 becomes float32), labels
        and ids when the batches carry them.

    Raises
    ------
    InputTypeError, ShapeError, ParameterError
        For a batch or an output the function cannot read; the message names
        the batch index. An error raised by the model itself is passed on with
        a note naming the batch.

    Examples
    --------
    >>> import torch
    >>> from torch.utils.data import DataLoader, TensorDataset
    >>> _ = torch.manual_seed(0)
    >>> digits = TensorDataset(torch.randn(10, 64), torch.arange(10) % 3)  # postcode digits, 8 x 8 pixels
    >>> frame = frame_from_torch(torch.nn.Linear(64, 3), DataLoader(digits, batch_size=4), progress=False)
    >>> frame.n_samples, frame.n_classes, frame.logits.dtype, frame.labels[:4].tolist()
    (10, 3, dtype('float32'), [0, 1, 2, 0])
    """
    torch = _import_torch()
    if not callable(model):
        raise InputTypeError(f"model must be a torch module or a callable, got {type(model).__name__}")
    if isinstance(loader, (str, bytes, Mapping)) or not isinstance(loader, Iterable):
        raise InputTypeError(f"loader must be an iterable of batches (a DataLoader), got {type(loader).__name__}")
    if text_key is not None and not isinstance(text_key, str):
        raise ParameterError(f"text_key must be a string key of the batch dicts, got {text_key!r}")
    dev = _model_device(torch, model, device)
    modules = list(model.modules()) if isinstance(model, torch.nn.Module) else []
    flags = [m.training for m in modules]
    try:
        if modules:
            model.eval()
        with torch.no_grad():
            got = _gather(torch, model, loader, dev, progress, keep_inputs, text_key)
    finally:
        if modules:
            model.train(flags[0])  # lets a module's own train() override run ...
            for m, flag in zip(modules, flags, strict=True):
                m.training = flag  # ... then puts back submodules that were in another mode
    if ids is not None and got.ids is not None:
        raise ParameterError("ids were given both as an argument and in the batches; pass one of them")
    if ids is None and got.ids is None and _shuffles(torch, loader):
        warnings.warn(
            "the loader shuffles and its batches carry no ids: rows are numbered in this run's random order, "
            "so frames of two runs do not line up; yield (inputs, labels, ids) batches or use shuffle=False",
            UserWarning,
            stacklevel=3,
        )
    k = 2 if got.binary else got.logits.shape[1]
    if classes is None:
        found = getattr(getattr(loader, "dataset", None), "classes", None)
        if isinstance(found, Sequence) and not isinstance(found, str) and len(found) == k:
            if len({str(c) for c in found}) == k:
                classes = [str(c) for c in found]
    if frame_type is None:
        from .frame import LogitFrame

        frame_type = LogitFrame
    return frame_type(
        got.logits,
        got.labels,
        classes,
        got.ids if ids is None else ids,
        images=got.images,
        texts=got.texts,
        binary=got.binary,
    )
