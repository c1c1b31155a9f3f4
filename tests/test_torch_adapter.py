"""LogitFrame.from_torch against torch itself: the model's eval-mode outputs from a plain no-grad loop.

Every reference below is computed with torch directly (``model.eval()`` under ``torch.no_grad()``, one
batch at a time, ``torch.cat``), so the frame must hold exactly the same numbers (bit for bit: same
batches, same kernels, same dtype). CPU only, tiny models, a second or two in all.
"""

from __future__ import annotations

import subprocess
import sys
from types import SimpleNamespace

import numpy as np
import pytest

torch = pytest.importorskip("torch")
from torch import nn  # noqa: E402
from torch.utils.data import DataLoader, Dataset, IterableDataset, TensorDataset  # noqa: E402

from logitscope import LogitFrame  # noqa: E402
from logitscope.errors import InputTypeError, LogitscopeError, ParameterError, ShapeError  # noqa: E402

DIGITS = [str(d) for d in range(10)]
TEAMS = ["billing", "password reset", "printer"]


class PostcodeNet(nn.Module):
    """A tiny CNN for 8 x 8 postcode digits, with batch norm and dropout (both differ in train mode)."""

    def __init__(self, channels: int = 1) -> None:
        super().__init__()
        self.conv = nn.Conv2d(channels, 4, 3, padding=1)
        self.norm = nn.BatchNorm2d(4)
        self.drop = nn.Dropout(0.5)
        self.head = nn.Linear(4 * 8 * 8, 10)

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        h = self.drop(torch.relu(self.norm(self.conv(x))))
        return self.head(h.flatten(1))


class TicketNet(nn.Module):
    """A tiny help-desk ticket router: sum of word embeddings (EmbeddingBag), dropout, linear head."""

    def __init__(self, vocab: int = 40, returns: str = "dict") -> None:
        super().__init__()
        self.bag = nn.EmbeddingBag(vocab, 8, mode="sum")
        self.drop = nn.Dropout(0.5)
        self.head = nn.Linear(8, 3)
        self.returns = returns

    def forward(self, input_ids: torch.Tensor, per_sample_weights: torch.Tensor | None = None) -> object:
        z = self.head(self.drop(self.bag(input_ids, per_sample_weights=per_sample_weights)))
        if self.returns == "dict":
            return {"logits": z, "hidden": None}
        if self.returns == "object":
            return SimpleNamespace(logits=z, loss=None)
        if self.returns == "tuple":
            return (z, None)
        return z


def _digits(n: int = 50, channels: int = 1, seed: int = 0) -> TensorDataset:
    g = torch.Generator().manual_seed(seed)
    return TensorDataset(torch.randn(n, channels, 8, 8, generator=g), torch.randint(0, 10, (n,), generator=g))


def _trained_net(channels: int = 1) -> PostcodeNet:
    torch.manual_seed(1)
    net = PostcodeNet(channels)
    with torch.no_grad():  # give batch norm running statistics that differ from batch statistics
        net.norm.running_mean.uniform_(-0.5, 0.5)
        net.norm.running_var.uniform_(0.5, 2.0)
    return net.train()


def _reference(model: nn.Module, loader: DataLoader) -> tuple[np.ndarray, np.ndarray]:
    """The hand-written loop every user writes: eval mode, no grad, batch by batch."""
    was = model.training
    model.eval()
    zs, ys = [], []
    with torch.no_grad():
        for x, y, *_ in loader:
            zs.append(model(x))
            ys.append(y)
    model.train(was)
    return torch.cat(zs).numpy(), torch.cat(ys).numpy()


class TicketSet(Dataset):
    """Help-desk tickets as dicts: token ids, label, ticket id and text (strings are collated to lists)."""

    WORDS = "invoice refund charge password login locked printer toner jam paper card reset".split()

    def __init__(self, n: int = 23, length: int = 6, seed: int = 3) -> None:
        rng = np.random.default_rng(seed)
        self.tokens = rng.integers(0, len(self.WORDS), size=(n, length))
        self.labels = rng.integers(0, 3, size=n)

    def __len__(self) -> int:
        return len(self.labels)

    def __getitem__(self, i: int) -> dict[str, object]:
        return {
            "input_ids": torch.as_tensor(self.tokens[i]),
            "labels": int(self.labels[i]),
            "ids": f"T-{i:04d}",
            "text": " ".join(self.WORDS[t] for t in self.tokens[i]),
        }


# --------------------------------------------------------------------------- images


def test_cnn_matches_the_hand_written_no_grad_loop():
    net = _trained_net()
    loader = DataLoader(_digits(), batch_size=8)  # 50 rows: six full batches and one of 2
    frame = LogitFrame.from_torch(net, loader, classes=DIGITS, progress=False)
    z_ref, y_ref = _reference(net, loader)
    # exact equality with torch's own eval-mode outputs (same batches, same kernels, same dtype)
    np.testing.assert_array_equal(frame.logits, z_ref)
    np.testing.assert_array_equal(frame.labels, y_ref)
    assert frame.logits.dtype == np.float32 and frame.classes == tuple(DIGITS)
    np.testing.assert_array_equal(frame.ids, np.arange(50))
    assert frame.payload is None


def test_train_mode_comes_back_and_eval_behaviour_is_used():
    net = _trained_net()
    stats = [t.clone() for t in (net.norm.running_mean, net.norm.running_var, net.norm.num_batches_tracked)]
    loader = DataLoader(_digits(), batch_size=16)
    first = LogitFrame.from_torch(net, loader, progress=False)
    second = LogitFrame.from_torch(net, loader, progress=False)
    assert net.training and all(m.training for m in net.modules())
    # dropout off: two runs agree exactly (in train mode, p=0.5 dropout would differ between runs)
    np.testing.assert_array_equal(first.logits, second.logits)
    # batch norm on its running statistics, which the run leaves untouched (train mode would update them)
    for before, after in zip(
        stats, (net.norm.running_mean, net.norm.running_var, net.norm.num_batches_tracked), strict=True
    ):
        assert torch.equal(before, after)
    # and the numbers are those of model.eval() (torch's definition of inference behaviour)
    net.eval()
    with torch.no_grad():
        ref = torch.cat([net(x) for x, _ in loader]).numpy()
    np.testing.assert_array_equal(first.logits, ref)
    # a train-mode forward pass gives other numbers, so the check above can fail
    net.train()
    with torch.no_grad():
        train_out = torch.cat([net(x) for x, _ in loader]).numpy()
    assert not np.allclose(train_out, ref)


def test_mixed_modes_are_restored_module_by_module():
    net = _trained_net()
    net.norm.eval()  # a frozen batch-norm layer inside a model that trains
    before = [m.training for m in net.modules()]
    LogitFrame.from_torch(net, DataLoader(_digits(20), batch_size=8), progress=False)
    assert [m.training for m in net.modules()] == before
    net.eval()
    LogitFrame.from_torch(net, DataLoader(_digits(20), batch_size=8), progress=False)
    assert not any(m.training for m in net.modules())


def test_no_gradients_are_kept():
    net = _trained_net()
    seen: list[tuple[bool, bool]] = []
    hook = net.register_forward_hook(lambda m, i, out: seen.append((torch.is_grad_enabled(), out.requires_grad)))
    try:
        LogitFrame.from_torch(net, DataLoader(_digits(), batch_size=8), progress=False)
    finally:
        hook.remove()
    assert len(seen) == 7 and not any(g or r for g, r in seen)
    assert all(p.grad is None for p in net.parameters())
    assert torch.is_grad_enabled()  # the caller's grad mode is back
    # a forward pass outside from_torch does track gradients, so the hook could have seen them
    out = net(torch.randn(2, 1, 8, 8))
    assert out.requires_grad


def test_mode_is_restored_when_the_model_raises():
    class Breaks(nn.Module):
        def __init__(self) -> None:
            super().__init__()
            self.inner = _trained_net()
            self.calls = 0

        def forward(self, x: torch.Tensor) -> torch.Tensor:
            self.calls += 1
            if self.calls == 3:
                raise RuntimeError("sorter jammed")
            return self.inner(x)

    net = Breaks().train()
    with pytest.raises(RuntimeError, match="sorter jammed") as info:
        LogitFrame.from_torch(net, DataLoader(_digits(), batch_size=8), progress=False)
    assert any("batch 2" in note for note in info.value.__notes__)
    assert net.training and all(m.training for m in net.modules())
    assert torch.is_grad_enabled()


def test_three_item_batches_and_kept_images():
    x, y = _digits(30).tensors
    ids = torch.arange(1000, 1030)
    loader = DataLoader(TensorDataset(x, y, ids), batch_size=7)
    frame = LogitFrame.from_torch(_trained_net(), loader, progress=False, keep_inputs=True)
    np.testing.assert_array_equal(frame.ids, ids.numpy())
    assert frame.payload is not None and frame.payload.kind == "images"
    np.testing.assert_array_equal(frame.payload.data, x[:, 0].numpy())  # one channel: (H, W)

    rgb = _digits(12, channels=3)
    frame = LogitFrame.from_torch(_trained_net(3), DataLoader(rgb, batch_size=5), progress=False, keep_inputs=True)
    # (C, H, W) -> (H, W, C), reference: torch's permute
    np.testing.assert_array_equal(frame.payload.data, rgb.tensors[0].permute(0, 2, 3, 1).numpy())


def test_batch_without_labels_and_float64_model():
    net = _trained_net().double()
    x = torch.randn(9, 1, 8, 8, dtype=torch.float64)
    frame = LogitFrame.from_torch(net, DataLoader(TensorDataset(x), batch_size=4), progress=False)
    assert not frame.has_labels and frame.logits.dtype == np.float64
    net.eval()
    with torch.no_grad():
        ref = torch.cat([net(x[:4]), net(x[4:8]), net(x[8:])]).numpy()  # the same batches: four, four, one
    np.testing.assert_array_equal(frame.logits, ref)
    # bare tensors as batches, given as a plain list (no dataset, no DataLoader)
    frame = LogitFrame.from_torch(net, [x[:5], x[5:]], progress=False)
    with torch.no_grad():
        np.testing.assert_array_equal(frame.logits, torch.cat([net(x[:5]), net(x[5:])]).numpy())


def test_loader_of_unknown_length_grows_its_arrays():
    data = _digits(41)

    class Stream(IterableDataset):
        def __iter__(self):
            return iter(zip(*data.tensors, strict=True))

    net = _trained_net()
    loader = DataLoader(Stream(), batch_size=3)  # len(dataset) unknown: the arrays double as they fill
    frame = LogitFrame.from_torch(net, loader, progress=False)
    z_ref, y_ref = _reference(net, loader)
    np.testing.assert_array_equal(frame.logits, z_ref)
    np.testing.assert_array_equal(frame.labels, y_ref)
    gen = ((x, y) for x, y in DataLoader(data, batch_size=3))  # a generator: no len at all
    np.testing.assert_array_equal(LogitFrame.from_torch(net, gen, progress=False).logits, z_ref)


def test_dataset_classes_are_used_and_shuffling_without_ids_warns():
    class Postcodes(TensorDataset):
        classes = DIGITS

    data = Postcodes(*_digits(16).tensors)
    frame = LogitFrame.from_torch(_trained_net(), DataLoader(data, batch_size=8), progress=False)
    assert frame.classes == tuple(DIGITS)
    with pytest.warns(UserWarning, match="shuffles"):
        LogitFrame.from_torch(_trained_net(), DataLoader(data, batch_size=8, shuffle=True), progress=False)


def test_binary_single_logit_model_reads_as_log_odds():
    torch.manual_seed(4)
    net = nn.Sequential(nn.Flatten(), nn.Linear(64, 1))  # "is there a stamp?", one logit
    x = torch.randn(10, 1, 8, 8)
    frame = LogitFrame.from_torch(net, DataLoader(TensorDataset(x, torch.arange(10) % 2), batch_size=4),
                                  classes=["no stamp", "stamp"], progress=False)  # fmt: skip
    with torch.no_grad():
        ref = torch.sigmoid(net(x)[:, 0]).numpy()  # reference: torch.sigmoid of the log-odds
    np.testing.assert_allclose(frame.probabilities()[:, 1], ref, rtol=1e-6)


# --------------------------------------------------------------------------- text models, dict batches


@pytest.mark.parametrize("returns", ["dict", "object", "tuple", "tensor"])
def test_text_model_with_dict_batches(returns):
    torch.manual_seed(2)
    net = TicketNet(vocab=len(TicketSet.WORDS), returns=returns).train()
    data = TicketSet()
    loader = DataLoader(data, batch_size=5)
    frame = LogitFrame.from_torch(net, loader, classes=TEAMS, progress=False, text_key="text")
    net.eval()
    with torch.no_grad():  # the loop a user writes for a text model: keyword arguments from the batch
        ref = torch.cat([torch.as_tensor(net.head(net.bag(b["input_ids"]))) for b in loader]).numpy()
    np.testing.assert_array_equal(frame.logits, ref)
    np.testing.assert_array_equal(frame.labels, data.labels)
    assert list(frame.ids) == [f"T-{i:04d}" for i in range(len(data))]
    assert frame.payload.kind == "texts" and frame.payload.data[3] == data[3]["text"]
    net.train()
    LogitFrame.from_torch(net, loader, progress=False)
    assert net.training


def test_dict_tensors_go_to_the_model_as_keyword_arguments():
    torch.manual_seed(2)
    net = TicketNet(vocab=12, returns="tensor")
    batch = {"input_ids": torch.tensor([[1, 2, 3], [4, 5, 5]]), "per_sample_weights": torch.ones(2, 3),
             "labels": torch.tensor([0, 2]), "source": ["mail", "chat"]}  # fmt: skip
    frame = LogitFrame.from_torch(net, [batch], progress=False)
    net.eval()
    with torch.no_grad():
        np.testing.assert_array_equal(frame.logits, net(batch["input_ids"], batch["per_sample_weights"]).numpy())
    assert frame.labels.tolist() == [0, 2]
    # (inputs-dict, labels) tuples are read the same way
    frame2 = LogitFrame.from_torch(net, [({"input_ids": batch["input_ids"]}, batch["labels"])], progress=False)
    np.testing.assert_array_equal(frame2.labels, frame.labels)


def test_progress_bar_goes_to_stderr(capsys):
    LogitFrame.from_torch(_trained_net(), DataLoader(_digits(16), batch_size=4), progress=True)
    captured = capsys.readouterr()
    assert "logits" in captured.err and captured.out == ""
    LogitFrame.from_torch(_trained_net(), DataLoader(_digits(16), batch_size=4), progress=False)
    assert capsys.readouterr().err == ""


# --------------------------------------------------------------------------- errors of our own


def _x(n: int = 4) -> torch.Tensor:
    return torch.randn(n, 1, 8, 8)


@pytest.mark.parametrize(
    ("batches", "error", "match"),
    [
        (["not a batch"], InputTypeError, "batch 0 is a str"),
        ([(_x(), torch.zeros(4), torch.arange(4), "extra")], InputTypeError, "batch 0 is a tuple of 4 items"),
        (
            [(_x(), torch.zeros(4, dtype=torch.long)), (_x(), torch.zeros(3, dtype=torch.long))],
            ShapeError,
            r"batch 1: labels have shape \(3,\)",
        ),
        ([(_x(), torch.eye(10)[:4])], ShapeError, r"batch 0: labels have shape \(4, 10\).*one-hot"),
        ([(_x(), torch.zeros(4, dtype=torch.long)), (_x(),)], InputTypeError, "batch 1 has no labels"),
        ([([1, 2, 3], torch.zeros(3))], InputTypeError, "batch 0: the inputs must be a tensor"),
        ([{"labels": torch.zeros(2)}], InputTypeError, "batch 0 is a dict without tensors"),
        (
            [(_x(), torch.arange(4), ["a", "b", "c", "d"]), (_x(), torch.arange(4), torch.arange(4))],
            InputTypeError,
            "batch 1: ids are of dtype",
        ),
        ([], ShapeError, "no batches"),
    ],
)
def test_bad_batches_name_the_batch(batches, error, match):
    with pytest.raises(error, match=match):
        LogitFrame.from_torch(_trained_net(), batches, progress=False)


def test_bad_outputs_and_options_name_the_problem():
    class Odd(nn.Module):
        def __init__(self, out):
            super().__init__()
            self.out = out
            self.calls = 0

        def forward(self, x):
            self.calls += 1
            return self.out(x, self.calls)

    x = _x()
    cases = [
        (lambda x, c: torch.zeros(4, 3, 2), ShapeError, r"batch 0: the model's logits have shape \(4, 3, 2\)"),
        (lambda x, c: torch.zeros(4, 3 if c == 1 else 4), ShapeError, r"batch 1: the model's logits have shape"),
        (lambda x, c: torch.zeros(4, 3) if c == 1 else torch.zeros(4), ShapeError, "batch 1"),
        (lambda x, c: {"scores": torch.zeros(4, 3)}, InputTypeError, "dict without 'logits'"),
        (lambda x, c: "three", InputTypeError, "batch 0: the model returned a str"),
        (lambda x, c: (np.zeros((4, 3)),), InputTypeError, "logits are a ndarray, not a tensor"),
    ]
    for out, error, match in cases:
        with pytest.raises(error, match=match):
            LogitFrame.from_torch(Odd(out), [x, x], progress=False)
    net, loader = _trained_net(), [(x, torch.arange(4), torch.arange(4))]
    with pytest.raises(ParameterError, match="both as an argument and in the batches"):
        LogitFrame.from_torch(net, loader, ids=[9, 8, 7, 6], progress=False)
    with pytest.raises(ParameterError, match="not a torch device"):
        LogitFrame.from_torch(net, loader, device="sorting-machine", progress=False)
    with pytest.raises(InputTypeError, match="no key 'text'"):
        LogitFrame.from_torch(net, loader, text_key="text", progress=False)
    with pytest.raises(ParameterError, match="text_key"):
        LogitFrame.from_torch(TicketNet(), [{"input_ids": torch.zeros(2, 3, dtype=torch.long)}], keep_inputs=True,
                              progress=False)  # fmt: skip
    with pytest.raises(ShapeError, match=r"keep_inputs=True keeps images .* \(4, 64\)"):
        flat = nn.Sequential(nn.Linear(64, 3))
        LogitFrame.from_torch(flat, [(torch.randn(4, 64), torch.arange(4))], keep_inputs=True, progress=False)
    with pytest.raises(InputTypeError, match="loader must be an iterable"):
        LogitFrame.from_torch(net, 42, progress=False)
    # labels out of range are caught by the frame's own check, naming the rows
    with pytest.raises(LogitscopeError, match="out of range at row 2"):
        LogitFrame.from_torch(net, [(x, torch.tensor([0, 1, 10, 2]))], progress=False)
    assert net.training


def test_package_imports_without_torch():
    code = (
        "import sys, importlib.abc\n"
        "class NoTorch(importlib.abc.MetaPathFinder):\n"
        "    def find_spec(self, name, path, target=None):\n"
        "        if name.split('.')[0] == 'torch':\n"
        "            raise ImportError('no torch here')\n"
        "sys.meta_path.insert(0, NoTorch())\n"
        "import logitscope\n"
        "assert 'torch' not in sys.modules\n"
        "try:\n"
        "    logitscope.LogitFrame.from_torch(object(), [])\n"
        "except ImportError as e:\n"
        "    print('ImportError:', e)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert "ImportError: LogitFrame.from_torch needs PyTorch" in out.stdout
